"""Time stamps to UTC nanoseconds, with an explicit policy for daylight-saving transitions.

Time stamps are ISO 8601. One that carries ``Z`` or a UTC offset (``+01:00``,
``-0500``) is exact. One without an offset is *local wall time* and needs the
source's IANA time zone (``source.timezone``); without one it is refused
(fate ``bad_timestamp``), never guessed.

Daylight-saving policy for naive local time (``source.dst_ambiguous``,
``source.dst_missing``):

* **Repeated hour** (clocks go back, e.g. 02:00-03:00 twice in Europe/Berlin on
  the last Sunday of October, 01:00-02:00 twice in America/Chicago on the first
  Sunday of November). ``"infer"`` (default): file order decides, tag by tag. A
  logger writes the first pass (daylight time) before the second (standard
  time), so within one tag's readings of that repeated hour, those before the
  first step backwards (or a repeat) of the wall clock are daylight time, and it
  and those after it standard time. If a tag's readings of the repeated hour
  never step back, file order cannot place them: they get the fate
  ``ambiguous_time`` and are not used. ``"daylight"`` / ``"standard"`` take
  every repeated-hour reading as the first / second pass; ``"flag"`` refuses
  them all.
* **Skipped hour** (clocks go forward; 02:00-03:00 does not exist in Berlin on
  the last Sunday of March, nor in Chicago on the second Sunday of March).
  ``"flag"`` (default): such readings get the fate ``nonexistent_time`` and are
  not used, since a clock that shows a time that did not exist is wrong.
  ``"shift"``: read them with the offset in force *before* the jump (the
  logger's clock had not yet moved forward), e.g. Berlin 02:30 -> 01:30 UTC.

Everything is stored as UTC.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from .fates import AMBIGUOUS_TIME, BAD_TIME, GOOD, NONEXISTENT_TIME
from .timeformats import NAT, OK, read_stamps

AMBIGUOUS_POLICIES = ("infer", "daylight", "standard", "flag")
MISSING_POLICIES = ("flag", "shift")


def parse_timestamps(texts, timezone: str | None = None, *, dst_ambiguous: str = "infer",
                     dst_missing: str = "flag", time_format: str | None = None,
                     date_order: str | None = None) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Parse time stamps to UTC.

    Parameters
    ----------
    texts : array_like of str
        Time stamps (usually the unique ones of a block; None/NaN allowed).
    timezone : str, optional
        IANA zone for time stamps without offset, e.g. ``"Europe/Berlin"``.
    dst_ambiguous, dst_missing : str
        Policies for the repeated and the skipped local hour (module docstring).
    time_format : str, optional
        ``source.time_format`` (see :mod:`kinetrace.ingest.timeformats`); None recognises the spelling.
    date_order : str, optional
        ``"day_first"`` or ``"month_first"`` for numeric dates; None lets the stamps decide.

    Returns
    -------
    utc : ndarray of int64
        UTC time [ns since 1970-01-01]; for a repeated-hour time under ``"infer"``
        the daylight (first-pass) reading. ``NAT`` where unusable.
    status : ndarray of int8
        Fate code: GOOD, BAD_TIME, AMBIGUOUS_TIME (still to be placed by file
        order under ``"infer"``; refused under ``"flag"``) or NONEXISTENT_TIME.
    second : ndarray of int64
        UTC time if the reading is the second (standard-time) pass; equals ``utc``
        except for repeated-hour times.

    >>> utc, st, _ = parse_timestamps(["2026-03-29T01:30:00Z", "2026-03-29T02:30:00", "junk"], "Europe/Berlin")
    >>> st.tolist()
    [0, 3, 1]
    >>> str(pd.Timestamp(utc[0], tz="UTC"))
    '2026-03-29 01:30:00+00:00'
    """
    st = read_stamps(texts, time_format, date_order)
    return place(st.ns, st.aware & (st.reason == OK), ~st.aware & (st.reason == OK), timezone,
                 dst_ambiguous=dst_ambiguous, dst_missing=dst_missing)


def place(ns: np.ndarray, aware: np.ndarray, naive: np.ndarray, timezone: str | None, *,
          dst_ambiguous: str = "infer", dst_missing: str = "flag") -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Place read stamps in UTC: ``aware`` ones are UTC already, ``naive`` ones local wall time of ``timezone``.

    ``ns`` [ns]; returns (utc [ns], status, second-pass utc [ns]) as :func:`parse_timestamps`.
    A naive stamp without a zone is BAD_TIME.
    """
    if dst_ambiguous not in AMBIGUOUS_POLICIES:
        raise ValueError(f"dst_ambiguous must be one of {AMBIGUOUS_POLICIES}, not {dst_ambiguous!r}")
    if dst_missing not in MISSING_POLICIES:
        raise ValueError(f"dst_missing must be one of {MISSING_POLICIES}, not {dst_missing!r}")
    n = len(ns)
    utc = np.full(n, NAT, dtype=np.int64)
    status = np.full(n, BAD_TIME, dtype=np.int8)
    utc[aware] = ns[aware]
    status[aware] = GOOD
    second = utc.copy()
    if naive.any() and timezone:
        idx = np.flatnonzero(naive)
        wall = ns[naive]
        day = np.int64(86_400_000_000_000)
        # a day inside the ns range on both sides, so that adding a zone offset cannot overflow
        parsed = (wall != NAT) & (wall > np.iinfo(np.int64).min + 2 * day) & (wall < np.iinfo(np.int64).max - 2 * day)
        idx, wall = idx[parsed], wall[parsed]
        w = pd.DatetimeIndex(wall.astype("datetime64[ns]"))
        first = w.tz_localize(timezone, ambiguous=np.ones(len(w), bool), nonexistent="NaT").asi8
        last = w.tz_localize(timezone, ambiguous=np.zeros(len(w), bool), nonexistent="NaT").asi8
        gap = first == NAT
        amb = ~gap & (first != last)
        ok = ~gap & ~amb
        utc[idx[ok]] = first[ok]
        second[idx[ok]] = first[ok]
        status[idx[ok]] = GOOD
        if amb.any():
            a = idx[amb]
            if dst_ambiguous == "standard":
                utc[a] = second[a] = last[amb]
                status[a] = GOOD
            elif dst_ambiguous == "daylight":
                utc[a] = second[a] = first[amb]
                status[a] = GOOD
            else:
                utc[a], second[a] = first[amb], last[amb]
                status[a] = AMBIGUOUS_TIME
        if gap.any():
            g = idx[gap]
            if dst_missing == "shift":
                day = np.int64(86_400_000_000_000)
                before = pd.DatetimeIndex((wall[gap] - day).astype("datetime64[ns]")).tz_localize(
                    timezone, ambiguous="NaT", nonexistent="NaT")
                offset = before.tz_localize(None).asi8 - before.asi8   # local - UTC, the day before [ns]
                utc[g] = second[g] = wall[gap] - offset
                status[g] = GOOD
            else:
                utc[g] = second[g] = wall[gap]
                status[g] = NONEXISTENT_TIME
    return utc, status, second


def place_repeated_hour(group: np.ndarray, wall_order: np.ndarray) -> np.ndarray:
    """Which repeated-hour readings are the second (standard-time) pass, from file order.

    Parameters
    ----------
    group : ndarray of int
        Group of each reading (one per tag and transition), in file order.
    wall_order : ndarray of int64
        The readings' daylight-time interpretation [ns], in file order (a
        monotone image of the wall clock within one transition).

    Returns
    -------
    ndarray of int8
        1 = second pass, 0 = first pass, -1 = cannot be placed (the group never
        steps back).

    >>> place_repeated_hour(np.array([0, 0, 0, 0, 1]), np.array([10, 20, 10, 20, 5])).tolist()
    [0, 0, 1, 1, -1]
    """
    n = len(group)
    out = np.full(n, -1, dtype=np.int8)
    if n == 0:
        return out
    order = np.argsort(group, kind="stable")
    g, w = group[order], wall_order[order]
    new = np.r_[True, g[1:] != g[:-1]]
    back = np.r_[False, (w[1:] <= w[:-1]) & ~new[1:]]
    gid = np.cumsum(new) - 1
    cum = np.cumsum(back)                          # backward steps so far, counted from each group's start
    seen_back = cum - cum[np.flatnonzero(new)][gid]
    any_back = np.bincount(gid, weights=back, minlength=gid.max() + 1) > 0
    res = np.where(seen_back > 0, 1, 0).astype(np.int8)
    res[~any_back[gid]] = -1
    out[order] = res
    return out
