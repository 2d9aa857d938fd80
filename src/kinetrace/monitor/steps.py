"""Sudden steps in a series: a drop in activity (poisoning) or a rise (catalyst change).

For every position t the mean of the ``window`` observations from t on is
compared with the mean of the ``window`` observations before t,

    z_t = (xbar_after - xbar_before) / (sigma sqrt(1/n_after + 1/n_before)),

the two-sample z statistic for a change in mean at a known point with known
sigma. A step is reported where |z_t| exceeds ``z_crit`` (default: the normal
quantile with a Bonferroni correction for the number of positions tested,
family-wise false-alarm probability ``alpha``) and the step is at least
``min_size``. Each run of consecutive flagged positions gives one step, placed
at its largest |z|. sigma defaults to a robust estimate from successive
differences, median |x_t - x_{t-1}| / (sqrt(2) * 0.6745), which a single step
or a slow drift hardly moves.

All sums are running sums over the whole series (no loop over time).

References
----------
.. [1] Basseville, M., Nikiforov, I. V. (1993). Detection of Abrupt Changes:
   Theory and Application. Prentice Hall, ch. 2 (change in mean, known sigma).
.. [2] Rousseeuw, P. J., Croux, C. (1993). Alternatives to the median absolute
   deviation. JASA 88(424), 1273-1283 (MAD consistency factor 1/0.6745).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from scipy import stats

from kinetrace.errors import DataQualityError, KinetraceError
from kinetrace.monitor._common import restart_positions, utc_index
from kinetrace.monitor.alarms import Alarm, when

__all__ = ["detect_steps", "robust_sigma"]


def robust_sigma(values) -> float:
    """Noise standard deviation from successive differences, robust to steps and drift.

    Parameters
    ----------
    values : array_like or Series
        Observations. [unit of the series] NaN left out.

    Returns
    -------
    float
        median |x_t - x_{t-1}| / (sqrt(2) * 0.6745). [unit of the series]

    References
    ----------
    .. [1] Rousseeuw, P. J., Croux, C. (1993). JASA 88(424), 1273-1283.

    Examples
    --------
    >>> import numpy as np
    >>> x = np.random.default_rng(0).normal(0.0, 2.0, 20000)
    >>> round(robust_sigma(x), 1)
    2.0
    """
    v = np.asarray(values, dtype=float)
    v = v[np.isfinite(v)]
    if v.size < 3:
        raise DataQualityError(f"need at least 3 usable values to estimate noise, got {v.size}")
    return float(np.median(np.abs(np.diff(v))) / (np.sqrt(2.0) * stats.norm.ppf(0.75)))


def _window_sums(v: np.ndarray, w: int, resets: np.ndarray | None = None):
    ok = np.isfinite(v)
    cs = np.r_[0.0, np.cumsum(np.where(ok, v, 0.0))]
    cn = np.r_[0, np.cumsum(ok)]
    n = v.size
    t = np.arange(n)
    lo, hi = np.zeros(n, dtype=int), np.full(n, n)     # the stretch between resets holding t
    if resets is not None and resets.size:
        k = np.searchsorted(resets, t, side="right")
        bounds = np.r_[0, resets, n]
        lo, hi = bounds[k], bounds[k + 1]
    a0, a1 = t, np.minimum(t + w, hi)         # after: [t, t + w), not past the next reset
    b0, b1 = np.maximum(t - w, lo), t         # before: [t - w, t), not before the last one
    return cs[a1] - cs[a0], cn[a1] - cn[a0], cs[b1] - cs[b0], cn[b1] - cn[b0]


def detect_steps(
    values: pd.Series,
    *,
    window: int = 6,
    sigma: float | None = None,
    min_size: float = 0.0,
    z_crit: float | None = None,
    alpha: float = 0.01,
    direction: str = "both",
    name: str = "activity",
    resets=(),
) -> list[Alarm]:
    """Sudden steps in the mean of a series.

    Parameters
    ----------
    values : Series
        Observations on a UTC DatetimeIndex. [unit of the series] NaN allowed;
        a window needs at least half its points.
    window : int
        Observations on each side of a candidate step. [observations]
    sigma : float, optional
        Noise standard deviation [unit of the series]; default :func:`robust_sigma`.
    min_size : float
        Smallest step reported. [unit of the series]
    z_crit : float, optional
        Critical |z|; default from ``alpha`` with a Bonferroni correction.
    alpha : float
        Family-wise false-alarm probability over the series. [-]
    direction : {"both", "up", "down"}
        Steps looked for.
    name : str
        Name of the series in the alarm texts.
    resets : sequence of timestamps
        Known events (a configured catalyst change): the windows on either side of a candidate
        step never reach across one, so a configured event is not reported as a step, and the
        first observation at or after it is no candidate. [UTC]

    Returns
    -------
    list of Alarm
        ``method = "step"``; ``onset`` is the first observation after the step,
        ``detected`` the time the after-window is complete.

    References
    ----------
    .. [1] Basseville, M., Nikiforov, I. V. (1993). Detection of Abrupt Changes, ch. 2.

    Examples
    --------
    >>> import numpy as np, pandas as pd
    >>> t = pd.date_range("2026-11-01", periods=96, freq="h", tz="UTC")
    >>> a = pd.Series(np.r_[np.full(50, 0.9), np.full(46, 0.6)], index=t)
    >>> a = a + np.random.default_rng(1).normal(0.0, 0.01, 96)
    >>> [(s.direction, str(s.onset), round(s.size, 1)) for s in detect_steps(a)]
    [('down', '2026-11-03 02:00:00+00:00', -0.3)]
    """
    if direction not in ("both", "up", "down"):
        raise KinetraceError(f"direction must be 'both', 'up' or 'down', got {direction!r}")
    if int(window) < 1:
        raise KinetraceError(f"window must be a positive number of observations, got {window!r}")
    w = int(window)
    if not isinstance(values, pd.Series):
        raise KinetraceError(f"{name}: values must be a pandas Series with a UTC DatetimeIndex")
    idx = utc_index(values, name)
    v = values.to_numpy(dtype=float, na_value=np.nan)
    if sigma is None:
        sigma = robust_sigma(v)
    if not (np.isfinite(sigma) and sigma > 0):
        raise KinetraceError(f"{name}: sigma must be positive, got {sigma!r}")
    n_pos = max(v.size - 2 * w + 1, 1)
    if z_crit is None:
        z_crit = float(stats.norm.isf(alpha / (2.0 * n_pos)))
    sa, na, sb, nb = _window_sums(v, w, restart_positions(idx, resets, "reset"))
    need = (w + 1) // 2
    good = (na >= need) & (nb >= need)
    with np.errstate(invalid="ignore", divide="ignore"):
        diff = np.where(good, sa / np.maximum(na, 1) - sb / np.maximum(nb, 1), np.nan)
        z = diff / (sigma * np.sqrt(1.0 / np.maximum(na, 1) + 1.0 / np.maximum(nb, 1)))
    flag = good & (np.abs(z) >= z_crit) & (np.abs(diff) >= min_size)
    if direction == "up":
        flag &= z > 0
    elif direction == "down":
        flag &= z < 0
    # split into runs of consecutive flagged positions of the same sign
    sign = np.sign(np.where(flag, z, 0.0))
    edges = np.flatnonzero(np.diff(np.r_[0.0, sign, 0.0]) != 0)
    steps: list[Alarm] = []
    for lo, hi in zip(edges[:-1], edges[1:]):
        if sign[lo] == 0:
            continue
        at = lo + int(np.argmax(np.abs(z[lo:hi])))
        seen = min(lo + w - 1, v.size - 1)
        up = z[at] > 0
        size = float(diff[at])
        text = (
            f"{name} stepped {'up' if up else 'down'} by {size:+.3g} ({size / sigma:+.1f} noise sigma) at about "
            f"{when(idx[at])}: the mean of the {w} observations after that time differs from the mean of the {w} "
            f"before (z = {z[at]:+.1f}, limit {z_crit:.2f}). "
            + ("A sudden rise of activity is typical of a catalyst change or regeneration."
               if up else "A sudden fall of activity can mean poisoning, a feed impurity or a sensor fault.")
        )
        steps.append(Alarm(name, "step", "up" if up else "down", idx[at], idx[seen], size, size / sigma,
                           float(z[at]), float(z_crit), text))
    return steps
