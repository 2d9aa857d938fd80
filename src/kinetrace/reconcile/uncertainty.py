"""Measurement standard deviations: given, or estimated from steady stretches of data."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ._errors import ReconciliationError

_METHODS = {
    "pooled_std": "pooled within-stretch standard deviation (stretch means removed)",
    "successive_difference": "von Neumann mean square successive difference, robust to slow drift",
}


def sigma_methods() -> list[str]:
    """Names accepted by ``estimate_sigma(method=...)``.

    >>> sigma_methods()
    ['pooled_std', 'successive_difference']
    """
    return list(_METHODS)


@dataclass(frozen=True)
class SigmaEstimate:
    """Standard deviations estimated from data.

    Attributes
    ----------
    sigma : ndarray (n,)
        Estimated standard deviation of each variable. [input units]
    dof : ndarray (n,)
        Degrees of freedom behind each estimate. [-]
    n_stretches : int
        Steady stretches used.
    n_short : int
        Stretches ignored as shorter than ``min_length``.
    method : str
        Estimator used.
    """

    sigma: np.ndarray
    dof: np.ndarray
    n_stretches: int
    n_short: int
    method: str

    @property
    def source(self) -> str:
        """Text recorded in results as ``sigma_source``."""
        return (f"estimated ({self.method}, {self.n_stretches} steady stretches, "
                f"min dof {int(self.dof.min()) if self.dof.size else 0})")


def _stretch_ids(steady, T):
    """Stretch number per step (-1 outside) from a bool mask or (start, stop) pairs."""
    arr = np.asarray(steady)
    if arr.dtype == bool:
        if arr.shape != (T,):
            raise ReconciliationError(f"steady mask has shape {arr.shape}; expected ({T},)")
        start = arr & ~np.concatenate([[False], arr[:-1]])
        ids = np.cumsum(start) - 1
        return np.where(arr, ids, -1)
    ids = np.full(T, -1)
    for k, (a, b) in enumerate(np.asarray(steady, dtype=int).reshape(-1, 2)):
        if not 0 <= a < b <= T:
            raise ReconciliationError(f"steady stretch {k} = ({a}, {b}) is outside 0..{T} or empty")
        if np.any(ids[a:b] >= 0):
            raise ReconciliationError(f"steady stretch {k} = ({a}, {b}) overlaps an earlier one")
        ids[a:b] = k
    return ids


def estimate_sigma(y, steady, method="pooled_std", min_length=10, names=None) -> SigmaEstimate:
    """Estimate measurement standard deviations from steady-state stretches.

    Parameters
    ----------
    y : array_like (T, n)
        Measurements; NaN entries are skipped. [any unit]
    steady : array_like
        Bool mask (T,) of steady steps (each run of True is one stretch), or a sequence
        of ``(start, stop)`` index pairs (stop exclusive).
    method : str
        One of :func:`sigma_methods`.
    min_length : int
        Stretches with fewer steps are ignored (and counted in ``n_short``).
    names : sequence of str, optional
        Variable labels for error messages.

    Returns
    -------
    SigmaEstimate
        ``sigma`` in the unit of ``y``.

    Raises
    ------
    ReconciliationError
        No steady stretch at all (a unit that is down), no finite reading of a variable in
        the usable stretches, or fewer than two degrees of freedom; the message names the
        variable.

    References
    ----------
    .. [1] von Neumann, J., Kent, R. H., Bellinson, H. R., Hart, B. I. (1941). The mean
       square successive difference. Ann. Math. Statist. 12(2), 153-162.
    .. [2] Narasimhan, S., Jordache, C. (2000). Data Reconciliation and Gross Error
       Detection, Ch. 2 (estimation of measurement error variances). Gulf.

    Examples
    --------
    >>> rng = np.random.default_rng(1)
    >>> y = 5.0 + 0.2 * rng.standard_normal((4000, 1))
    >>> est = estimate_sigma(y, np.ones(4000, bool))
    >>> round(float(est.sigma[0]), 2)
    0.2
    """
    if method not in _METHODS:
        raise ValueError(f"unknown sigma method {method!r}; allowed: {', '.join(_METHODS)}")
    y = np.asarray(y, dtype=float)
    if y.ndim == 1:
        y = y[:, None]
    T, n = y.shape
    names = list(names) if names is not None else [f"y[{j}]" for j in range(n)]
    ids = _stretch_ids(steady, T)
    n_all = int(ids.max()) + 1 if ids.size and ids.max() >= 0 else 0
    if n_all == 0:
        # a unit that is down, or whose readings never settle, has nothing to estimate from
        raise ReconciliationError(f"cannot estimate sigma of {', '.join(map(repr, names))}: no steady stretch "
                                  f"in {T} steps")
    counts = np.bincount(ids[ids >= 0], minlength=n_all)
    short = counts < min_length
    ids = np.where((ids >= 0) & ~short[np.maximum(ids, 0)], ids, -1)
    use = ids >= 0
    sigma, dof = np.empty(n), np.empty(n, int)
    for j in range(n):  # loop over variables, not time
        ok = use & np.isfinite(y[:, j])
        g, v = ids[ok], y[ok, j]
        if method == "pooled_std":
            cnt = np.bincount(g, minlength=n_all)
            mean = np.bincount(g, v, minlength=n_all) / np.maximum(cnt, 1)
            ss = np.sum((v - mean[g]) ** 2)
            d = int(np.sum(np.maximum(cnt - 1, 0)))
            sigma[j] = np.sqrt(ss / d) if d > 0 else np.nan
        else:
            same = (g[1:] == g[:-1]) & (np.flatnonzero(ok)[1:] == np.flatnonzero(ok)[:-1] + 1)
            dv = np.diff(v)[same]
            d = int(dv.size)
            sigma[j] = np.sqrt(np.sum(dv**2) / (2 * d)) if d > 0 else np.nan
        dof[j] = d
        if not ok.any():
            raise ReconciliationError(f"cannot estimate sigma of {names[j]!r}: no finite reading in steady "
                                      f"stretches of at least {min_length} steps")
        if d < 2:
            raise ReconciliationError(
                f"cannot estimate sigma of {names[j]!r}: only {d} degrees of freedom in steady "
                f"stretches of at least {min_length} steps ({int(short.sum())} shorter stretches ignored)"
            )
    return SigmaEstimate(sigma, dof, int(n_all - short.sum()), int(short.sum()), method)


def resolve_sigma(sigma):
    """Return ``(array, source)`` from given sigmas or a :class:`SigmaEstimate`."""
    if isinstance(sigma, SigmaEstimate):
        return sigma.sigma, sigma.source
    return sigma, "given"
