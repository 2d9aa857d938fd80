"""Data-quality screening of one tag's readings: pure functions on arrays.

Rules, in this order, each only on readings still good after the ones before:

1. **Duplicates.** Readings with the same time stamp: if all carry the same
   value the first is kept and the others get ``duplicate``; if the values
   differ, none can be trusted and all get ``conflicting_duplicate``.
2. **Range.** A value outside the tag's ``valid_range`` (tag unit) gets ``out_of_range``.
3. **Spike.** A reading that jumps away from its predecessor faster than
   ``max_rate`` (tag unit per minute) and comes back as fast to its successor
   is a one-reading excursion and gets ``spike``; a step that stays is kept.
4. **Frozen.** A run of identical consecutive values lasting at least
   ``frozen_after`` seconds is a flat-lined transmitter: every reading of the
   run after its first gets ``frozen`` - unless the run sits at the low end of
   the range (a flow at its low-flow cut-off while the unit is down).

Gaps are not a fate of a reading; they show up as missing grid intervals in
alignment (:mod:`kinetrace.ingest.align`).

References
----------
.. [1] Narasimhan, S., Jordache, C. (2000). Data Reconciliation and Gross Error
   Detection. Gulf Publishing, Ch. 1 (screening of measurements before reconciliation).
"""

from __future__ import annotations

import numpy as np

from .fates import CONFLICT, DUPLICATE, FROZEN, GOOD, OUT_OF_RANGE, SPIKE
from .timestamps import NAT

_NS_PER_MIN = 60e9


def sort_readings(ts: np.ndarray, *arrays: np.ndarray) -> tuple[int, np.ndarray, list[np.ndarray]]:
    """Sort one tag's readings by time (stable) and count those that came out of order.

    Returns (number of readings earlier than one before them in file order,
    sorted times, sorted companion arrays). Readings without a time (``NAT``)
    sort first and are not counted.

    >>> n, t, (v,) = sort_readings(np.array([1, 3, 2, 4]), np.array([10., 30., 20., 40.]))
    >>> n, t.tolist(), v.tolist()
    (1, [1, 2, 3, 4], [10.0, 20.0, 30.0, 40.0])
    """
    if ts.size < 2 or bool(np.all(ts[1:] >= ts[:-1])):
        return 0, ts, list(arrays)             # in order already (readings without a time sort first)
    t = ts[ts != NAT]
    late = int((t[1:] < np.maximum.accumulate(t)[:-1]).sum()) if t.size > 1 else 0
    del t
    order = np.argsort(ts, kind="stable")
    return late, ts[order], [a[order] for a in arrays]


def flag_duplicates(ts: np.ndarray, value: np.ndarray, fate: np.ndarray) -> np.ndarray:
    """Fates after the duplicate rule (``ts`` sorted). [ns], [tag unit] -> fate codes

    >>> flag_duplicates(np.array([1, 2, 2, 3, 3]), np.array([1., 2., 2., 3., 4.]), np.zeros(5, np.int8)).tolist()
    [0, 0, 6, 7, 7]
    """
    fate = fate.copy()
    if ts.size < 2 or not (ts[1:] == ts[:-1]).any():
        return fate                        # no two readings share a time stamp
    g = np.flatnonzero(fate == GOOD)
    if g.size < 2:
        return fate
    t, v = ts[g], value[g]
    same = t[1:] == t[:-1]
    if not same.any():
        return fate
    # group consecutive equal times
    start = np.r_[True, ~same]
    gid = np.cumsum(start) - 1
    size = np.bincount(gid)
    vmin = np.full(size.size, np.inf)
    vmax = np.full(size.size, -np.inf)
    np.minimum.at(vmin, gid, v)
    np.maximum.at(vmax, gid, v)
    multi = size[gid] > 1
    conflict = multi & (vmin[gid] != vmax[gid])
    dup = multi & ~conflict & ~start
    fate[g[conflict]] = CONFLICT
    fate[g[dup]] = DUPLICATE
    return fate


def flag_range(value: np.ndarray, fate: np.ndarray, valid_range) -> np.ndarray:
    """Fates after the range rule. ``valid_range`` (low, high) in the tag unit, inclusive.

    >>> flag_range(np.array([-1., 5., 11.]), np.zeros(3, np.int8), (0, 10)).tolist()
    [8, 0, 8]
    """
    if valid_range is None:
        return fate
    fate = fate.copy()
    lo, hi = valid_range
    fate[(fate == GOOD) & ((value < lo) | (value > hi))] = OUT_OF_RANGE
    return fate


def flag_spikes(ts: np.ndarray, value: np.ndarray, fate: np.ndarray, max_rate: float | None) -> np.ndarray:
    """Fates after the spike rule.

    Parameters
    ----------
    ts : ndarray of int64
        Sorted times. [ns]
    value : ndarray
        Values. [tag unit]
    fate : ndarray of int8
    max_rate : float or None
        Largest credible rate of change. [tag unit / min]

    >>> t = np.arange(5) * 60_000_000_000
    >>> flag_spikes(t, np.array([1., 1., 9., 1., 1.]), np.zeros(5, np.int8), 2.0).tolist()
    [0, 0, 9, 0, 0]
    >>> flag_spikes(t, np.array([1., 1., 9., 9., 9.]), np.zeros(5, np.int8), 2.0).tolist()  # a step stays
    [0, 0, 0, 0, 0]
    """
    if max_rate is None:
        return fate
    fate = fate.copy()
    g = np.flatnonzero(fate == GOOD)
    if g.size < 3:
        return fate
    t, v = ts[g].astype(float) / _NS_PER_MIN, value[g]
    dt = np.diff(t)
    with np.errstate(divide="ignore", invalid="ignore"):
        rate = np.diff(v) / np.where(dt > 0, dt, np.nan)
    up, down = rate[:-1], rate[1:]
    spike = (np.abs(up) > max_rate) & (np.abs(down) > max_rate) & (np.sign(up) == -np.sign(down))
    fate[g[1:-1][spike]] = SPIKE
    return fate


def flag_frozen(ts: np.ndarray, value: np.ndarray, fate: np.ndarray, frozen_after: float | None,
                min_readings: int = 3, floor: float | None = None) -> np.ndarray:
    """Fates after the flat-line rule.

    Parameters
    ----------
    ts : ndarray of int64
        Sorted times. [ns]
    value : ndarray
        Values. [tag unit]
    fate : ndarray of int8
    frozen_after : float or None
        Shortest duration of a run of identical values that counts as frozen. [s]
    min_readings : int
        Fewest readings in such a run (sparse readings of a steady value are not a flat line).
    floor : float, optional
        Runs at or below this value are not frozen: a flow at its low-flow cut-off (0 while
        the unit is down) or an analyzer at its zero is a real flat line. [tag unit]

    >>> t = np.arange(6) * 3_600_000_000_000   # hourly
    >>> flag_frozen(t, np.array([1., 2., 2., 2., 2., 3.]), np.zeros(6, np.int8), 7200.0).tolist()
    [0, 0, 10, 10, 10, 0]
    >>> flag_frozen(t, np.array([1., 0., 0., 0., 0., 3.]), np.zeros(6, np.int8), 7200.0, floor=0.0).tolist()
    [0, 0, 0, 0, 0, 0]
    """
    if frozen_after is None:
        return fate
    fate = fate.copy()
    g = np.flatnonzero(fate == GOOD)
    if g.size < 2:
        return fate
    v = value[g]
    eq = (v[1:] == v[:-1]).view(np.int8)
    del v
    # runs of at least two equal consecutive good values: good readings first..last of each run
    step = np.diff(eq, prepend=np.int8(0), append=np.int8(0))
    del eq
    first, last = np.flatnonzero(step == 1), np.flatnonzero(step == -1)
    del step
    keep = last - first + 1 >= min_readings
    first, last = first[keep], last[keep]
    frozen = (ts[g[last]] - ts[g[first]]) / 1e9 >= frozen_after
    if floor is not None:
        frozen &= value[g[first]] > floor
    first, last = first[frozen], last[frozen]
    # every reading of a frozen run after its first
    n = last - first
    mark = np.repeat(first + 1 - (np.cumsum(n) - n), n) + np.arange(int(n.sum()))
    fate[g[mark]] = FROZEN
    return fate


def screen(ts, value, fate, *, valid_range=None, max_rate=None, frozen_after=None):
    """All screening rules on one tag's (sorted) readings; returns the new fates.

    The flat-line rule spares runs at the low end of ``valid_range`` (or at 0 without one).

    >>> t = np.arange(4) * 60_000_000_000
    >>> screen(t, np.array([1., 50., 1., 1.]), np.zeros(4, np.int8), valid_range=(0, 10)).tolist()
    [0, 8, 0, 0]
    """
    fate = flag_duplicates(ts, value, fate)
    fate = flag_range(value, fate, valid_range)
    fate = flag_spikes(ts, value, fate, max_rate)
    floor = valid_range[0] if valid_range is not None else 0.0
    return flag_frozen(ts, value, fate, frozen_after, floor=floor)
