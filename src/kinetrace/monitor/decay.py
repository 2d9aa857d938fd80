"""Catalyst decay laws fitted to activity against time on stream.

Each law gives the activity a(t) [-] at time on stream t [s]:

``linear``       a = a0 (1 - b t)                       params a0 [-], b [1/s]
``exponential``  a = a0 exp(-kd t)                      params a0 [-], kd [1/s]
``hyperbolic``   1/a = (1 + kd t) / a0                  params a0 [-], kd [1/s]
``nth_order``    a = a0 [1 + (m - 1) kd t]^(-1/(m-1))   params a0 [-], kd [1/s], m [-]

(the n-th order law of deactivation -da/dt = kd a^m with a(0) = a0 written for
a0 = 1 in the textbooks; hyperbolic is m = 2 and exponential is the limit m -> 1).

Fits are weighted nonlinear least squares (:func:`scipy.optimize.least_squares`,
trust-region reflective, bounds keeping a0 > 0 and decay constants >= 0).
Models are compared with the small-sample Akaike criterion AICc, counting the
residual variance as a parameter. The prediction band at time t uses the delta
method, var[a_hat(t)] = g' Cov(theta) g with g = d a / d theta, plus the residual
variance s^2 for a new observation, and a Student t quantile with n - p degrees of
freedom.

References
----------
.. [1] Fogler, H. S. (2016). Elements of Chemical Reaction Engineering, 5th ed.,
   ch. 10 (catalyst deactivation, decay laws).
.. [2] Levenspiel, O. (1999). Chemical Reaction Engineering, 3rd ed. Wiley, ch. 21
   (deactivating catalysts).
.. [3] Hurvich, C. M., Tsai, C.-L. (1989). Regression and time series model
   selection in small samples. Biometrika 76(2), 297-307 (AICc).
.. [4] Seber, G. A. F., Wild, C. J. (1989). Nonlinear Regression. Wiley, sec. 5.1
   (asymptotic covariance and prediction intervals of nonlinear least squares).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd
from scipy import optimize, stats

from kinetrace.errors import DataQualityError, KinetraceError
from kinetrace.kinetics.deactivation import DECAY_LAWS, ORDER_BOUNDS, DecayLaw
from kinetrace.monitor._common import DAY, float_values

__all__ = [
    "DecayFit",
    "list_decay_laws",
    "decay_activity",
    "fit_decay",
]


def list_decay_laws() -> list[str]:
    """Names of the decay laws :func:`fit_decay` and :func:`decay_activity` accept.

    Examples
    --------
    >>> list_decay_laws()
    ['linear', 'exponential', 'hyperbolic', 'nth_order']
    """
    return list(DECAY_LAWS)


def _law(method: str) -> DecayLaw:
    try:
        return DECAY_LAWS[method]
    except (KeyError, TypeError):
        raise KinetraceError(
            f"unknown decay law {method!r}; allowed: {', '.join(DECAY_LAWS)} (or 'auto' in fit_decay)"
        ) from None


def decay_activity(method: str, time_on_stream, **params):
    """Activity of a decay law at the given times on stream.

    Parameters
    ----------
    method : str
        One of :func:`list_decay_laws`.
    time_on_stream : float, ndarray or Series
        Time since the catalyst was put on stream. [s]
    **params
        The law's parameters (see the module docstring): ``a0`` [-], ``b`` or
        ``kd`` [1/s], ``m`` [-].

    Returns
    -------
    float, ndarray or Series
        Activity. [-]

    References
    ----------
    .. [1] Fogler, H. S. (2016). Elements of Chemical Reaction Engineering, 5th ed., ch. 10.
    .. [2] Levenspiel, O. (1999). Chemical Reaction Engineering, 3rd ed., ch. 21.

    Examples
    --------
    Hyperbolic decay halves the activity at kd t = 1:

    >>> decay_activity("hyperbolic", 1e6, a0=1.0, kd=1e-6)
    0.5
    >>> round(decay_activity("nth_order", 1e6, a0=1.0, kd=1e-6, m=2.0), 12)
    0.5
    """
    law = _law(method)
    missing = [p for p in law.params if p not in params]
    extra = [p for p in params if p not in law.params]
    if missing or extra:
        raise KinetraceError(
            f"decay law {method!r} takes parameters {', '.join(law.params)}; "
            f"missing {missing}, unexpected {extra}"
        )
    t = float_values(time_on_stream, "time_on_stream")
    out = law.func(t, *(float(params[p]) for p in law.params))
    if isinstance(time_on_stream, pd.Series):
        return pd.Series(out, index=time_on_stream.index, name="activity")
    if np.ndim(time_on_stream) == 0:
        return float(out[0])
    return out


@dataclass(frozen=True)
class DecayFit:
    """A decay law fitted to activity data (see :func:`fit_decay`).

    Attributes
    ----------
    method : str
        Decay law chosen.
    params : dict of str to float
        Fitted parameters (a0 [-]; b, kd [1/s]; m [-]).
    covariance : ndarray
        Covariance of the parameters, in the order of ``params``. [SI squared]
    residual_sd : float
        Residual standard deviation s (of a unit-weight observation). [-]
    n : int
        Points used.
    dof : int
        Degrees of freedom n - p.
    aicc : float
        Small-sample Akaike criterion (lower is better). [-]
    candidates : DataFrame
        Every law tried: columns ``aicc``, ``delta_aicc``, ``residual_sd``, ``converged``
        and the parameters, index the law's name.
    """

    method: str
    params: dict[str, float]
    covariance: np.ndarray
    residual_sd: float
    n: int
    dof: int
    aicc: float
    candidates: pd.DataFrame = field(repr=False)

    def predict(self, time_on_stream, *, level: float = 0.95, band: str = "prediction"):
        """Fitted activity and its band at times on stream.

        Parameters
        ----------
        time_on_stream : float or array_like
            Time on stream. [s]
        level : float
            Two-sided coverage of the band, 0..1. [-]
        band : {"prediction", "confidence"}
            ``prediction`` covers a new observation (parameter and residual
            variance); ``confidence`` covers the fitted mean only.

        Returns
        -------
        (mean, lower, upper) : tuple of ndarray
            Activity. [-]
        """
        if not 0.0 < level < 1.0:
            raise KinetraceError(f"level must be between 0 and 1, got {level!r}")
        if band not in ("prediction", "confidence"):
            raise KinetraceError(f"band must be 'prediction' or 'confidence', got {band!r}")
        law = _law(self.method)
        t = float_values(time_on_stream, "time_on_stream")
        theta = np.array([self.params[p] for p in law.params])
        mean = law.func(t, *theta)
        grad = _gradient(law, t, theta)
        var = np.einsum("ij,jk,ik->i", grad, self.covariance, grad)
        if band == "prediction":
            var = var + self.residual_sd**2
        q = stats.t.ppf(0.5 + level / 2.0, max(self.dof, 1))
        half = q * np.sqrt(np.maximum(var, 0.0))
        return mean, mean - half, mean + half

    def describe(self) -> str:
        """One line in plain words, e.g. 'exponential decay, a0 = 0.98, kd = 0.0031 per day'."""
        parts = []
        for p, v in self.params.items():
            parts.append(f"{p} = {v * DAY:.3g} per day" if p in ("b", "kd") else f"{p} = {v:.3g}")
        return f"{self.method.replace('_', '-')} decay, " + ", ".join(parts)


def _gradient(law: DecayLaw, t: np.ndarray, theta: np.ndarray) -> np.ndarray:
    """d a / d theta by central differences, shape (len(t), p)."""
    grad = np.empty((t.size, theta.size))
    for j in range(theta.size):
        h = 1e-6 * max(abs(theta[j]), 1e-12)
        up, dn = theta.copy(), theta.copy()
        up[j] += h
        dn[j] -= h
        if law.name == "nth_order" and j == 2 and abs(dn[j] - 1.0) < 1e-8:
            dn[j] -= 2e-8
        grad[:, j] = (law.func(t, *up) - law.func(t, *dn)) / (up[j] - dn[j])
    return grad


def _start_values(method: str, t_days: np.ndarray, a: np.ndarray) -> list[np.ndarray]:
    """Starting points in scaled units (a0 [-], decay constants [1/day], m [-])."""
    pos = a > 0
    slope, icpt = np.polyfit(t_days[pos], np.log(a[pos]), 1) if pos.sum() >= 2 else (0.0, 0.0)
    a0 = float(np.exp(icpt)) if np.isfinite(icpt) else float(np.nanmax(a))
    kd = max(-float(slope), 1e-6)
    if method == "linear":
        return [np.array([a0, kd])]
    if method in ("exponential", "hyperbolic"):
        return [np.array([a0, kd])]
    return [np.array([a0, kd, m]) for m in (0.5, 1.5, 2.0, 3.0)]


def _fit_one(method: str, t: np.ndarray, a: np.ndarray, w: np.ndarray):
    law = _law(method)
    td = t / DAY
    sw = np.sqrt(w)
    p = len(law.params)
    scale = np.array([1.0, 1.0 / DAY, 1.0][:p])  # scaled -> SI

    def resid(x):
        return sw * (law.func(t, *(x * scale)) - a)

    lower = np.array([1e-9, 0.0, ORDER_BOUNDS[0]][:p])
    upper = np.array([np.inf, np.inf, ORDER_BOUNDS[1]][:p])
    best = None
    for x0 in _start_values(method, td, a):
        x0 = np.clip(x0, lower + 1e-9, np.where(np.isfinite(upper), upper - 1e-9, np.inf))
        try:
            res = optimize.least_squares(resid, x0, bounds=(lower, upper), method="trf",
                                         x_scale="jac", xtol=1e-12, ftol=1e-12, gtol=1e-12, max_nfev=2000)
        except (ValueError, FloatingPointError):
            continue
        if not np.all(np.isfinite(res.fun)):
            continue
        if best is None or res.cost < best.cost:
            best = res
    if best is None:
        return None
    n = a.size
    ssr = float(2.0 * best.cost)
    dof = n - p
    s2 = ssr / dof if dof > 0 else np.nan
    theta = best.x * scale
    # Jacobian of the weighted residuals by central differences at the solution, in SI parameters
    # (least_squares' own jac is modified near bounds by the trust-region scaling)
    # columns scaled to the day-based parameters so that J'J is well conditioned
    jac = sw[:, None] * _gradient(law, t, theta) * scale
    try:
        cov_scaled = np.linalg.inv(jac.T @ jac)
    except np.linalg.LinAlgError:
        cov_scaled = np.linalg.pinv(jac.T @ jac)
    cov = s2 * cov_scaled * np.outer(scale, scale)
    k = p + 1  # parameters plus the residual variance
    with np.errstate(divide="ignore"):
        aic = n * np.log(ssr / n) + 2 * k if ssr > 0 else -np.inf
    aicc = aic + (2 * k * (k + 1) / (n - k - 1) if n - k - 1 > 0 else np.inf)
    return dict(params={p_: float(v) for p_, v in zip(law.params, theta)}, cov=cov, sd=float(np.sqrt(s2)), dof=dof,
                aicc=float(aicc), converged=bool(best.success))


def fit_decay(
    time_on_stream,
    activity,
    *,
    method: str | Sequence[str] = "auto",
    weights=None,
) -> DecayFit:
    """Fit catalyst decay laws to activity against time on stream and pick one by AICc.

    Parameters
    ----------
    time_on_stream : array_like or Series
        Time since the catalyst was put on stream (since the last change). [s]
    activity : array_like or Series
        Catalyst activity a = k_ref / k_ref,fresh. [-] NaN rows are left out.
    method : str or sequence of str
        A law of :func:`list_decay_laws`, a list of them, or ``auto`` (all).
        With several, the lowest AICc wins.
    weights : array_like, optional
        Relative weights of the points (e.g. 1/variance); default equal. [-]

    Returns
    -------
    DecayFit
        The chosen fit; ``candidates`` compares all laws tried.

    Raises
    ------
    DataQualityError
        Fewer points than parameters + 2, or no law could be fitted.

    References
    ----------
    .. [1] Fogler, H. S. (2016). Elements of Chemical Reaction Engineering, 5th ed., ch. 10.
    .. [2] Levenspiel, O. (1999). Chemical Reaction Engineering, 3rd ed., ch. 21.
    .. [3] Hurvich, C. M., Tsai, C.-L. (1989). Biometrika 76(2), 297-307.

    Examples
    --------
    >>> import numpy as np
    >>> t = np.linspace(0, 60, 61) * 86400.0
    >>> a = 0.95 * np.exp(-0.01 / 86400.0 * t)
    >>> fit = fit_decay(t, a, method="exponential")
    >>> round(fit.params["a0"], 6), round(fit.params["kd"] * 86400.0, 6)
    (0.95, 0.01)
    """
    names = list(DECAY_LAWS) if method == "auto" else [method] if isinstance(method, str) else list(method)
    for m in names:
        _law(m)
    if not names:
        raise KinetraceError("method must name at least one decay law")
    t = float_values(time_on_stream, "time_on_stream")
    a = float_values(activity, "activity")
    if t.shape != a.shape:
        raise KinetraceError(f"time_on_stream and activity differ in length ({t.size} vs {a.size})")
    w = np.ones_like(a) if weights is None else np.broadcast_to(float_values(weights, "weights"), a.shape)
    if np.any(w < 0):
        raise KinetraceError("weights must be non-negative")
    ok = np.isfinite(t) & np.isfinite(a) & np.isfinite(w) & (w > 0)
    t, a, w = t[ok], a[ok], w[ok]
    rows: dict[str, dict[str, Any]] = {}
    fits = {}
    for m in names:
        if a.size < len(DECAY_LAWS[m].params) + 2:
            continue
        res = _fit_one(m, t, a, w)
        if res is None:
            continue
        fits[m] = res
        rows[m] = {"aicc": res["aicc"], "residual_sd": res["sd"], "converged": res["converged"], **res["params"]}
    if not fits:
        raise DataQualityError(
            f"cannot fit a decay law ({', '.join(names)}): {a.size} usable activity points "
            f"({int((~ok).sum())} NaN or zero-weight rows left out); need at least 4"
        )
    table = pd.DataFrame.from_dict(rows, orient="index")
    table["delta_aicc"] = table["aicc"] - table["aicc"].min()
    best = min(fits, key=lambda m: fits[m]["aicc"])
    f = fits[best]
    return DecayFit(best, f["params"], f["cov"], f["sd"], int(a.size), int(f["dof"]), f["aicc"], table)
