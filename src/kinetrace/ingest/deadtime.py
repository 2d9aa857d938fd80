"""Dead-time estimate from cross-correlation (a diagnostic; the configured ``dead_time`` is what ingest applies).

The lag at which the effect (an analyzer) best follows the cause (e.g. a feed
flow or an upstream concentration) is the lag of the largest cross-correlation
of the two signals' first differences. Differencing removes levels and slow
drift so that the moves themselves are matched; missing values are left out
pair by pair. For a first-order process with dead time the peak sits at or a
little after the dead time, so the estimate is an upper guide, to be checked
against a step test before it is configured.

References
----------
.. [1] Box, G. E. P., Jenkins, G. M., Reinsel, G. C. (2008). Time Series Analysis:
   Forecasting and Control, 4th ed. Wiley, Sec. 12.1 (cross-correlation function,
   identification of the delay of a transfer-function model).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd


@dataclass(frozen=True)
class DeadTimeEstimate:
    """Result of :func:`estimate_dead_time`.

    Attributes
    ----------
    dead_time : float
        Lag of the largest cross-correlation. [s]
    correlation : float
        Cross-correlation at that lag. [-]
    lags : ndarray
        Lags tried. [s]
    ccf : ndarray
        Cross-correlation at each lag. [-]
    pairs : int
        Number of difference pairs behind the peak value.
    """

    dead_time: float
    correlation: float
    lags: np.ndarray
    ccf: np.ndarray
    pairs: int


def cross_correlation(x: np.ndarray, y: np.ndarray, max_lag: int, min_pairs: int = 10) -> tuple[np.ndarray, np.ndarray]:
    """Pearson correlation of ``x[t]`` with ``y[t + k]`` for k = 0..max_lag, NaN pairs left out.

    Parameters
    ----------
    x, y : ndarray
        Equally spaced series of the same length. [any unit]
    max_lag : int
        Largest lag. [samples]
    min_pairs : int
        Fewest complete pairs for a value (else NaN).

    Returns
    -------
    ccf : ndarray
        Correlation at each lag. [-]
    pairs : ndarray of int
        Complete pairs at each lag.

    >>> x = np.sin(np.arange(200) / 5.0)
    >>> int(np.nanargmax(cross_correlation(x, np.roll(x, 7), 20)[0]))
    7
    """
    n = len(x)
    ccf = np.full(max_lag + 1, np.nan)
    pairs = np.zeros(max_lag + 1, dtype=np.int64)
    for k in range(min(max_lag, n - 1) + 1):   # a loop over lags, not over time
        a, b = x[: n - k], y[k:]
        ok = np.isfinite(a) & np.isfinite(b)
        pairs[k] = ok.sum()
        if pairs[k] < min_pairs:
            continue
        a, b = a[ok] - a[ok].mean(), b[ok] - b[ok].mean()
        den = np.sqrt((a * a).sum() * (b * b).sum())
        if den > 0:
            ccf[k] = (a * b).sum() / den
    return ccf, pairs


def estimate_dead_time(cause: pd.Series, effect: pd.Series, max_lag: float, *, sign: int = 0) -> DeadTimeEstimate:
    """Estimate how long ``effect`` lags ``cause``, from the cross-correlation of their differences.

    Parameters
    ----------
    cause, effect : Series
        Signals on the same regular grid (e.g. two columns of ``UnitData.values``). [any unit]
    max_lag : float
        Longest dead time to consider. [s]
    sign : int
        +1 or -1 if the effect is known to move with / against the cause; 0 takes
        the largest absolute correlation.

    Returns
    -------
    DeadTimeEstimate

    Raises
    ------
    ValueError
        The series are not on one regular grid, or too short for ``max_lag``.

    References
    ----------
    .. [1] Box, Jenkins & Reinsel (2008), Sec. 12.1.

    >>> t = pd.date_range("2026-09-01", periods=300, freq="1min", tz="UTC")
    >>> u = pd.Series(np.repeat(np.tile([0.0, 1.0], 10), 15), index=t)
    >>> y = u.shift(6)
    >>> estimate_dead_time(u, y, max_lag=1200).dead_time
    360.0
    """
    if not cause.index.equals(effect.index):
        raise ValueError("cause and effect must share one time index (use columns of one UnitData.values)")
    idx = cause.index
    if len(idx) < 3:
        raise ValueError("need at least 3 grid points")
    step = (idx[1] - idx[0]).total_seconds()
    if not (np.diff(idx.asi8) == np.diff(idx.asi8)[0]).all():
        raise ValueError("the series must be on a regular grid")
    k = int(max_lag // step)
    if k >= len(idx) - 2:
        raise ValueError(f"max_lag {max_lag} s is too long for {len(idx)} points of {step} s")
    dx = np.diff(cause.to_numpy(dtype=float))
    dy = np.diff(effect.to_numpy(dtype=float))
    ccf, pairs = cross_correlation(dx, dy, k)
    score = ccf * sign if sign else np.abs(ccf)
    if np.all(np.isnan(score)):
        raise ValueError("no lag has enough complete pairs of differences")
    best = int(np.nanargmax(score))
    return DeadTimeEstimate(best * step, float(ccf[best]), np.arange(k + 1) * step, ccf, int(pairs[best]))
