"""Time stamps as historians export them: texts -> nanoseconds, with the spelling named or detected.

``source.time_format`` names the spelling: a strftime-style pattern
(``"%d.%m.%Y %H:%M:%S"``, ``"%m/%d/%Y %I:%M %p"``; with ``%z`` the stamp carries
its offset), or one of the named numeric spellings:

* ``"unix_s"`` / ``"unix_ms"``: seconds / milliseconds since 1970-01-01 UTC
  (POSIX time, IEEE Std 1003.1), always UTC, read to the millisecond;
* ``"spreadsheet_days"``: serial day numbers of a spreadsheet, whole days since
  1899-12-30 plus the fraction of the day, in local wall time (so read with
  ``source.timezone``), rounded to the millisecond.

Without it (``None``, the default) each stamp is recognised as one of

* ISO 8601 in any common spelling: ``T`` or a space between date and time,
  seconds optional, fractional seconds (``.`` or ``,``), ``Z`` or an offset
  (``+09:00``, ``-0500``, ``+02``); also year-first with ``/`` or ``.``;
* a numeric date day-first or month-first, with ``/``, ``.`` or ``-`` between
  its parts and a four-digit year, optionally followed by a time on a 24-hour
  or a 12-hour clock (``AM``/``PM``) and an offset.

Whether a numeric date is day-first or month-first is decided by the source,
not the stamp: a stamp whose first part exceeds 12 can only be day-first, one
whose second part exceeds 12 only month-first. The first stamps that decide it
fix the order for the source (the caller keeps it); a stamp that contradicts it
is refused. While nothing has decided, such a stamp is *undecided*; the caller
defers or refuses it (see :class:`~kinetrace.ingest.collect.Collector`).
"""

from __future__ import annotations

import re
from dataclasses import dataclass

import numpy as np
import pandas as pd

NAT = np.iinfo(np.int64).min

#: Named numeric spellings of ``source.time_format``.
NAMED_FORMATS = ("unix_s", "unix_ms", "spreadsheet_days")
#: Orders of a numeric date.
DAY_FIRST, MONTH_FIRST = "day_first", "month_first"

# why a stamp was not read (codes of Stamps.reason)
OK, EMPTY, UNRECOGNISED, NUMBER, NO_MATCH, INVALID_DATE, UNDECIDED, CONTRADICTS = range(8)

#: Serial day number of 1970-01-01 in the spreadsheet day count (day 0 = 1899-12-30). [d]
SPREADSHEET_UNIX_DAY = 25569
_NS_DAY = 86_400 * 10**9

_ISO = re.compile(r"^(\d{4})[-/.](\d{1,2})[-/.](\d{1,2})(?:[T ](\d{1,2})(?::(\d{2})(?::(\d{2})(?:[.,](\d{1,9}))?)?)?)?"
                  r"\s*(Z|z|[+-]\d{2}(?::?\d{2})?)?$")
_DM = re.compile(r"^(\d{1,2})([/.-])(\d{1,2})\2(\d{4})(?:[ T,]+(\d{1,2}):(\d{2})(?::(\d{2})(?:[.,](\d{1,9}))?)?"
                 r"\s*([AaPp]\.?[Mm]\.?)?)?\s*(Z|z|[+-]\d{2}(?::?\d{2})?)?$")
_NUMBER = re.compile(r"^[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?$")


@dataclass
class Stamps:
    """Texts read as time stamps.

    Attributes
    ----------
    ns : ndarray of int64
        UTC [ns since 1970] where ``aware``, else local wall time [ns]; ``NAT`` where unread.
    aware : ndarray of bool
        The stamp carried ``Z`` or an offset (or is Unix time).
    reason : ndarray of int8
        ``OK`` or why the stamp was not read (``EMPTY``, ``UNRECOGNISED``, ``NUMBER``,
        ``NO_MATCH``, ``INVALID_DATE``, ``UNDECIDED``, ``CONTRADICTS``).
    order : str or None
        The numeric-date order in force after these stamps (given, or decided by them).
    """

    ns: np.ndarray
    aware: np.ndarray
    reason: np.ndarray
    order: str | None


def check_time_format(fmt: str | None) -> str | None:
    """Validate ``source.time_format``; returns it (None: detect), else raises ValueError.

    >>> check_time_format("%d.%m.%Y %H:%M"), check_time_format("unix_ms")
    ('%d.%m.%Y %H:%M', 'unix_ms')
    >>> check_time_format("dd.mm.yyyy")
    Traceback (most recent call last):
    ...
    ValueError: time_format 'dd.mm.yyyy' is neither a strftime pattern with at least %Y or %y and %m and %d (e.g. '%d.%m.%Y %H:%M:%S') nor one of 'unix_s', 'unix_ms', 'spreadsheet_days'
    """
    if fmt is None or fmt in NAMED_FORMATS:
        return fmt
    if ("%Y" in fmt or "%y" in fmt) and "%m" in fmt and "%d" in fmt or ("%Y" in fmt and "%j" in fmt):
        return fmt
    raise ValueError(f"time_format {fmt!r} is neither a strftime pattern with at least %Y or %y and %m and %d "
                     f"(e.g. '%d.%m.%Y %H:%M:%S') nor one of {', '.join(repr(n) for n in NAMED_FORMATS)}")


def _clean(texts) -> pd.Series:
    s = pd.Series(np.asarray(texts, dtype=object), dtype=object)
    return s.map(lambda v: v.strip() if isinstance(v, str) else (None if v is None or v != v else str(v)))


def _iso_ns(texts: pd.Series, aware: bool) -> np.ndarray:
    """Canonical ISO texts -> int64 [ns]; NAT where invalid or outside the ns range (years 1678-2261)."""
    out = np.full(len(texts), NAT, dtype=np.int64)
    if len(texts) == 0:
        return out
    try:
        dt = pd.to_datetime(texts, format="ISO8601", utc=aware, errors="coerce")
        return pd.DatetimeIndex(dt).as_unit("ns").asi8
    except (OverflowError, ValueError, pd.errors.OutOfBoundsDatetime):
        pass
    for k, t in enumerate(texts):      # a few out-of-range years in a batch: one by one (rare)
        try:
            out[k] = pd.Timestamp(t).tz_convert("UTC").value if aware else pd.Timestamp(t).value
        except (OverflowError, ValueError, TypeError, pd.errors.OutOfBoundsDatetime):
            out[k] = NAT
    return out


def _canonical(year, month, day, hour, minute, second, frac, zone) -> pd.Series:
    """Parts (Series of str, missing as NaN) -> ``YYYY-MM-DDTHH:MM:SS[.f][zone]``."""
    f = lambda s, w: s.fillna("0").str.zfill(w)   # noqa: E731
    text = (year + "-" + f(month, 2) + "-" + f(day, 2) + "T" + f(hour, 2) + ":" + f(minute, 2) + ":" + f(second, 2))
    text = text + np.where(frac.notna(), "." + frac.fillna(""), "")
    zone = zone.fillna("").str.upper()
    return text + zone


def _read_iso(s: pd.Series) -> tuple[pd.Series, pd.Series]:
    """Texts of the ISO shape -> (canonical text or NaN, aware)."""
    m = s.str.extract(_ISO)
    hit = m[0].notna()
    canon = pd.Series(np.nan, index=s.index, dtype=object)
    if hit.any():
        mm = m[hit]
        canon[hit] = _canonical(mm[0], mm[1], mm[2], mm[3], mm[4], mm[5], mm[6], mm[7])
    return canon, m[7].notna()


def _read_dm(s: pd.Series, order: str | None):
    """Numeric day/month dates -> (canonical text under ``order``, aware, evidence, undecided, contradicts)."""
    m = s.str.extract(_DM)
    hit = m[0].notna()
    n = len(s)
    canon = pd.Series(np.nan, index=s.index, dtype=object)
    aware = m[9].notna().to_numpy()
    empty = np.zeros(n, bool)
    if not hit.any():
        return canon, aware, (0, 0), empty, empty, empty
    a = pd.to_numeric(m[0], errors="coerce").to_numpy()
    b = pd.to_numeric(m[2], errors="coerce").to_numpy()
    with np.errstate(invalid="ignore"):
        dm_ok = hit.to_numpy() & (a >= 1) & (a <= 31) & (b >= 1) & (b <= 12)
        md_ok = hit.to_numpy() & (a >= 1) & (a <= 12) & (b >= 1) & (b <= 31)
    evidence = (int((dm_ok & ~md_ok).sum()), int((md_ok & ~dm_ok).sum()))
    if order is None:
        same = dm_ok & md_ok & (a == b)          # 05.05.2026 reads the same either way
        undecided = dm_ok & md_ok & ~same
        take = (dm_ok ^ md_ok) | same
        day_first = dm_ok & ~md_ok
        contradicts = empty
    else:
        day_first = np.full(n, order == DAY_FIRST)
        take = dm_ok if order == DAY_FIRST else md_ok
        undecided = empty
        contradicts = hit.to_numpy() & ~take & (dm_ok | md_ok)
    hour = pd.to_numeric(m[4], errors="coerce")
    ampm = m[8].fillna("").str.upper().str.replace(".", "", regex=False)
    pm, am = (ampm == "PM").to_numpy(), (ampm == "AM").to_numpy()
    h = hour.to_numpy()
    with np.errstate(invalid="ignore"):
        bad_clock = (pm | am) & ~((h >= 1) & (h <= 12))
    h24 = np.where(pm & (h < 12), h + 12, np.where(am & (h == 12), 0, h))
    hour_text = pd.Series(np.where(np.isnan(h24), np.nan, pd.Series(h24).fillna(0).astype(int).astype(str)),
                          index=s.index, dtype=object)
    sel = take & ~bad_clock
    if sel.any():
        idx = s.index[sel]
        day = pd.Series(np.where(day_first, m[0], m[2]), index=s.index, dtype=object)
        month = pd.Series(np.where(day_first, m[2], m[0]), index=s.index, dtype=object)
        canon[idx] = _canonical(m.loc[idx, 3], month[idx], day[idx], hour_text[idx], m.loc[idx, 5], m.loc[idx, 6],
                                m.loc[idx, 7], m.loc[idx, 9])
    return canon, aware, evidence, undecided, contradicts, hit.to_numpy()


def _read_named(s: pd.Series, fmt: str) -> tuple[np.ndarray, np.ndarray]:
    x = pd.to_numeric(s, errors="coerce").to_numpy(dtype=float, na_value=np.nan)
    # to the millisecond, in float64 (exact below 2**53 ms, some 285,000 years), then int64 nanoseconds
    if fmt == "spreadsheet_days":
        ms = np.round((x - SPREADSHEET_UNIX_DAY) * 86_400_000.0)
        aware = False
    else:
        ms = np.round(x * (1e3 if fmt == "unix_s" else 1.0))
        aware = True
    scale = 1_000_000
    ok = np.isfinite(ms) & (np.abs(ms * scale) < 9.2e18 - 2 * _NS_DAY)
    out = np.full(len(s), NAT, dtype=np.int64)
    out[ok] = ms[ok].astype(np.int64) * scale
    return out, np.full(len(s), aware)


def read_stamps(texts, time_format: str | None = None, order: str | None = None) -> Stamps:
    """Read time-stamp texts in a named spelling, or recognise each one (module docstring).

    Parameters
    ----------
    texts : array_like of str
        Time stamps (None/NaN allowed); surrounding spaces are ignored.
    time_format : str, optional
        ``source.time_format``: a strftime pattern or a name of :data:`NAMED_FORMATS`;
        None recognises ISO 8601 and numeric day/month dates.
    order : str, optional
        Numeric-date order already in force for the source (``"day_first"`` or
        ``"month_first"``); None lets these stamps decide it.

    Returns
    -------
    Stamps
        ``ns`` [ns]: UTC where ``aware``, else local wall time.

    >>> st = read_stamps(["2026-03-02 01:00:00+09:00", "02.03.2026 01:00:00", "25.03.2026 1:00 PM", "junk"])
    >>> st.order, st.reason.tolist(), st.aware.tolist()
    ('day_first', [0, 0, 0, 2], [True, False, False, False])
    >>> [str(pd.Timestamp(v)) for v in st.ns[:3]]
    ['2026-03-01 16:00:00', '2026-03-02 01:00:00', '2026-03-25 13:00:00']
    >>> read_stamps(["03/01/2026 18:00"]).reason.tolist()   # reads both ways: undecided
    [6]
    """
    s = _clean(texts)
    n = len(s)
    ns = np.full(n, NAT, dtype=np.int64)
    aware = np.zeros(n, bool)
    reason = np.full(n, UNRECOGNISED, dtype=np.int8)
    present = s.map(bool).to_numpy(dtype=bool)
    reason[~present] = EMPTY
    if n == 0 or not present.any():
        return Stamps(ns, aware, reason, order)
    sp = s.where(present, "")
    if time_format in NAMED_FORMATS:
        v, aw = _read_named(sp, time_format)
        ok = present & (v != NAT)
        ns[ok], aware[ok] = v[ok], aw[ok]
        reason[ok] = OK
        reason[present & ~ok] = NO_MATCH
        return Stamps(ns, aware, reason, order)
    if time_format is not None:
        has_zone = "%z" in time_format or "%Z" in time_format
        try:
            dt = pd.to_datetime(sp.where(present, None), format=time_format, errors="coerce", utc=has_zone)
            v = pd.DatetimeIndex(dt).as_unit("ns").asi8
        except (ValueError, OverflowError, pd.errors.OutOfBoundsDatetime):
            v = np.array([_one(t, time_format, has_zone) for t in sp], dtype=np.int64)
        ok = present & (v != NAT)
        ns[ok] = v[ok]
        aware[ok] = has_zone
        reason[ok] = OK
        reason[present & ~ok] = NO_MATCH
        return Stamps(ns, aware, reason, order)
    canon, iso_aware = _read_iso(sp)
    iso = canon.notna().to_numpy()
    rest = present & ~iso
    dm_hit = np.zeros(n, bool)
    if rest.any():
        sub = sp[rest]
        c, aw, evidence, undecided, contradicts, hit = _read_dm(sub, order)
        if order is None and (evidence[0] or evidence[1]):
            order = DAY_FIRST if evidence[0] >= evidence[1] else MONTH_FIRST
            c, aw, _, undecided, contradicts, hit = _read_dm(sub, order)
        idx = np.flatnonzero(rest)
        canon.iloc[idx] = c.to_numpy()
        iso_aware = iso_aware.to_numpy() | np.isin(np.arange(n), idx[aw])
        reason[idx[undecided]] = UNDECIDED
        reason[idx[contradicts]] = CONTRADICTS
        dm_hit[idx[hit]] = True
        number = np.flatnonzero(rest)[sub.str.match(_NUMBER).to_numpy(dtype=bool) & ~hit]
        reason[number] = NUMBER
    else:
        iso_aware = iso_aware.to_numpy()
    have = canon.notna().to_numpy()
    for flag in (True, False):
        sel = have & (iso_aware == flag)
        if sel.any():
            v = _iso_ns(canon[sel], aware=flag)
            ok = v != NAT
            k = np.flatnonzero(sel)
            ns[k[ok]] = v[ok]
            aware[k[ok]] = flag
            reason[k[ok]] = OK
            reason[k[~ok]] = INVALID_DATE
    return Stamps(ns, aware, reason, order)


def _one(text: str, fmt: str, aware: bool) -> int:
    try:
        t = pd.Timestamp(pd.to_datetime(text, format=fmt, utc=aware))
        return int(t.as_unit("ns").value)
    except (ValueError, TypeError, OverflowError, pd.errors.OutOfBoundsDatetime):
        return NAT


def order_hint(text: str) -> str:
    """The two ``source.time_format`` patterns a numeric date like ``text`` may need (day or month first).

    Examples
    --------
    >>> order_hint("03/01/2026 18:00")
    "'%d/%m/%Y %H:%M' (day first) or '%m/%d/%Y %H:%M' (month first)"
    """
    m = _DM.match(text or "")
    if not m:
        return ""
    sep, clock = m.group(2), ""
    if m.group(5):
        clock = " %I:%M" if m.group(9) else " %H:%M"
        clock += ":%S" if m.group(7) else ""
        clock += " %p" if m.group(9) else ""
    return (f"'%d{sep}%m{sep}%Y{clock}' (day first) or '%m{sep}%d{sep}%Y{clock}' (month first)")


def explain(text, reason: int, time_format: str | None = None, order: str | None = None) -> str:
    """Why a time stamp was not read, and what to set (for messages).

    >>> explain("03/01/2026 18:00", UNDECIDED)
    "time stamp '03/01/2026 18:00' reads both day-first and month-first and no stamp of the source decides; set source.time_format = '%d/%m/%Y %H:%M' (day first) or '%m/%d/%Y %H:%M' (month first)"
    """
    t = repr(text)
    if reason == EMPTY:
        return "time stamp is empty"
    if reason == NUMBER:
        return (f"time stamp {t} is a number; if the export writes Unix time or spreadsheet day numbers, set "
                "source.time_format = 'unix_s', 'unix_ms' or 'spreadsheet_days'")
    if reason == NO_MATCH:
        return f"time stamp {t} does not match source.time_format {time_format!r}"
    if reason == INVALID_DATE:
        return f"time stamp {t} is not a valid date and time (e.g. day 31 of a 30-day month, hour 25)"
    if reason == UNDECIDED:
        return (f"time stamp {t} reads both day-first and month-first and no stamp of the source decides; "
                f"set source.time_format = {order_hint(text)}")
    if reason == CONTRADICTS:
        other = "month-first" if order == DAY_FIRST else "day-first"
        return (f"time stamp {t} is only valid {other}, but other stamps of the source are "
                f"{order.replace('_', '-') if order else '?'}; set source.time_format = {order_hint(text)}")
    return (f"time stamp {t} is not a recognised spelling (ISO 8601 such as 2026-09-01T06:00:00Z, or a day-first "
            "or month-first date with '/', '.' or '-' and a four-digit year); set source.time_format to its "
            "strftime pattern, e.g. '%d/%m/%y %H:%M'")
