"""Apparent rate constant at a reference temperature and catalyst activity.

The apparent rate constant k(t) = r(t) / g(C(t), T(t)) is moved to one
reference temperature with the Arrhenius law, k_ref(t), so that changes of
temperature do not look like changes of catalyst. Activity is

    a(t) = k_ref(t) / k_ref,fresh

i.e. the rate relative to fresh catalyst at the same concentrations and
temperature. The fresh baseline comes from a period known to be fresh
(``period``: mean or median of k_ref there) or from a straight line of
ln k_ref against time over a period, evaluated at a chosen time (``fitted``:
extrapolates exponential decay back to the start of the run).

References
----------
.. [1] Butt, J. B., Petersen, E. E. (1988). Activation, Deactivation, and
   Poisoning of Catalysts. Academic Press (definition of activity).
.. [2] Levenspiel, O. (1999). Chemical Reaction Engineering, 3rd ed., ch. 21
   (deactivating catalysts; exponential decay, ln a linear in time).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd
from scipy import stats

from kinetrace.errors import DataQualityError, KinetraceError
from kinetrace.kinetics._arrays import as_float_array, first_index, wrap
from kinetrace.kinetics.arrhenius import normalise_to_reference
from kinetrace.kinetics.ratelaws import apparent_rate_constant

__all__ = [
    "apparent_reference_rate_constant",
    "Baseline",
    "list_baseline_methods",
    "fresh_baseline",
    "activity",
]


def apparent_reference_rate_constant(
    method: str,
    rate,
    conc,
    temperature,
    *,
    activation_energy: float,
    reference_temperature: float,
    law_params: Mapping[str, Any] | None = None,
    **params,
):
    """Apparent rate constant from measured rates, moved to the reference temperature.

    k_ref(t) = [r(t) / g(C(t), T(t))] * exp[(Ea/R)(1/T(t) - 1/T_ref)]

    Parameters
    ----------
    method : str
        Rate law (see :func:`kinetrace.kinetics.ratelaws.list_methods`).
    rate : float, ndarray or Series
        Measured rate of reaction. [mol/(m^3 s)]
    conc : Mapping[str, array_like]
        Reactor concentrations. [mol/m^3]
    temperature : float, ndarray or Series
        Reactor temperature. [K]
    activation_energy : float
        Ea. [J/mol]
    reference_temperature : float
        T_ref. [K]
    law_params : Mapping, optional
        Rate-law parameters, merged with ``**params``; needed for names that
        clash with this function's own arguments (the van 't Hoff
        ``reference_temperature`` of ``reversible``).
    **params
        Rate-law parameters.

    Returns
    -------
    float, ndarray or Series
        k_ref(t). [(mol/m^3)^(1-n)/s] NaN where the rate law gives NaN.

    References
    ----------
    .. [1] Fogler, H. S. (2016). Elements of Chemical Reaction Engineering, 5th ed., ch. 3.

    Examples
    --------
    >>> round(apparent_reference_rate_constant("power_law", 0.5, {"A": 100.0}, 350.0,
    ...       activation_energy=0.0, reference_temperature=340.0, orders={"A": 1}), 6)
    0.005
    """
    params = {**(law_params or {}), **params}
    k = apparent_rate_constant(method, rate, conc, temperature=temperature, **params)
    return normalise_to_reference(k, temperature, activation_energy, reference_temperature)


@dataclass(frozen=True)
class Baseline:
    """Fresh-catalyst reference rate constant.

    Attributes
    ----------
    value : float
        k_ref,fresh. [unit of k_ref]
    standard_error : float
        Its standard error. [unit of k_ref]
    n_used : int
        Points used.
    n_excluded : int
        Points in the period that were NaN or not positive (flagged, not used).
    method : str
        ``period`` or ``fitted``.
    decay_rate : float
        For ``fitted``: slope -d ln k_ref / dt. [1/s] NaN for ``period``.
    """

    value: float
    standard_error: float
    n_used: int
    n_excluded: int
    method: str
    decay_rate: float = float("nan")


def list_baseline_methods() -> list[str]:
    """Names of the fresh-baseline methods.

    Examples
    --------
    >>> list_baseline_methods()
    ['fitted', 'period']
    """
    return ["fitted", "period"]


def _select(k_ref: pd.Series, period) -> pd.Series:
    if period is None:
        return k_ref
    if isinstance(period, (pd.Series, np.ndarray)) and np.asarray(period).dtype == bool:
        mask = np.asarray(period, dtype=bool)
        if mask.shape != (len(k_ref),):
            raise KinetraceError(f"period mask has {mask.size} entries, k_ref has {len(k_ref)}")
        return k_ref[mask]
    try:
        start, end = period
    except (TypeError, ValueError):
        raise KinetraceError(f"period must be (start, end) or a boolean mask, got {period!r}") from None
    return k_ref.loc[start:end]


def _elapsed_seconds(index, origin) -> np.ndarray:
    if isinstance(index, pd.DatetimeIndex):
        return np.asarray((index - pd.Timestamp(origin)).total_seconds(), dtype=float)
    return np.asarray(index, dtype=float) - float(origin)


def fresh_baseline(k_ref, *, method: str = "period", period=None, at=None, statistic: str = "median") -> Baseline:
    """Fresh-catalyst baseline k_ref,fresh from a period of the history.

    Parameters
    ----------
    k_ref : Series
        Apparent rate constant at the reference temperature, indexed by time
        (DatetimeIndex, or numbers in seconds). [unit of k_ref]
    method : {"period", "fitted"}
        ``period``: ``statistic`` of k_ref over ``period``. ``fitted``: OLS of
        ln k_ref on time over ``period``, evaluated at ``at``.
    period : (start, end) or boolean mask, optional
        Data used (inclusive labels). Default: all.
    at : time label, optional
        For ``fitted``: time of the fresh state. Default: first time of ``k_ref``.
    statistic : {"median", "mean"}
        For ``period``.

    Returns
    -------
    Baseline
        Value, standard error (mean: s/sqrt(n); median: 1.2533 s/sqrt(n),
        the large-sample normal value; fitted: from the regression, delta
        method on exp), points used and excluded.

    Raises
    ------
    DataQualityError
        Fewer than 2 usable points (3 for ``fitted``).

    References
    ----------
    .. [1] Levenspiel, O. (1999). Chemical Reaction Engineering, 3rd ed., ch. 21.
    .. [2] Kendall, M., Stuart, A. (1977). The Advanced Theory of Statistics,
       vol. 1, 4th ed. (variance of the sample median, pi/2 sigma^2/n).

    Examples
    --------
    >>> idx = pd.date_range("2026-01-01", periods=30, freq="D", tz="UTC")
    >>> k = pd.Series(0.02 * np.exp(-0.01 * np.arange(30)), index=idx)
    >>> b = fresh_baseline(k, method="fitted")
    >>> round(b.value, 6), round(b.decay_rate * 86400, 6)
    (0.02, 0.01)
    """
    if method not in list_baseline_methods():
        raise KinetraceError(f"unknown baseline method {method!r}; allowed: {', '.join(list_baseline_methods())}")
    if not isinstance(k_ref, pd.Series):
        raise KinetraceError("fresh_baseline needs k_ref as a Series indexed by time")
    chosen = _select(k_ref.astype(float), period)
    values = chosen.to_numpy(dtype=float, na_value=np.nan)
    with np.errstate(invalid="ignore"):
        ok = np.isfinite(values) & (values > 0)
    n = int(ok.sum())
    n_excluded = int((~ok).sum())
    if method == "period":
        if n < 2:
            raise DataQualityError(f"fresh baseline: {n} usable points in the period (need 2; {n_excluded} excluded)")
        v = values[ok]
        s = float(np.std(v, ddof=1))
        if statistic == "median":
            return Baseline(float(np.median(v)), 1.2533 * s / np.sqrt(n), n, n_excluded, "period")
        if statistic == "mean":
            return Baseline(float(np.mean(v)), s / np.sqrt(n), n, n_excluded, "period")
        raise KinetraceError(f"statistic must be 'median' or 'mean', got {statistic!r}")
    if n < 3:
        raise DataQualityError(f"fresh baseline (fitted): {n} usable points (need 3; {n_excluded} excluded)")
    origin = k_ref.index[0] if at is None else at
    x = _elapsed_seconds(chosen.index[ok], origin)
    reg = stats.linregress(x, np.log(values[ok]))
    value = float(np.exp(reg.intercept))
    return Baseline(value, value * float(reg.intercept_stderr), n, n_excluded, "fitted", float(-reg.slope))


def activity(k_ref, baseline: Baseline | float) -> Any:
    """Catalyst activity a(t) = k_ref(t) / k_ref,fresh.

    Parameters
    ----------
    k_ref : float, ndarray or Series
        Apparent rate constant at the reference temperature. [unit of k_ref]
    baseline : Baseline or float
        Fresh value. [unit of k_ref]

    Returns
    -------
    float, ndarray or Series
        a. [-] 1 for fresh catalyst; NaN propagates.

    References
    ----------
    .. [1] Butt, J. B., Petersen, E. E. (1988). Activation, Deactivation, and
       Poisoning of Catalysts. Academic Press.

    Examples
    --------
    >>> activity(0.015, 0.02)
    0.75
    """
    ref = baseline.value if isinstance(baseline, Baseline) else float(baseline)
    if not (np.isfinite(ref) and ref > 0):
        raise KinetraceError(f"fresh baseline must be finite and positive, got {ref!r}")
    return wrap(as_float_array(k_ref) / ref, first_index(k_ref), getattr(k_ref, "name", None))
