"""Alignment of irregular readings to a regular UTC grid: pure, vectorised functions.

Times are int64 nanoseconds since 1970-01-01 UTC; grid intervals are half-open
``[edge_k, edge_k+1)`` and labelled by their start.

* Continuous signals: **time-weighted average** of the sample-and-hold signal.
  Each reading holds its value until the next reading or for at most
  ``max_gap``; an interval's value is the integral of the held signal divided by
  the time it covers, and missing if it covers less than ``min_coverage`` of
  the interval.
* Analyzer and lab signals: **mean of the readings** that fall in the interval;
  an interval with none takes the last earlier reading if that reading is no
  older than ``max_age`` at the interval's end (last value carried forward),
  else it is missing. Stale values are never reused.
"""

from __future__ import annotations

import numpy as np

#: Fraction of an interval a continuous signal must cover to give a value (common practice, no source).
MIN_COVERAGE = 0.5


def grid_edges(first_ns: int, last_ns: int, step: float) -> np.ndarray:
    """Edges of the grid of ``step`` seconds covering ``[first, last]``, aligned to whole steps since the epoch.

    Parameters
    ----------
    first_ns, last_ns : int
        First and last time to cover. [ns]
    step : float
        Grid step. [s]

    Returns
    -------
    ndarray of int64
        Interval edges. [ns]

    >>> (grid_edges(90 * 10**9, 250 * 10**9, 60) // 10**9).tolist()
    [60, 120, 180, 240, 300]
    """
    d = int(round(step * 1e9))
    if d <= 0:
        raise ValueError(f"grid step must be positive, got {step} s")
    lo = (int(first_ns) // d) * d
    hi = (int(last_ns) // d + 1) * d
    n = (hi - lo) // d          # integer count: np.arange(lo, hi + 1, d) may lose the last edge to rounding
    return lo + d * np.arange(n + 1, dtype=np.int64)


def _bin(t: np.ndarray, edges: np.ndarray) -> np.ndarray:
    """Interval of each time (-1 before the grid, n after it); integer division on a regular grid."""
    n = len(edges) - 1
    d = edges[1] - edges[0] if n > 0 else 0
    if n > 0 and edges[-1] - edges[0] == d * n:
        b = (t - edges[0]) // d
        return np.clip(b, -1, n, out=b)
    return np.searchsorted(edges, t, side="right") - 1


_SLICE = 1 << 16


def _accumulate(start, end, x, edges, integ, cover, dv, dc) -> None:
    """Add held segments [start, end) of value x to the interval integrals (in place).

    Counts are binned over the slice's own range of intervals only (the readings are sorted),
    so each slice costs in proportion to its size, not to the length of the grid.
    """
    nb = len(edges) - 1
    use = end > start
    if not use.all():             # (masks that keep everything are not applied: no copies)
        start, end, x = start[use], end[use], x[use]
    if start.size == 0:
        return
    bs = _bin(start, edges)
    np.minimum(bs, nb - 1, out=bs)
    be = _bin(end, edges)                            # interval holding the (exclusive) end
    np.minimum(be, nb, out=be)
    lo = int(bs.min())
    m = int(be.max()) - lo + 1

    def add(target, bins, weights):
        target[lo:lo + m] += np.bincount(bins - lo, weights=weights, minlength=m)

    same = bs == be
    if same.any():
        len_same = (end[same] - start[same]) / 1e9   # float seconds from each interval's own edge
        add(integ, bs[same], x[same] * len_same)
        add(cover, bs[same], len_same)
        cr = ~same
        bs, be, x, start, end = bs[cr], be[cr], x[cr], start[cr], end[cr]
        if bs.size == 0:
            return
    head = (edges[bs + 1] - start) / 1e9
    tail = (end - edges[np.minimum(be, nb)]) / 1e9
    add(integ, bs, x * head)
    add(cover, bs, head)
    add(integ, be, x * tail)
    add(cover, be, tail)
    mid = be - bs > 1
    if mid.any():
        a, b, xv = bs[mid] + 1, be[mid], x[mid]
        np.add.at(dv, a, xv)
        np.add.at(dv, b, -xv)
        np.add.at(dc, a, 1.0)
        np.add.at(dc, b, -1.0)


def time_weighted_mean(ts: np.ndarray, value: np.ndarray, edges: np.ndarray, max_gap: float,
                       min_coverage: float = MIN_COVERAGE) -> tuple[np.ndarray, np.ndarray]:
    """Time-weighted average of a sample-and-hold signal over each grid interval.

    Parameters
    ----------
    ts : ndarray of int64
        Sorted times of the good readings. [ns]
    value : ndarray
        Their values. [any unit]
    edges : ndarray of int64
        Grid edges. [ns]
    max_gap : float
        Longest time a reading holds its value. [s]
    min_coverage : float
        Fewest fraction of an interval the held signal must cover. [-]

    Returns
    -------
    mean : ndarray
        Average over each interval, NaN where coverage is too low. [unit of value]
    coverage : ndarray
        Fraction of each interval covered. [-]

    References
    ----------
    .. [1] Seborg, D. E., Edgar, T. F., Mellichamp, D. A. (2004). Process Dynamics and
       Control, 2nd ed. Wiley, Ch. 17 (zero-order hold of sampled signals).

    >>> e = np.array([0, 60, 120]) * 10**9
    >>> m, c = time_weighted_mean(np.array([0, 30, 60]) * 10**9, np.array([1., 3., 5.]), e, 600)
    >>> m.tolist(), c.tolist()
    ([2.0, 5.0], [1.0, 1.0])
    """
    nb = len(edges) - 1
    if ts.size == 0 or nb <= 0:
        return np.full(max(nb, 0), np.nan), np.zeros(max(nb, 0))
    step = (edges[1] - edges[0]) / 1e9
    gap_ns = np.int64(round(max_gap * 1e9))
    integ = np.zeros(nb + 1)
    cover = np.zeros(nb + 1)
    dv = np.zeros(nb + 2)          # difference arrays for whole intervals held by one reading
    dc = np.zeros(nb + 2)
    for a in range(0, ts.size, _SLICE):   # slices of readings keep the temporaries small
        b = min(a + _SLICE, ts.size)
        nxt = np.r_[ts[a + 1:b + 1], np.int64(np.iinfo(np.int64).max)][: b - a]
        end = np.minimum(nxt, ts[a:b] + gap_ns)
        _accumulate(np.clip(ts[a:b], edges[0], edges[-1]), np.clip(end, edges[0], edges[-1]), value[a:b], edges,
                    integ, cover, dv, dc)
    if dc.any():               # in place: four grid-long temporaries fewer
        for acc, diff in ((integ, dv), (cover, dc)):
            np.cumsum(diff, out=diff)
            diff *= step
            acc += diff[: nb + 1]
    del dv, dc
    mean, cover = integ[:nb], cover[:nb]
    frac = cover / step
    np.divide(mean, cover, out=mean, where=cover > 0)
    mean[~(frac >= min_coverage - 1e-12)] = np.nan
    return mean, np.clip(frac, 0.0, 1.0, out=frac)


def sample_mean_carry(ts: np.ndarray, value: np.ndarray, edges: np.ndarray, max_age: float | None,
                      resets: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Mean of the readings in each interval, else the last earlier reading up to ``max_age`` old,
    never carried past a reset (a configured event such as a catalyst change: a sample taken before
    or at the event describes the plant before it).

    Parameters
    ----------
    ts : ndarray of int64
        Sorted times of the good readings. [ns]
    value : ndarray
        Their values. [any unit]
    edges : ndarray of int64
        Grid edges. [ns]
    max_age : float or None
        Oldest a carried reading may be at the interval's end. [s] None: never carried.
    resets : ndarray of int64, optional
        Sorted event times; a reading taken at or before one is not carried into intervals that
        end after it. [ns]

    Returns
    -------
    values : ndarray
        NaN where no reading is fresh enough. [unit of value]
    carried : ndarray of bool
        Intervals whose value was carried forward.

    >>> h = 3_600 * 10**9
    >>> v, c = sample_mean_carry(np.array([0, 10]) * 60 * 10**9, np.array([1., 3.]), np.arange(5) * h, 3 * 3600)
    >>> v.tolist(), c.tolist()
    ([2.0, 3.0, 3.0, nan], [False, True, True, False])

    A catalyst change at 01:30 stops the carry of the 00:10 sample (common practice, no source):

    >>> v, c = sample_mean_carry(np.array([0, 10]) * 60 * 10**9, np.array([1., 3.]), np.arange(5) * h, 3 * 3600,
    ...                          resets=np.array([90 * 60 * 10**9]))
    >>> v.tolist(), c.tolist()
    ([2.0, nan, nan, nan], [False, False, False, False])
    """
    nb = len(edges) - 1
    out = np.full(max(nb, 0), np.nan)
    carried = np.zeros(max(nb, 0), bool)
    if ts.size == 0 or nb <= 0:
        return out, carried
    b = _bin(ts, edges)
    inb = (b >= 0) & (b < nb)
    cnt = np.bincount(b[inb], minlength=nb)
    tot = np.bincount(b[inb], weights=value[inb], minlength=nb)
    has = cnt > 0
    out[has] = tot[has] / cnt[has]
    if max_age is not None:
        last = np.searchsorted(ts, edges[1:], side="left") - 1   # last reading before each interval end
        ok = ~has & (last >= 0)
        age = (edges[1:][ok] - ts[last[ok]]) / 1e9
        fresh = age <= max_age
        if resets is not None and len(resets):
            # an event r with t_last <= r < interval end stops the carry
            crossed = np.searchsorted(resets, edges[1:][ok], side="left") > np.searchsorted(
                resets, ts[last[ok]], side="left")
            fresh &= ~crossed
        idx = np.flatnonzero(ok)[fresh]
        out[idx] = value[last[idx]]
        carried[idx] = True
    return out, carried


def count_per_interval(ts: np.ndarray, edges: np.ndarray) -> np.ndarray:
    """Number of times in each interval.

    >>> count_per_interval(np.array([0, 5, 15, 99]), np.array([0, 10, 20])).tolist()
    [2, 1]
    """
    nb = len(edges) - 1
    b = _bin(ts, edges)
    inb = (b >= 0) & (b < nb)
    return np.bincount(b[inb], minlength=max(nb, 0))
