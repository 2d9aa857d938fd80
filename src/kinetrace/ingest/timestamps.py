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

import re

import numpy as np
import pandas as pd

from .fates import AMBIGUOUS_TIME, BAD_TIME, GOOD, NONEXISTENT_TIME

_OFFSET = re.compile(r"(?:[zZ]|[+-]\d\d(?::?\d\d)?)$")
NAT = np.iinfo(np.int64).min

AMBIGUOUS_POLICIES = ("infer", "daylight", "standard", "flag")
MISSING_POLICIES = ("flag", "shift")


def _to_ns(texts: pd.Series, utc: bool) -> np.ndarray:
    """ISO 8601 texts -> int64 [ns], NAT where unreadable or outside the ns range (years 1678-2261)."""
    try:
        dt = pd.to_datetime(texts, format="ISO8601", utc=utc, errors="coerce")
        return pd.DatetimeIndex(dt).as_unit("ns").asi8
    except (OverflowError, ValueError, pd.errors.OutOfBoundsDatetime):
        return np.array([_to_ns(pd.Series([t], dtype=object), utc)[0] if _one_ok(t, utc) else NAT for t in texts],
                        dtype=np.int64)


def _one_ok(text, utc: bool) -> bool:
    try:
        pd.DatetimeIndex(pd.to_datetime(pd.Series([text], dtype=object), format="ISO8601", utc=utc,
                                        errors="coerce")).as_unit("ns")
        return True
    except (OverflowError, ValueError, pd.errors.OutOfBoundsDatetime):
        return False


def _naive_ns(texts: pd.Series) -> np.ndarray:
    return _to_ns(texts, utc=False)


def parse_timestamps(texts, timezone: str | None = None, *, dst_ambiguous: str = "infer",
                     dst_missing: str = "flag") -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Parse ISO 8601 time stamps to UTC.

    Parameters
    ----------
    texts : array_like of str
        Time stamps (usually the unique ones of a block; None/NaN allowed).
    timezone : str, optional
        IANA zone for time stamps without offset, e.g. ``"Europe/Berlin"``.
    dst_ambiguous, dst_missing : str
        Policies for the repeated and the skipped local hour (module docstring).

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
    if dst_ambiguous not in AMBIGUOUS_POLICIES:
        raise ValueError(f"dst_ambiguous must be one of {AMBIGUOUS_POLICIES}, not {dst_ambiguous!r}")
    if dst_missing not in MISSING_POLICIES:
        raise ValueError(f"dst_missing must be one of {MISSING_POLICIES}, not {dst_missing!r}")
    s = pd.Series(np.asarray(texts, dtype=object), dtype=object).where(lambda v: v.notna(), None)
    s = s.map(lambda v: v.strip() if isinstance(v, str) else None)
    n = len(s)
    utc = np.full(n, NAT, dtype=np.int64)
    status = np.full(n, BAD_TIME, dtype=np.int8)
    has_off = s.map(lambda v: bool(v) and _OFFSET.search(v) is not None).to_numpy(dtype=bool)
    if has_off.any():
        ns = _to_ns(s[has_off], utc=True)
        ok = ns != NAT
        idx = np.flatnonzero(has_off)
        utc[idx[ok]] = ns[ok]
        status[idx[ok]] = GOOD
    second = utc.copy()
    naive = ~has_off & s.map(bool).to_numpy(dtype=bool)
    if naive.any() and timezone:
        idx = np.flatnonzero(naive)
        wall = _naive_ns(s[naive])
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
