"""Steady-state detection on process records, chosen by name (``method=``).

Methods
-------
``cao_rhinehart``
    Filtered variance-ratio test of Cao & Rhinehart (1995). Exponentially
    filtered mean, filtered variance of the deviations from the previous
    filtered mean (v2) and filtered variance of successive differences (d2):

        X_f,i  = l1 X_i + (1 - l1) X_f,i-1
        v2_f,i = l2 (X_i - X_f,i-1)^2 + (1 - l2) v2_f,i-1
        d2_f,i = l3 (X_i - X_i-1)^2  + (1 - l3) d2_f,i-1
        R_i    = (2 - l1) v2_f,i / d2_f,i

    R is near 1 at steady state and grows during a ramp or after a step; a
    sample is steady when R <= ``critical_value``. With the recommended
    l1 = 0.2, l2 = l3 = 0.1 the null distribution (independent noise) has
    95th percentile 1.44 and 99th 1.73 (Monte Carlo, project REFERENCES.md;
    reproduced in tests/kinetics). The test assumes independent noise between
    samples: autocorrelated noise makes d2 small and R large (false
    "transient"), so sample at an interval where the noise is uncorrelated.
``drift_variance``
    Windowed drift-and-variance test: over a trailing window of ``window``
    samples a straight line is fitted by least squares. The window is steady
    when (a) the slope is not significant (|t| <= t_{1-alpha/2, w-2}) or the
    drift over the window, |slope| (w - 1), is within ``max_drift`` and (b) the
    residual variance is consistent with the noise variance
    (s^2 / sigma^2 <= chi2_{1-alpha}(w - 2) / (w - 2)); sigma defaults to a
    robust estimate from successive differences of the whole record,
    1.4826 MAD(diff) / sqrt(2).

Both statistics are causal (at sample i they use samples up to i), so a
transient is flagged with some lag and steady state is declared with some
lag after it returns (about 1/l for the filters, ``window`` samples for the
windowed test). Samples are assumed evenly spaced.

A unit is steady at a sample when every key variable is steady there; runs
of steady samples shorter than ``min_duration`` are discarded.

References
----------
.. [1] Cao, S., Rhinehart, R. R. (1995). An efficient method for on-line
   identification of steady state. J. Process Control 5(6), 363-374.
   https://doi.org/10.1016/0959-1524(95)00009-F
.. [2] Draper, N. R., Smith, H. (1998). Applied Regression Analysis, 3rd ed.
   Wiley, ch. 1 (slope t-test).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd
from numpy.lib.stride_tricks import sliding_window_view
from scipy import signal, stats

from kinetrace.errors import DataQualityError, KinetraceError

__all__ = [
    "list_methods",
    "cao_rhinehart_ratio",
    "drift_variance_statistic",
    "detect_steady",
    "steady_windows",
    "SteadyStateResult",
]


def _finite_runs(ok: np.ndarray) -> list[tuple[int, int]]:
    """(start, stop) index pairs (stop exclusive) of runs of True in ``ok``."""
    padded = np.concatenate([[False], ok, [False]]).astype(np.int8)
    edges = np.flatnonzero(np.diff(padded))
    return list(zip(edges[0::2].tolist(), edges[1::2].tolist()))


def _cr_block(x: np.ndarray, l1: float, l2: float, l3: float, warmup: int) -> np.ndarray:
    """Cao-Rhinehart ratio for a 2-D block (time, series) without NaN."""
    n = x.shape[0]
    out = np.full(x.shape, np.nan)
    if n <= max(warmup, 2):
        return out
    xf = signal.lfilter([l1], [1.0, -(1.0 - l1)], x, axis=0, zi=((1.0 - l1) * x[:1]))[0]
    dev2 = (x[1:] - xf[:-1]) ** 2
    dif2 = np.diff(x, axis=0) ** 2
    m = max(min(warmup, n - 1), 1)
    d2_0 = dif2[:m].mean(axis=0, keepdims=True)  # E[d2] = 2 sigma^2 under the null
    v2_0 = d2_0 / (2.0 - l1)  # E[v2] = 2 sigma^2 / (2 - l1) under the null
    v2 = signal.lfilter([l2], [1.0, -(1.0 - l2)], dev2, axis=0, zi=(1.0 - l2) * v2_0)[0]
    d2 = signal.lfilter([l3], [1.0, -(1.0 - l3)], dif2, axis=0, zi=(1.0 - l3) * d2_0)[0]
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = (2.0 - l1) * v2 / d2
    out[1:] = ratio
    out[: warmup + 1] = np.nan
    return out


def cao_rhinehart_ratio(x, l1: float = 0.2, l2: float = 0.1, l3: float = 0.1, warmup: int | None = None):
    """Cao-Rhinehart filtered variance ratio R for each sample.

    Parameters
    ----------
    x : array_like, shape (n,) or (n, m), or Series / DataFrame
        Evenly sampled record(s), time along axis 0. [any unit]
    l1, l2, l3 : float
        Filter factors of the mean, the deviation variance and the difference
        variance, each in (0, 1]. [-]
    warmup : int, optional
        Samples after the start (and after each NaN gap) for which R is not
        reported (NaN): the filters need about 3/l samples to forget their
        start. Default ceil(3 / min(l1, l2, l3)). [samples]

    Returns
    -------
    ndarray, Series or DataFrame
        R, same shape (and index) as ``x``. [-] NaN during warm-up, at NaN
        samples, and where the difference variance is zero (constant signal).
        After a NaN gap the filters restart.

    References
    ----------
    .. [1] Cao, S., Rhinehart, R. R. (1995). J. Process Control 5(6), 363-374.

    Examples
    --------
    >>> rng = np.random.default_rng(0)
    >>> r = cao_rhinehart_ratio(np.concatenate([rng.normal(size=200),
    ...                                         rng.normal(size=100) + np.arange(100) * 0.2]))
    >>> bool(np.nanmedian(r[50:200]) < 1.44), bool(np.nanmedian(r[250:]) > 1.44)
    (True, True)
    """
    for name, lam in (("l1", l1), ("l2", l2), ("l3", l3)):
        if not 0.0 < float(lam) <= 1.0:
            raise KinetraceError(f"cao_rhinehart: {name} = {lam!r} must be in (0, 1]")
    if warmup is None:
        warmup = math.ceil(3.0 / min(l1, l2, l3))
    arr = np.asarray(x, dtype=float)
    squeeze = arr.ndim == 1
    arr2 = arr.reshape(arr.shape[0], -1)
    out = np.full(arr2.shape, np.nan)
    finite = np.isfinite(arr2)
    if finite.all():
        out = _cr_block(arr2, l1, l2, l3, warmup)
    else:
        for j in range(arr2.shape[1]):  # loop over variables and NaN gaps, not samples
            for start, stop in _finite_runs(finite[:, j]):
                out[start:stop, j] = _cr_block(arr2[start:stop, j : j + 1], l1, l2, l3, warmup)[:, 0]
    out = out[:, 0] if squeeze else out
    if isinstance(x, pd.Series):
        return pd.Series(out, index=x.index, name=x.name)
    if isinstance(x, pd.DataFrame):
        return pd.DataFrame(out, index=x.index, columns=x.columns)
    return out


def _robust_noise_std(x: np.ndarray) -> np.ndarray:
    """Noise standard deviation from successive differences, per column (MAD based)."""
    d = np.diff(x, axis=0)
    med = np.nanmedian(d, axis=0)
    mad = np.nanmedian(np.abs(d - med), axis=0)
    return 1.4826 * mad / math.sqrt(2.0)


def drift_variance_statistic(x, window: int = 30, noise_std=None):
    """Trailing-window slope t statistic, drift and variance ratio per sample.

    Parameters
    ----------
    x : array_like, shape (n,) or (n, m)
        Evenly sampled record(s), time along axis 0. [any unit]
    window : int
        Window length, at least 4. [samples]
    noise_std : float or array_like, optional
        Noise standard deviation of each variable. [unit of x] Default:
        1.4826 MAD of successive differences / sqrt(2) over the whole record.

    Returns
    -------
    dict of ndarray
        ``t_slope`` [-], ``drift`` = slope * (window - 1) [unit of x] and
        ``variance_ratio`` = residual variance / noise_std^2 [-], each of shape
        (n,) or (n, m); NaN for the first window - 1 samples and for windows
        holding NaN.

    References
    ----------
    .. [1] Draper, N. R., Smith, H. (1998). Applied Regression Analysis, 3rd ed., ch. 1.

    Examples
    --------
    >>> out = drift_variance_statistic(np.arange(10.0) + [0, .1] * 5, window=5)
    >>> round(float(out["drift"][-1]), 3)
    4.0
    """
    window = int(window)
    arr = np.asarray(x, dtype=float)
    squeeze = arr.ndim == 1
    arr2 = arr.reshape(arr.shape[0], -1)
    n, m = arr2.shape
    if window < 4:
        raise KinetraceError(f"drift_variance: window = {window} must be at least 4 samples")
    if noise_std is None:
        sigma = _robust_noise_std(arr2)
    else:
        sigma = np.broadcast_to(np.asarray(noise_std, dtype=float), (m,))
    res = {k: np.full((n, m), np.nan) for k in ("t_slope", "drift", "variance_ratio")}
    if n >= window:
        xc = np.arange(window) - (window - 1) / 2.0
        sxx = float(xc @ xc)
        win = sliding_window_view(arr2, window, axis=0)  # (n - w + 1, m, w)
        slope = win @ xc / sxx
        ss = ((win - win.mean(axis=-1, keepdims=True)) ** 2).sum(axis=-1)
        with np.errstate(divide="ignore", invalid="ignore"):
            s2 = np.maximum(ss - slope**2 * sxx, 0.0) / (window - 2)
            res["t_slope"][window - 1 :] = slope / np.sqrt(s2 / sxx)
            res["variance_ratio"][window - 1 :] = s2 / sigma**2
        res["drift"][window - 1 :] = slope * (window - 1)
    if squeeze:
        res = {k: v[:, 0] for k, v in res.items()}
    return res


@dataclass(frozen=True)
class SteadyStateResult:
    """Outcome of :func:`detect_steady`.

    Attributes
    ----------
    mask : Series of bool
        True where the unit is steady (all key variables steady, inside a run
        of at least ``min_duration``).
    windows : DataFrame
        One row per steady window: ``start``, ``end`` (index labels, inclusive)
        and ``n_samples``.
    statistic : DataFrame
        Test statistic per variable (R for ``cao_rhinehart``, |t_slope| for
        ``drift_variance``). [-]
    variable_mask : DataFrame of bool
        Per-variable steady flags before the all-variables and duration rules.
    method : str
    critical_value : float
    """

    mask: pd.Series
    windows: pd.DataFrame
    statistic: pd.DataFrame
    variable_mask: pd.DataFrame
    method: str
    critical_value: float


def _cr_flags(frame: pd.DataFrame, critical_value, params) -> tuple[pd.DataFrame, pd.DataFrame, float]:
    allowed = {"l1", "l2", "l3", "warmup"}
    _check_params("cao_rhinehart", params, allowed)
    crit = 1.44 if critical_value is None else float(critical_value)
    ratio = cao_rhinehart_ratio(frame, **params)
    with np.errstate(invalid="ignore"):
        flags = ratio.to_numpy() <= crit
    return ratio, pd.DataFrame(flags, index=frame.index, columns=frame.columns), crit


def _dv_flags(frame: pd.DataFrame, critical_value, params) -> tuple[pd.DataFrame, pd.DataFrame, float]:
    allowed = {"window", "alpha", "max_drift", "noise_std"}
    _check_params("drift_variance", params, allowed)
    window = int(params.get("window", 30))
    alpha = float(params.get("alpha", 0.01))
    if not 0.0 < alpha < 1.0:
        raise KinetraceError(f"drift_variance: alpha = {alpha!r} must be in (0, 1)")
    cols = list(frame.columns)
    noise = _per_column(params.get("noise_std"), cols, "noise_std")
    max_drift = _per_column(params.get("max_drift"), cols, "max_drift")
    out = drift_variance_statistic(frame.to_numpy(dtype=float), window=window, noise_std=noise)
    t_abs = np.abs(out["t_slope"])
    crit = float(stats.t.ppf(1.0 - alpha / 2.0, window - 2)) if critical_value is None else float(critical_value)
    var_crit = float(stats.chi2.ppf(1.0 - alpha, window - 2)) / (window - 2)
    with np.errstate(invalid="ignore"):
        drift_ok = t_abs <= crit
        if max_drift is not None:
            drift_ok |= np.abs(out["drift"]) <= max_drift
        flags = drift_ok & (out["variance_ratio"] <= var_crit)
    stat = pd.DataFrame(t_abs, index=frame.index, columns=frame.columns)
    return stat, pd.DataFrame(flags, index=frame.index, columns=frame.columns), crit


def _per_column(value, cols, name):
    if value is None:
        return None
    if isinstance(value, Mapping):
        missing = [c for c in cols if c not in value]
        if missing:
            raise KinetraceError(f"drift_variance: {name} lacks variable(s) {missing}")
        return np.array([float(value[c]) for c in cols])
    return np.broadcast_to(np.asarray(value, dtype=float), (len(cols),)).copy()


def _check_params(method, params, allowed):
    unknown = sorted(set(params) - allowed)
    if unknown:
        raise KinetraceError(
            f"steady-state method {method!r}: unknown parameter(s) {unknown}; allowed {sorted(allowed)}"
        )


_METHODS = {"cao_rhinehart": _cr_flags, "drift_variance": _dv_flags}


def list_methods() -> list[str]:
    """Names of the steady-state tests.

    Examples
    --------
    >>> list_methods()
    ['cao_rhinehart', 'drift_variance']
    """
    return sorted(_METHODS)


def steady_windows(mask, min_duration=1) -> pd.DataFrame:
    """Runs of True in a boolean series that last at least ``min_duration``.

    Parameters
    ----------
    mask : Series of bool or array_like
        Steady flags in time order.
    min_duration : int or Timedelta
        Shortest window kept: a number of samples (int) or, for a
        DatetimeIndex, a time span measured from first to last sample. [samples or time]

    Returns
    -------
    DataFrame
        Columns ``start``, ``end`` (index labels, inclusive), ``n_samples``;
        positional ``start_pos``/``stop_pos`` (stop exclusive).

    Examples
    --------
    >>> steady_windows([0, 1, 1, 1, 0, 1, 1], min_duration=3)[["start", "end", "n_samples"]]
       start  end  n_samples
    0      1    3          3
    """
    series = mask if isinstance(mask, pd.Series) else pd.Series(np.asarray(mask, dtype=bool))
    flags = series.to_numpy(dtype=bool, na_value=False)
    runs = _finite_runs(flags)
    index = series.index
    rows = []
    for start, stop in runs:
        if isinstance(min_duration, (pd.Timedelta, np.timedelta64)) or hasattr(min_duration, "total_seconds"):
            long_enough = (index[stop - 1] - index[start]) >= pd.Timedelta(min_duration)
        else:
            long_enough = (stop - start) >= int(min_duration)
        if long_enough:
            rows.append((index[start], index[stop - 1], stop - start, start, stop))
    return pd.DataFrame(rows, columns=["start", "end", "n_samples", "start_pos", "stop_pos"])


def _bridge(unit: pd.Series, finite: np.ndarray, max_gap: int) -> pd.Series:
    """Fill interior runs of False no longer than ``max_gap`` (all samples finite)."""
    flags = unit.to_numpy(dtype=bool).copy()
    for start, stop in _finite_runs(~flags):
        interior = start > 0 and stop < flags.size
        if interior and stop - start <= max_gap and finite[start:stop].all():
            flags[start:stop] = True
    return pd.Series(flags, index=unit.index)


def detect_steady(
    data,
    method: str = "cao_rhinehart",
    *,
    min_duration=1,
    critical_value: float | None = None,
    key_variables: list[str] | None = None,
    max_gap: int = 0,
    restarts=None,
    **params: Any,
) -> SteadyStateResult:
    """Steady-state windows of a unit from its key process variables.

    Parameters
    ----------
    data : DataFrame, Series or array_like
        Evenly sampled records, one column per variable. [any units]
    method : str
        ``cao_rhinehart`` or ``drift_variance`` (see :func:`list_methods`).
    min_duration : int or Timedelta
        Shortest steady window kept. [samples or time]
    critical_value : float, optional
        Threshold of the statistic: R for ``cao_rhinehart`` (default 1.44,
        the null 95th percentile; 1.73 is the 99th), |t| for
        ``drift_variance`` (default t_{1-alpha/2, window-2}). [-] At the
        null 95th percentile about one steady sample in twenty is called
        transient, which splits long steady stretches; raise the critical value
        (e.g. 1.73) or lower ``min_duration`` if windows come out fragmented.
    key_variables : list of str, optional
        Columns that must all be steady. Default: all columns.
    max_gap : int
        Runs of at most this many "transient" samples between two steady runs
        are taken as steady (bridges isolated false alarms; samples where a
        key variable is NaN are never bridged). Default 0 (off). [samples]
    restarts : array_like of int, optional
        Positions of samples at which the test starts afresh (a configured event such as a
        shutdown, a restart or a catalyst change): no statistic, bridge or window reaches back
        across one, so the first samples after it wait for the test's own warm-up (``window``
        samples, or the filters' warm-up) before they can be steady. [samples]
    **params
        ``cao_rhinehart``: l1, l2, l3, warmup. ``drift_variance``: window
        [samples], alpha, max_drift [unit of each variable, scalar or
        mapping], noise_std [unit of each variable]. ``alpha`` (default 0.01)
        is the level of each of the two tests (slope and variance).

    Returns
    -------
    SteadyStateResult
        Mask, windows, per-variable statistics and flags.

    Raises
    ------
    KinetraceError
        Unknown method (lists the allowed ones), unknown parameter, unknown
        key variable.
    DataQualityError
        No samples.

    References
    ----------
    .. [1] Cao, S., Rhinehart, R. R. (1995). J. Process Control 5(6), 363-374.

    Examples
    --------
    >>> rng = np.random.default_rng(1)
    >>> t = np.arange(400)
    >>> temp = 340 + 0.05 * rng.normal(size=400) + np.where(t > 200, 2 * (1 - np.exp(-(t - 200) / 15)), 0)
    >>> res = detect_steady(pd.DataFrame({"TI-101": temp}), min_duration=40)
    >>> bool(res.mask.iloc[150]), bool(res.mask.iloc[215]), bool(res.mask.iloc[390])
    (True, False, True)
    """
    try:
        runner = _METHODS[method]
    except (KeyError, TypeError):
        raise KinetraceError(
            f"unknown steady-state method {method!r}; allowed: {', '.join(list_methods())}"
        ) from None
    if isinstance(data, pd.DataFrame):
        frame = data
    elif isinstance(data, pd.Series):
        frame = data.to_frame(name=data.name if data.name is not None else "x")
    else:
        arr = np.asarray(data, dtype=float)
        frame = pd.DataFrame(arr.reshape(arr.shape[0], -1))
    if len(frame) == 0:
        raise DataQualityError("steady-state detection: no samples")
    if key_variables is not None:
        missing = [v for v in key_variables if v not in frame.columns]
        if missing:
            raise KinetraceError(
                f"steady-state detection: key variable(s) {missing} not in data columns {list(frame.columns)}"
            )
        frame = frame[list(key_variables)]
    frame = frame.astype(float)
    cuts = np.unique(np.clip(np.asarray([] if restarts is None else restarts, dtype=int), 0, len(frame)))
    cuts = [0, *[int(c) for c in cuts if 0 < c < len(frame)], len(frame)]
    if len(cuts) == 2:
        stat, flags, crit = runner(frame, critical_value, params)
    else:
        if method == "drift_variance" and params.get("noise_std") is None:
            # one noise level for the whole record (successive differences hardly see a few steps)
            params = {**params, "noise_std": _robust_noise_std(frame.to_numpy(dtype=float))}
        parts = [runner(frame.iloc[a:b], critical_value, params) for a, b in zip(cuts[:-1], cuts[1:])]
        stat = pd.concat([p[0] for p in parts])
        flags = pd.concat([p[1] for p in parts])
        crit = parts[0][2]
    unit = flags.all(axis=1)
    if max_gap > 0:
        finite = frame.notna().all(axis=1).to_numpy().copy()
        finite[cuts[1:-1]] = False          # never bridged across a restart
        unit = _bridge(unit, finite, int(max_gap))
    final = np.zeros(len(frame), dtype=bool)
    found = []
    for a, b in zip(cuts[:-1], cuts[1:]):       # windows end at a restart
        w = steady_windows(unit.iloc[a:b], min_duration)
        w["start_pos"] += a
        w["stop_pos"] += a
        found.append(w)
        for start, stop in zip(w["start_pos"], w["stop_pos"]):
            final[start:stop] = True
    windows = pd.concat(found, ignore_index=True) if len(found) > 1 else found[0]
    return SteadyStateResult(
        mask=pd.Series(final, index=frame.index, name="steady"),
        windows=windows,
        statistic=stat,
        variable_mask=flags,
        method=method,
        critical_value=crit,
    )
