"""The two chart statistics, EWMA and tabular CUSUM, and the EWMA limits, for many series at once.

Axis 0 is time. The EWMA is a linear filter; the CUSUM uses the closed form of
Lindley's recursion, C_t = S_t - min(0, min_{s<=t} S_s) with S the running sum of
(x - k) started at C_0. The alarm logic on top of them is in :mod:`kinetrace.monitor.charts`.

References
----------
.. [1] Page, E. S. (1954). Continuous inspection schemes. Biometrika 41, 100-115.
.. [2] Lindley, D. V. (1952). The theory of queues with a single server. Proc.
   Cambridge Philos. Soc. 48, 277-289.
.. [3] Montgomery, D. C. (2009). Introduction to Statistical Quality Control, 6th ed.
   Wiley, ch. 9 (CUSUM and EWMA).
.. [4] Steiner, S. H. (1999). EWMA control charts with time-varying control limits
   and fast initial response. J. Quality Technology 31(1), 75-86.
"""

from __future__ import annotations

import numpy as np
from scipy import signal as sps

from kinetrace.errors import KinetraceError

__all__ = ["ewma_statistic", "ewma_limits", "list_ewma_limit_methods", "cusum_statistic"]


def ewma_statistic(x, lam: float, *, start=0.0) -> np.ndarray:
    """EWMA z_t = lam x_t + (1 - lam) z_{t-1} along axis 0.

    Parameters
    ----------
    x : array_like, shape (n,) or (n, runs)
        Standardised observations, time along axis 0. [sigma]
    lam : float
        Weight of the newest observation, 0 < lambda <= 1. [-]
    start : float or array_like
        z_0 (one per run). [sigma]

    Returns
    -------
    ndarray
        z_1..z_n, same shape as ``x``. [sigma]

    References
    ----------
    .. [1] Roberts, S. W. (1959). Control chart tests based on geometric moving
       averages. Technometrics 1(3), 239-250.

    Examples
    --------
    >>> ewma_statistic([1.0, 1.0], 0.5).tolist()
    [0.5, 0.75]
    """
    x = np.asarray(x, dtype=float)
    lam = float(lam)
    if not 0.0 < lam <= 1.0:
        raise KinetraceError(f"EWMA weight lambda must be in (0, 1], got {lam!r}")
    z0 = np.broadcast_to(np.asarray(start, dtype=float), x.shape[1:])
    zi = ((1.0 - lam) * z0)[None, ...]
    z, _ = sps.lfilter([lam], [1.0, -(1.0 - lam)], x, axis=0, zi=zi)
    return z


_EWMA_LIMITS = {
    "exact": "time-varying limits from the exact variance of the EWMA after i observations",
    "asymptotic": "the limits the exact ones tend to, L sqrt(lam / (2 - lam))",
}


def list_ewma_limit_methods() -> list[str]:
    """Names accepted by ``ewma_limits(method=...)`` and ``ewma_alarms(limits=...)``.

    Examples
    --------
    >>> list_ewma_limit_methods()
    ['exact', 'asymptotic']
    """
    return list(_EWMA_LIMITS)


def ewma_limits(n: int, lam: float, limit: float, *, method: str = "exact", fir=None,
                fir_decay: float = 0.3) -> np.ndarray:
    """Half-width of the EWMA control limits for the observations 1..n since the start.

    exact: L sqrt(lam / (2 - lam) [1 - (1 - lam)^(2 i)]); asymptotic: L sqrt(lam / (2 - lam)).
    With a fast initial response of fraction f the half-width is multiplied by
    1 - (1 - f)^(1 + a (i - 1)), which is f at the first observation and tends to 1.

    Parameters
    ----------
    n : int
        Number of observations. [-]
    lam : float
        EWMA weight, 0 < lambda <= 1. [-]
    limit : float
        Limit width L. [standard deviations of the asymptotic EWMA]
    method : {"exact", "asymptotic"}
        See :func:`list_ewma_limit_methods`.
    fir : float, optional
        Fraction f of the limits at the first observation, 0 < f < 1 (0.5 in Steiner 1999);
        None for no fast initial response. [-]
    fir_decay : float
        Rate a at which the fast initial response fades (0.3 in Steiner 1999). [1/observation]

    Returns
    -------
    ndarray (n,)
        Half-width of the limits around the in-control mean. [in-control sigma]

    References
    ----------
    .. [1] Montgomery, D. C. (2009). Introduction to Statistical Quality Control, 6th ed., sec. 9.2.
    .. [2] Steiner, S. H. (1999). J. Quality Technology 31(1), 75-86.

    Examples
    --------
    lambda = 0.1, L = 2.7 (the setting of Montgomery's EWMA example):

    >>> ewma_limits(3, 0.1, 2.7).round(4).tolist()
    [0.27, 0.3632, 0.424]
    >>> round(float(ewma_limits(1, 0.1, 2.7, method="asymptotic")[0]), 4)
    0.6194
    """
    lam = float(lam)
    if not 0.0 < lam <= 1.0:
        raise KinetraceError(f"EWMA weight lambda must be in (0, 1], got {lam!r}")
    if method not in _EWMA_LIMITS:
        raise KinetraceError(f"unknown EWMA limit method {method!r}; allowed: {', '.join(_EWMA_LIMITS)}")
    i = np.arange(1, int(n) + 1, dtype=float)
    var = np.full(i.shape, lam / (2.0 - lam))
    if method == "exact":
        var = var * -np.expm1(2.0 * i * np.log1p(-lam)) if lam < 1.0 else var
    half = float(limit) * np.sqrt(var)
    if fir is not None:
        f = float(fir)
        if not 0.0 < f < 1.0:
            raise KinetraceError(f"EWMA fast-initial-response fraction must be in (0, 1), got {fir!r}")
        half = half * -np.expm1((1.0 + float(fir_decay) * (i - 1.0)) * np.log1p(-f))
    return half


def _lindley(y: np.ndarray, start) -> np.ndarray:
    s = np.asarray(start, dtype=float) + np.cumsum(y, axis=0)
    return s - np.minimum(np.minimum.accumulate(s, axis=0), 0.0)


def cusum_statistic(x, k: float, *, start_upper=0.0, start_lower=0.0) -> tuple[np.ndarray, np.ndarray]:
    """Upper and lower tabular CUSUM along axis 0.

    C+_t = max(0, C+_{t-1} + x_t - k),  C-_t = max(0, C-_{t-1} - x_t - k).

    Parameters
    ----------
    x : array_like, shape (n,) or (n, runs)
        Standardised observations. [sigma]
    k : float
        Reference value. [sigma]
    start_upper, start_lower : float or array_like
        C+_0 and C-_0 (non-negative). [sigma]

    Returns
    -------
    (upper, lower) : tuple of ndarray
        Same shape as ``x``. [sigma]

    References
    ----------
    .. [1] Page, E. S. (1954). Biometrika 41, 100-115.
    .. [2] Lindley, D. V. (1952). Proc. Cambridge Philos. Soc. 48, 277-289.

    Examples
    --------
    >>> up, dn = cusum_statistic([1.0, 1.0, -3.0], 0.5)
    >>> up.tolist(), dn.tolist()
    ([0.5, 1.0, 0.0], [0.0, 0.0, 2.5])
    """
    x = np.asarray(x, dtype=float)
    return _lindley(x - k, start_upper), _lindley(-x - k, start_lower)
