"""Collect parsed readings of one unit's tags, batch by batch, with each reading's fate.

Readers (CSV, SQL) hand over batches of strings and numbers; the collector maps
tag names, parses time stamps (once per distinct text), applies the quality-code
map and the time window, and keeps per tag only three arrays: UTC time [ns],
value [tag unit] and fate code. Readings of tags of other units, or of tags in
no unit, are counted, not kept. Problems that have a file and line (a value
that is not a number, an unreadable time stamp) are recorded with them.
"""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass, field

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

from ..config.schema import Source, Tag
from .fates import AMBIGUOUS_TIME, BAD_QUALITY, BAD_TIME, BAD_VALUE, GOOD, NONEXISTENT_TIME
from .growing import GrowingArray
from .timeformats import OK, UNDECIDED, order_hint, explain, read_stamps
from .timestamps import NAT, place

#: At most this many detailed records (file:line, text) are kept per tag and fate.
MAX_DETAILS = 50
#: Most readings held back while no stamp has decided whether numeric dates are day-first or month-first.
MAX_PENDING_ROWS = 2_000_000
#: Most distinct tag names remembered for the "nearest tag names" hint of a missing tag.
MAX_SEEN_NAMES = 100_000
#: ``parse_times`` result of a batch whose stamps all read both day-first and month-first (held back).
PENDING = "pending"


@dataclass
class TagBuffer:
    """Readings of one tag as they arrive (file order), each array one growing memory map."""

    tmin: int = NAT                               # earliest / latest time stamp read (any fate but a bad time) [ns]
    tmax: int = NAT
    # time: int32 seconds from 2000 (see _pack_times) until a chunk needs more, then int64 [ns UTC]
    ts: GrowingArray = field(default_factory=lambda: GrowingArray(np.int32))
    value: GrowingArray = field(default_factory=lambda: GrowingArray(np.float64))   # [tag unit]
    fate: GrowingArray = field(default_factory=lambda: GrowingArray(np.int8))
    second: list = field(default_factory=list)    # (positions, int64 second-pass time) for repeated hour
    n: int = 0

    def add_times(self, utc: np.ndarray) -> None:
        """Append time stamps [ns UTC], packed while every one so far packs without loss."""
        if self.ts.dtype == np.int32:
            packed = _pack_times(utc)
            if packed.dtype == np.int32:
                self.ts.append(packed)
                return
            wide = GrowingArray(np.int64, capacity=max(2 * self.ts.n, len(utc)))
            wide.append(_unpack_times(self.ts.take()))
            self.ts = wide
        self.ts.append(utc)


@dataclass
class Detail:
    """A located reading that was refused: where, tag, fate code and what was wrong."""

    where: str
    tag: str
    fate: int
    message: str


def to_float(values: pa.Array, decimal: str = ".") -> tuple[np.ndarray, np.ndarray]:
    """Strings to float64; returns (values with NaN where empty or unreadable, mask of unreadable non-empty).

    >>> v, bad = to_float(pa.array(["1.5", None, "x", " 2 "]))
    >>> v.tolist()[:2], bad.tolist()
    ([1.5, nan], [False, False, True, False])
    """
    if pa.types.is_floating(values.type) or pa.types.is_integer(values.type):
        out = pc.cast(values, pa.float64()).to_numpy(zero_copy_only=False)
        return np.asarray(out, dtype=float), np.zeros(len(values), bool)
    s = values
    if decimal == ",":
        s = pc.replace_substring(s, ",", ".")
    try:
        out = pc.cast(s, pa.float64()).to_numpy(zero_copy_only=False)
        out = np.asarray(out, dtype=float)
        return out, np.zeros(len(values), bool)
    except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
        pass
    import pandas as pd

    s = pc.utf8_trim_whitespace(s)
    ser = pd.Series(s.to_numpy(zero_copy_only=False), dtype=object)
    num = pd.to_numeric(ser, errors="coerce").to_numpy(dtype=float, na_value=np.nan)
    present = ser.map(lambda v: isinstance(v, str) and v != "").to_numpy(dtype=bool)
    return num, present & np.isnan(num)


def fold_code(code) -> str | None:
    """A quality code trimmed and case-folded (``source.quality_match = "folded"``).

    >>> fold_code(" Ok "), fold_code("GOOD"), fold_code(None)
    ('ok', 'good', None)
    """
    return code.strip().casefold() if isinstance(code, str) else None


def subset_parsed(parsed, rows: np.ndarray):
    """The result of :meth:`Collector.parse_times` for a subset of its rows."""
    if parsed is PENDING:
        return PENDING
    utc, status, second, uniq, codes, reasons = parsed
    return utc[rows], status[rows], second[rows], uniq, (codes[rows] if codes is not None else None), reasons


def _codes(arr: pa.Array, as_arrow: bool = False) -> tuple[np.ndarray, list]:
    """Dictionary codes of an array (-1 for null) and its distinct values (list, or pyarrow array)."""
    d = arr if pa.types.is_dictionary(arr.type) else pc.dictionary_encode(arr)
    if isinstance(d, pa.ChunkedArray):
        d = d.combine_chunks()
    idx = d.indices.to_numpy(zero_copy_only=False)
    if d.indices.null_count:
        idx = np.where(d.indices.is_null().to_numpy(zero_copy_only=False), -1, idx)
    idx = idx.astype(np.int64)
    return idx, (d.dictionary if as_arrow else d.dictionary.to_pylist())


class Collector:
    """Accumulates readings of a unit's tags from any number of batches.

    Parameters
    ----------
    tags : sequence of Tag
        The unit's tags.
    source : Source
        Source options: good quality codes, time zone and DST policies, decimal mark.
    all_tags : set of str
        Every tag of every unit in the config (to tell "another unit's" from "unknown").
    window : (int, int)
        Readings kept: ``lo <= t < hi`` [ns UTC]; ``NAT`` bounds are open.
    """

    def __init__(self, tags, source: Source, all_tags: set[str], window=(NAT, NAT)):
        self.tags: list[Tag] = list(tags)
        self.names = [t.tag for t in self.tags]
        self.index = {n: i for i, n in enumerate(self.names)}
        self.source = source
        self.all_tags = set(all_tags)
        self.buffers = [TagBuffer() for _ in self.tags]
        self.good = [set(t.good_quality if t.good_quality is not None else source.good_quality) for t in self.tags]
        self.folded = source.quality_match == "folded"
        self._good_folded = [{fold_code(q) for q in g} for g in self.good]
        self.near_codes: Counter = Counter()   # exact matching: bad codes that differ from a good one by case/spaces
        self.lo, self.hi = window
        self.rows_total = 0
        self.other_unit = 0
        self.unknown: Counter = Counter()
        self.no_tag = 0
        self.seen_names: set = set()           # every tag name the source held (for near-match hints)
        self.outside = np.zeros(len(self.tags), dtype=np.int64)
        self.details: list[Detail] = []
        self._ndetail: Counter = Counter()
        self.notes: list[tuple[str, str]] = []
        # naive stamps are wall time of the source's zone; a native SQL time type without zone is UTC
        self.zone = source.timezone or ("UTC" if source.kind != "csv" and source.time_column == "native" else None)
        self.date_order: str | None = None     # numeric dates: "day_first" / "month_first", once a stamp decides
        self._pending: list[tuple] = []        # batches held back until the order is decided
        self._pending_rows = 0

    # -- batches -------------------------------------------------------------------------------
    def tag_index(self, names: list) -> np.ndarray:
        """Unit tag index of each name (-1 another unit's tag, -2 unknown tag, -3 no tag)."""
        out = np.empty(len(names), dtype=np.int64)
        for k, nm in enumerate(names):
            if nm is None or (isinstance(nm, str) and nm.strip() == ""):
                out[k] = -3
            elif nm in self.index:
                out[k] = self.index[nm]
            else:
                out[k] = -1 if nm in self.all_tags else -2
        return out

    def parse_times(self, ts: pa.Array):
        """Parse a batch's time stamps once: (utc [ns], status, second-pass utc [ns], texts, codes, reasons),
        or :data:`PENDING` when every readable stamp is a numeric date that reads both day-first and
        month-first and no stamp so far has decided the order."""
        if pa.types.is_timestamp(ts.type) and (ts.type.tz is not None or self.zone in (None, "UTC")):
            t = pc.cast(ts, pa.timestamp("ns", tz=ts.type.tz or "UTC")) if ts.type.unit != "ns" else ts
            utc = t.cast(pa.int64()).to_numpy(zero_copy_only=False)
            utc = np.where(t.is_null().to_numpy(zero_copy_only=False), NAT, utc).astype(np.int64)
            return utc, np.where(utc == NAT, BAD_TIME, GOOD).astype(np.int8), utc, None, None, None
        if not (pa.types.is_string(ts.type) or pa.types.is_large_string(ts.type) or pa.types.is_dictionary(ts.type)):
            if pa.types.is_timestamp(ts.type):     # naive native times of a local zone: placed as wall time
                ts = pc.strftime(ts, format="%Y-%m-%dT%H:%M:%S")   # %S carries the fraction
            ts = pc.cast(ts, pa.string())
        codes, dictionary = _codes(ts, as_arrow=True)
        fmt = self.source.time_format
        fast = None
        if fmt is None:
            try:   # every distinct text ISO 8601 with an offset: pyarrow parses them all at once
                fast = pc.cast(dictionary, pa.timestamp("ns", tz="UTC"))
            except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
                fast = None
        uniq = dictionary.to_pylist() if fast is None or fast.null_count else None
        if uniq is None:
            u_utc = fast.cast(pa.int64()).to_numpy(zero_copy_only=False)
            u_st = np.zeros(len(dictionary), np.int8)
            u_sec = u_utc
            u_reason = None
        else:
            st = read_stamps(uniq, fmt, self.date_order)
            ok = st.reason == OK
            if self.date_order is None and st.order is not None:
                self.date_order = st.order
            elif st.order is None and (st.reason == UNDECIDED).any() and not ok.any():
                return PENDING
            u_utc, u_st, u_sec = place(st.ns, st.aware & ok, ~st.aware & ok, self.zone,
                                       dst_ambiguous=self.source.dst_ambiguous, dst_missing=self.source.dst_missing)
            u_reason = st.reason
        u_utc, u_st, u_sec = np.r_[u_utc, NAT], np.r_[u_st, BAD_TIME].astype(np.int8), np.r_[u_sec, NAT]
        return u_utc[codes], u_st[codes], u_sec[codes], uniq, codes, u_reason

    def add(self, tag, ts, value, quality=None, *, locate=None, decimal: str = ".", parsed=None) -> None:
        """Add one batch.

        Parameters
        ----------
        tag : pyarrow.Array of str, or str
            Tag of each reading, or one tag for the whole batch (a wide-layout column).
        ts : pyarrow.Array
            Time stamps: ISO 8601 strings, or a timestamp array.
        value : pyarrow.Array
            Values as strings or numbers [tag unit].
        quality : pyarrow.Array of str, optional
            Quality codes; without them every reading counts as good quality.
        locate : callable, optional
            ``locate(rows) -> list of str``: file and line of batch rows, for messages.
        parsed : tuple, optional
            ``parse_times(ts)`` already done (a wide layout parses its time column once).
        """
        n = len(ts)
        if n == 0:
            return
        if parsed is None:
            parsed = self.parse_times(ts)
        if parsed is PENDING:
            self._hold(tag, ts, value, quality, locate, decimal)
            return
        if self._pending:
            self._replay()
        self.rows_total += n
        if isinstance(tag, str):
            self.seen_names.add(tag)
            ti = self.tag_index([tag])[0]
            tix = np.full(n, ti, dtype=np.int64)
            names = [tag]
            name_of_row = np.zeros(n, dtype=np.int64)
        else:
            name_of_row, names = _codes(tag)
            if len(self.seen_names) < MAX_SEEN_NAMES:
                self.seen_names.update(n for n in names if isinstance(n, str))
            lut = np.r_[self.tag_index(names), -3]     # code -1 (no tag) -> -3
            tix = lut[name_of_row]
        if (tix < 0).any():
            self.other_unit += int((tix == -1).sum())
            self.no_tag += int((tix == -3).sum())
            unk = name_of_row[tix == -2]
            if unk.size:
                for code, cnt in zip(*np.unique(unk, return_counts=True)):
                    self.unknown[names[code]] += int(cnt)
            if (tix == -3).any() and locate is not None:
                rows = np.flatnonzero(tix == -3)[:MAX_DETAILS]
                for w in locate(rows):
                    self.notes.append((w, "row has no tag name; counted, not used"))
        keep = np.flatnonzero(tix >= 0)
        if keep.size == 0:
            return
        if keep.size < n:
            sel = pa.array(keep)
            value = value.take(sel)
            quality = quality.take(sel) if quality is not None else None
            tix = tix[keep]
        else:
            keep = None
        utc, status, second, uniq, codes, reasons = parsed
        if keep is not None:
            utc, status, second = utc[keep], status[keep], second[keep]
            codes = codes[keep] if codes is not None else None
        if locate is not None:
            for fate_code in (BAD_TIME, NONEXISTENT_TIME):
                rows = np.flatnonzero(status == fate_code)
                if rows.size:
                    self._detail_rows(rows, tix, fate_code, keep, locate,
                                      lambda r, f=fate_code: self._bad_time_text(uniq, codes[r] if codes is not None else -1,
                                                                                 reasons, f))
        vals, unreadable = to_float(value, decimal)
        fate = status.copy()
        if quality is not None:
            qcodes, qnames = _codes(quality)
            # good[tag, code]: is this code good for this tag (last column: no code at all)
            keys = [fold_code(q) for q in qnames]
            good = np.array([[q in g for q in qnames] + [False] for g in self.good], dtype=bool)
            near = np.array([[k in fg for k in keys] + [False] for fg in self._good_folded], dtype=bool) & ~good
            if self.folded:
                good |= near
            elif near.any():
                self._count_near(near[tix, qcodes] & ((fate == GOOD) | (fate == AMBIGUOUS_TIME)), qcodes, qnames)
            bad_q = ~good[tix, qcodes]
            fate[((fate == GOOD) | (fate == AMBIGUOUS_TIME)) & bad_q] = BAD_QUALITY
        bad_v = ((fate == GOOD) | (fate == AMBIGUOUS_TIME)) & ~np.isfinite(vals)
        fate[bad_v] = BAD_VALUE
        if locate is not None and (bad_v & unreadable).any():
            texts = value
            self._detail_rows(np.flatnonzero(bad_v & unreadable), tix, BAD_VALUE, keep, locate,
                              lambda r: f"value {texts[int(r)].as_py()!r} is not a number")
        # time window
        inside = np.ones(len(utc), bool)
        if self.lo != NAT:
            inside &= (utc >= self.lo) | (utc == NAT)
        if self.hi != NAT:
            inside &= (utc < self.hi) | (utc == NAT)
        if not inside.all():
            self.outside += np.bincount(tix[~inside], minlength=len(self.tags))
            utc, second, vals, fate, tix = utc[inside], second[inside], vals[inside], fate[inside], tix[inside]
        small = tix.astype(np.int16) if len(self.tags) < 32_000 else tix
        order = np.argsort(small, kind="stable")          # radix sort for small integer keys
        bounds = np.searchsorted(small[order], np.arange(len(self.tags) + 1))
        for i in range(len(self.tags)):
            a, b = bounds[i], bounds[i + 1]
            if a == b:
                continue
            r = order[a:b]
            buf = self.buffers[i]
            f = fate[r]
            amb = np.flatnonzero(f == AMBIGUOUS_TIME)
            if amb.size:
                buf.second.append((amb + buf.n, second[r][amb]))
            ur = utc[r]
            untimed = (f == BAD_TIME) | (f == NONEXISTENT_TIME)
            timed = ur[~untimed] if untimed.any() else ur
            if timed.size:
                lo_t, hi_t = int(timed.min()), int(timed.max())
                buf.tmin = lo_t if buf.tmin == NAT else min(buf.tmin, lo_t)
                buf.tmax = hi_t if buf.tmax == NAT else max(buf.tmax, hi_t)
            buf.add_times(ur)
            buf.value.append(vals[r])
            buf.fate.append(f)
            buf.n += b - a

    def _count_near(self, rows: np.ndarray, qcodes: np.ndarray, qnames: list) -> None:
        if rows.any():
            for code, n in zip(*np.unique(qcodes[rows], return_counts=True)):
                self.near_codes[qnames[code]] += int(n)

    def _near_code_note(self) -> None:
        """Say once that bad codes differ from the good ones only by case or spaces (exact matching)."""
        if not self.near_codes:
            return
        codes = ", ".join(f"{c!r} ({n})" for c, n in self.near_codes.most_common(5))
        more = f" and {len(self.near_codes) - 5} more" if len(self.near_codes) > 5 else ""
        good = sorted({q for g in self.good for q in g})
        self.add_note("quality codes", (
            f"code(s) {codes}{more} differ from the good code(s) {good!r} only by case or spaces: "
            f"{sum(self.near_codes.values())} reading(s) counted as bad quality; set source.quality_match = "
            "\"folded\" to compare codes trimmed and case-folded"))
        self.near_codes = Counter()

    def _hold(self, tag, ts, value, quality, locate, decimal) -> None:
        """Hold a batch back until a later stamp decides the numeric-date order (file order is kept)."""
        self._pending.append((tag, ts, value, quality, locate, decimal))
        self._pending_rows += len(ts)
        if self._pending_rows > MAX_PENDING_ROWS:
            self.refuse_undecided()

    def _replay(self) -> None:
        held, self._pending, self._pending_rows = self._pending, [], 0
        for tag, ts, value, quality, locate, decimal in held:
            self.add(tag, ts, value, quality, locate=locate, decimal=decimal)

    def refuse_undecided(self, source_name: str = "source") -> None:
        """Raise the refusal of stamps that read both day-first and month-first throughout (if any are held)."""
        if not self._pending:
            return
        from ..errors import IngestError, Problem

        samples, seen = [], {}
        for tag, ts, value, quality, locate, decimal in self._pending:
            texts = (ts.cast(pa.string()) if pa.types.is_dictionary(ts.type) else ts).to_pylist()
            for r, t in enumerate(texts):
                if t and t not in seen and len(samples) < 3:
                    seen[t] = None
                    samples.append((f"{locate([r])[0]}: " if locate is not None else "") + repr(t))
            if len(samples) >= 3:
                break
        first = next(iter(seen), "")
        n = self._pending_rows
        self._pending, self._pending_rows = [], 0
        raise IngestError(source_name, [Problem("time stamps", (
            f"every time stamp read ({n} readings) reads both day-first and month-first, so the day and month "
            f"cannot be told apart: {'; '.join(samples)}; set source.time_format = {order_hint(first)}"))])

    def finish(self, source_name: str = "source") -> None:
        """End of the source: refuse what is still held back (see :meth:`refuse_undecided`); note codes
        that only case or spaces kept from counting good."""
        self.refuse_undecided(source_name)
        self._near_code_note()

    def _bad_time_text(self, uniq, code, reasons, fate=BAD_TIME) -> str:
        text = uniq[int(code)] if (uniq is not None and code >= 0) else None
        timezone = self.zone
        if fate == NONEXISTENT_TIME:
            return (f"local time {text!r} does not exist in {timezone} (skipped by the daylight-saving change); "
                    "set source.dst_missing = 'shift' to read it with the offset before the change")
        reason = int(reasons[int(code)]) if (reasons is not None and code >= 0) else None
        if text is None or (isinstance(text, str) and not text.strip()):
            return "time stamp is empty"
        if reason == OK and timezone is None:
            return (f"time stamp {text!r} has no UTC offset and source.timezone is not set "
                    "(give ISO 8601 with 'Z' or an offset, or declare the IANA zone of local time)")
        return explain(text, reason if reason is not None else 2, self.source.time_format, self.date_order)

    def _detail_rows(self, rows, tix, fate, keep, locate, message) -> None:
        for r in rows:
            i = int(tix[r])
            key = (i, fate)
            self._ndetail[key] += 1
            if self._ndetail[key] > MAX_DETAILS:
                continue
            orig = int(r if keep is None else keep[r])
            self.details.append(Detail(locate([orig])[0], self.names[i], fate, message(r)))

    def add_note(self, where: str, message: str) -> None:
        """Record a problem that concerns no single reading (e.g. a blank or malformed line)."""
        self.notes.append((where, message))

    # -- result ----------------------------------------------------------------------------------
    def arrays(self, i: int) -> tuple[np.ndarray, np.ndarray, np.ndarray, list]:
        """Hand over tag ``i``'s (time [ns], value [tag unit], fate, repeated-hour second-pass times).

        The buffer is emptied: its memory goes back to the system as soon as the caller
        drops the arrays (``buffers[i].n`` still tells how many readings there were).
        """
        buf = self.buffers[i]
        ts = _unpack_times(buf.ts.take())
        return ts, buf.value.take(), buf.fate.take(), buf.second


#: Base of the compact time stamps held while reading: whole seconds from 2000-01-01 UTC in int32
#: cover 1931-2068; chunks with fractional seconds or times outside that range stay int64.
_PACK_BASE = 946_684_800 * 1_000_000_000
_PACK_NAT = np.iinfo(np.int32).min


def _pack_times(ts: np.ndarray) -> np.ndarray:
    """Time stamps [ns] as int32 seconds from 2000-01-01 when that loses nothing, else unchanged.

    Halves the memory of the largest per-reading buffer while a source is read (readings of
    historians are stamped to the second or coarser).

    >>> t = np.array([946_684_800_000_000_000, NAT, 946_684_860_000_000_000])
    >>> p = _pack_times(t); p.dtype.name, bool((_unpack_times(p) == t).all())
    ('int32', True)
    >>> _pack_times(np.array([946_684_800_500_000_000])).dtype.name      # half a second: kept
    'int64'
    """
    ok = ts != NAT
    every = bool(ok.all())
    rel = (ts if every else ts[ok]) - _PACK_BASE
    sec, frac = np.divmod(rel, 1_000_000_000)      # one pass for both (the ingest benchmark's hot loop)
    if rel.size and (frac.any() or sec.min() <= _PACK_NAT + 1 or sec.max() >= np.iinfo(np.int32).max):
        return ts
    if every:
        return sec.astype(np.int32)
    out = np.full(ts.shape, _PACK_NAT, dtype=np.int32)
    out[ok] = sec
    return out


def _unpack_times(chunk: np.ndarray) -> np.ndarray:
    """Inverse of :func:`_pack_times`: int64 nanoseconds UTC, NaT as ``NAT``."""
    if chunk.dtype == np.int64:
        return chunk
    out = chunk.astype(np.int64)
    out *= 1_000_000_000
    out += _PACK_BASE
    out[chunk == _PACK_NAT] = NAT
    return out
