"""Read historian CSV exports: long or wide layout, any delimiter and decimal mark, gzip, folders.

A file is read in blocks of whole lines (bounded memory), each parsed by
pyarrow's CSV reader with every column as text; numbers and time stamps are
converted by :class:`~kinetrace.ingest.collect.Collector`, which keeps each
reading's fate. Every line is accounted for: header and declared extra header
lines, readings, blank lines and malformed lines (wrong number of fields),
which are reported with file and line.

Layouts (``source.layout``; ``"auto"`` decides from the header):

* **long**: a time column, a tag column, a value column and optionally a
  quality column, named by ``source.columns``;
* **wide**: a time column and one column per tag (column name = tag name); no
  quality codes.

Header variations are declared, not guessed: ``skip_rows`` lines before the
header, ``description_rows`` lines after it, and ``units_row`` (a line of
units, one per column, checked against the configured tag units).
"""

from __future__ import annotations

import csv
import gzip
import io
from pathlib import Path

import numpy as np
import pyarrow as pa
import pint
import pyarrow.csv as pcsv

from ..config.schema import Source, Tag
from ..errors import IngestError, Problem
from ..units import UnitError, tag_unit_text
from .collect import Collector, subset_parsed
from .conversion import _linear
from .files import LONG_LINE, BoundedReader, complete_block, open_regular, read_line, replace_long_lines

#: Bytes read per block (whole lines are completed after it). On the ingest benchmark, 8 MB blocks were
#: about 10 % faster than 4 MB ones for about 18 MB more peak memory; 16 MB were no faster and took 70 MB more.
BLOCK_BYTES = 8 << 20
#: Line counts of a CSV file (``long_lines`` are also ``malformed_lines``).
_COUNTS = ("lines", "header_lines", "blank_lines", "malformed_lines", "long_lines", "empty_cells")
_LONG_TEXT = LONG_LINE.decode()
#: Parsed blocks live briefly; the system allocator returns their memory at once.
_POOL = pa.system_memory_pool()


def list_files(path: Path, pattern: str) -> list[Path]:
    """The files a CSV source reads: the file itself, or a folder's files matching ``pattern``, sorted by name."""
    if path.is_dir():
        # pipes and devices are listed too, to be refused by name when read (see .files)
        files = sorted(p for p in path.glob(pattern) if not p.is_dir())
        if not files:
            raise IngestError(str(path), [Problem("(folder)", f"no files match {pattern!r} (source.file_pattern)")])
        return files
    if not path.exists():
        raise IngestError(str(path), [Problem("(file)", "file not found (source.path is relative to the config file)")])
    return [path]


def _open(path: Path, source: Source):
    with open_regular(path) as f:
        magic = f.read(2)
    if magic == b"\x1f\x8b":
        return BoundedReader(gzip.open(path, "rb"), source.max_decompressed_bytes, str(path))
    return open(path, "rb")


def _split(line: bytes, delimiter: str, where: str, line_no: int) -> list[str]:
    """The fields of one header or units line (``line_no`` counted from 1, for messages)."""
    at = f"{where}:{line_no}"
    try:
        text = line.decode("utf-8-sig").rstrip("\r\n")
    except UnicodeDecodeError as exc:
        raise IngestError(where, [Problem(at, f"line is not UTF-8 text (byte 0x{line[exc.start]:02x}); "
                                          "export the file as UTF-8")]) from None
    if "\r" in text:
        raise IngestError(where, [Problem(at, "the line ends are bare carriage returns (CR, no LF): save the "
                                          "export with LF or CR LF line ends")])
    try:
        return next(csv.reader([text], delimiter=delimiter), [])
    except csv.Error as exc:
        raise IngestError(where, [Problem(at, f"cannot split the line into fields: {exc}")]) from None


def _delimiter_hint(cols: list[str], source: Source) -> str:
    """A hint to set ``source.delimiter`` when a one-field header holds another common separator."""
    if len(cols) != 1:
        return ""
    for sep, name in ((";", "semicolons"), ("\t", "tabs"), ("|", "vertical bars"), (",", "commas")):
        if sep != source.delimiter and sep in cols[0]:
            shown = "\\t" if sep == "\t" else sep
            extra = " (and source.decimal = \",\" if numbers are written 19,98)" if sep == ";" else ""
            return f"; the header is separated by {name}: set source.delimiter = \"{shown}\"{extra}"
    return ""


def detect_layout(header: list[str], source: Source, where: str) -> str:
    """``"long"`` or ``"wide"`` from the header (or the configured layout, checked).

    >>> detect_layout(["timestamp", "tag", "value"], Source(kind="csv", path="x"), "f.csv")
    'long'
    >>> detect_layout(["timestamp", "FT-1", "TT-2"], Source(kind="csv", path="x"), "f.csv")
    'wide'
    """
    c = source.columns
    cols = [h.strip() for h in header]
    problems = []
    if c.timestamp not in cols:
        problems.append(Problem(f"{where}:header", f"no time column {c.timestamp!r} (source.columns.timestamp); "
                                f"header is {cols!r}{_delimiter_hint(cols, source)}"))
    dups = sorted({h for h in cols if cols.count(h) > 1})
    if dups:
        problems.append(Problem(f"{where}:header", f"column name(s) {dups!r} appear more than once"))
    if problems:
        raise IngestError(where, problems)
    is_long = c.tag in cols and c.value in cols
    layout = source.layout if source.layout != "auto" else ("long" if is_long else "wide")
    if layout == "long" and not is_long:
        raise IngestError(where, [Problem(f"{where}:header", f"a long layout needs columns {c.tag!r} and {c.value!r}; "
                                          f"header is {cols!r}")])
    if layout == "wide" and len(cols) < 2:
        raise IngestError(where, [Problem(f"{where}:header", "a wide layout needs a time column and at least one tag column")])
    return layout


def _check_units(header: list[str], units: list[str], tags: dict[str, Tag], where: str) -> None:
    problems = []
    for name, u in zip(header, units):
        t = tags.get(name.strip())
        if t is None or not u.strip():
            continue
        try:
            a, b = _linear(tag_unit_text(u), tag_unit_text(t.unit))
            same = abs(a - 1.0) < 1e-12 and abs(b) < 1e-9
        except (UnitError, pint.errors.DimensionalityError):
            same = False
        if not same:
            problems.append(Problem(f"{where}:units row", f"tag {t.tag!r}: the file says {u.strip()!r}, "
                                    f"the config says {t.unit!r}; correct one of them"))
    if problems:
        raise IngestError(where, problems)


class _Lines:
    """Maps the rows of one parsed block to file lines."""

    def __init__(self, file: str, first_line: int, n_rows: int, invalid: list[int]):
        self.file, self.first, self.n, self.invalid = file, first_line, n_rows, invalid
        self._pos = None

    def __call__(self, rows) -> list[str]:
        if self._pos is None:
            pos = np.arange(self.n + len(self.invalid))
            self._pos = np.delete(pos, np.asarray(self.invalid, dtype=np.int64)) if self.invalid else pos
        return [f"{self.file}:{self.first + int(self._pos[int(r)])}" for r in rows]


def _drop_blank_rows(table: pa.Table, locate, counts: dict):
    """Remove rows whose fields are all empty (blank lines), counting them."""
    if table.num_rows == 0:
        return table, locate
    empty = np.ones(table.num_rows, bool)
    for col in table.columns:
        empty &= col.is_null().to_numpy(zero_copy_only=False)
        if not empty.any():
            return table, locate
    counts["blank_lines"] += int(empty.sum())
    rows = np.flatnonzero(~empty)
    return table.take(pa.array(rows)), (lambda r: locate(rows[np.asarray(r, dtype=np.int64)]))


#: Time column of the first fast path: ISO 8601 with ``Z`` or an offset, parsed by pyarrow (the same
#: parser the collector's dictionary path uses, so the same stamps pass); naive or other spellings fail it.
_UTC_NS = pa.timestamp("ns", tz="UTC")


def _fast_types(header: list[str], source: Source, layout: str, native_time: bool = False) -> dict:
    """Column types for the fast path: numbers and UTC times parsed by pyarrow itself.

    With ``native_time`` the time column is read as UTC time stamps by pyarrow (only when no
    ``source.time_format`` is set); else as dictionary-coded text, each distinct text parsed
    once by the collector.
    """
    c = source.columns
    dict_t = pa.dictionary(pa.int32(), pa.string())
    num = pa.float64() if source.decimal == "." else pa.string()
    ts = _UTC_NS if native_time else dict_t
    if layout == "long":
        types = {h: pa.string() for h in header}
        types.update({c.timestamp: ts, c.tag: dict_t, c.value: num})
        if c.quality and c.quality in header:
            types[c.quality] = dict_t
        return types
    return {h: (ts if h == c.timestamp else num) for h in header}


def parse_block(buf: bytes, header: list[str], source: Source, layout: str, name: str, first_line: int,
                state: dict | None = None) -> tuple[pa.Table, list[tuple[int, str, int, int]], int]:
    """Parse one block of whole lines; returns the table, its rejected rows (row index, text, fields,
    expected) and the number of lines in the block.

    Fast paths: pyarrow converts numbers and UTC times itself, in parallel: first with the
    time column as UTC time stamps (ISO 8601 with ``Z`` or an offset), then with it as
    dictionary-coded text. If any line is rejected or any cell does not convert, the block is
    parsed again single-threaded with every column as text (rows keep their line numbers and
    each cell is judged by the collector), so all paths give the same fates. ``state`` (one
    dict per file) remembers that the first fast path failed, so that later blocks skip it.
    """
    common = dict(strings_can_be_null=True, quoted_strings_can_be_null=True, null_values=[""])
    state = {} if state is None else state
    natives = [True, False] if source.time_format is None and not state.get("text_times") else [False]
    for native in natives:
        try:
            table = pcsv.read_csv(
                pa.py_buffer(buf),
                read_options=pcsv.ReadOptions(column_names=header, use_threads=True, block_size=1 << 20),
                parse_options=pcsv.ParseOptions(delimiter=source.delimiter, ignore_empty_lines=False),
                convert_options=pcsv.ConvertOptions(column_types=_fast_types(header, source, layout, native),
                                                    **common),
                memory_pool=_POOL)
        except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
            continue
        if not native and len(natives) == 2:
            state["text_times"] = True     # the time column was what failed: this file writes other stamps
        # no line was rejected (else pyarrow raised): every line is a row, a blank line a row of nulls
        return table.unify_dictionaries(), [], table.num_rows
    n_lines = _line_count(buf)
    try:
        buf.decode("utf-8")
    except UnicodeDecodeError as exc:
        bad_line = first_line + buf[: exc.start].count(b"\n")
        raise IngestError(name, [Problem(f"{name}:{bad_line}", f"line is not UTF-8 text (byte "
                                         f"0x{buf[exc.start]:02x}); export the file as UTF-8")]) from None
    bad: list[tuple[int, str, int, int]] = []

    def handler(row):
        bad.append(((row.number or 1) - 1, row.text or "", row.actual_columns, row.expected_columns))
        return "skip"

    try:
        table = pcsv.read_csv(
            io.BytesIO(buf),
            read_options=pcsv.ReadOptions(column_names=header, use_threads=False, block_size=len(buf) + 1),
            parse_options=pcsv.ParseOptions(delimiter=source.delimiter, invalid_row_handler=handler,
                                            ignore_empty_lines=False),
            convert_options=pcsv.ConvertOptions(column_types={h: pa.string() for h in header}, **common))
    except (pa.ArrowInvalid, UnicodeDecodeError) as exc:
        raise IngestError(name, [Problem(f"{name}:{first_line}-{first_line + n_lines - 1}",
                                         f"cannot parse as CSV: {exc}")]) from None
    return table, bad, n_lines


def read_csv_file(path: Path, source: Source, collector: Collector, tags: dict[str, Tag],
                  block_bytes: int | None = None) -> dict:
    """Read one CSV file into ``collector``; returns line counts of the file.

    Raises
    ------
    IngestError
        The file is empty, its header lacks the needed columns, or its units row
        disagrees with the config.
    """
    name = str(path)
    block_bytes = block_bytes or BLOCK_BYTES     # looked up at the call (tests shrink it)
    counts = dict.fromkeys(_COUNTS, 0)
    try:
        with _open(path, source) as f:
            return _read_open(f, name, source, collector, tags, block_bytes, counts)
    except (OSError, EOFError, gzip.BadGzipFile) as exc:
        raise IngestError(name, [Problem("(file)", f"cannot read: {type(exc).__name__}: {exc}")]) from None


def _read_open(f, name, source, collector, tags, block_bytes, counts) -> dict:
    limit = source.max_line_bytes
    for _ in range(source.skip_rows):
        read_line(f, limit)
    header_line, too_long = read_line(f, limit)
    if too_long and header_line:
        _split(header_line, source.delimiter, name, source.skip_rows + 1)   # names bare-CR line ends
    if too_long:
        raise IngestError(name, [Problem(f"{name}:{source.skip_rows + 1}", (
            f"header line is longer than source.max_line_bytes ({limit} bytes): not a CSV export with a "
            "header line (check source.path, source.skip_rows), or raise the limit"))])
    if not header_line.strip():
        raise IngestError(name, [Problem(f"{name}:{source.skip_rows + 1}", "file is empty (no header line)")])
    header = [h.strip() for h in _split(header_line, source.delimiter, name, source.skip_rows + 1)]
    layout = detect_layout(header, source, name)
    line_no = source.skip_rows + 1
    for _ in range(source.description_rows):
        read_line(f, limit)
        line_no += 1
    if source.units_row:
        line_no += 1
        units = _split(read_line(f, limit)[0], source.delimiter, name, line_no)
        _check_units(header, units, tags, name)
    counts["header_lines"] = line_no
    c = source.columns
    next_line = line_no + 1
    saw_data = False
    for table, bad_rows, n_lines in _parsed_blocks(f, header, source, layout, name, next_line, block_bytes):
        invalid = [k for k, _, _, _ in bad_rows]
        for k, text, actual, expected in bad_rows:
            if text.strip() == "":
                counts["blank_lines"] += 1
            elif text.strip() == _LONG_TEXT:
                counts["malformed_lines"] += 1
                counts["long_lines"] += 1
                collector.add_note(f"{name}:{next_line + k}", f"line is longer than source.max_line_bytes ({limit} "
                                   "bytes); counted, not used")
            else:
                counts["malformed_lines"] += 1
                collector.add_note(f"{name}:{next_line + k}", f"malformed line: {actual} fields, expected {expected}: "
                                   f"{text.strip()[:80]!r}; counted, not used")
        locate = _Lines(name, next_line, table.num_rows, invalid)
        table, locate = _drop_blank_rows(table, locate, counts)
        if table.num_rows:
            saw_data = True
        if layout == "long":
            collector.add(table.column(c.tag).combine_chunks(), table.column(c.timestamp).combine_chunks(),
                          table.column(c.value).combine_chunks(),
                          table.column(c.quality).combine_chunks() if c.quality and c.quality in header else None,
                          locate=locate, decimal=source.decimal)
        else:
            ts = table.column(c.timestamp).combine_chunks()
            parsed = collector.parse_times(ts)
            for h in header:
                if h == c.timestamp:
                    continue
                col = table.column(h).combine_chunks()
                if col.null_count:
                    # an empty cell of a wide export is no reading (that tag was not sampled then)
                    counts["empty_cells"] += col.null_count
                    rows = np.flatnonzero(col.is_valid().to_numpy(zero_copy_only=False))
                    collector.add(h, ts.take(pa.array(rows)), col.take(pa.array(rows)), None,
                                  locate=lambda r, _rows=rows: locate(_rows[np.asarray(r, dtype=np.int64)]),
                                  decimal=source.decimal, parsed=subset_parsed(parsed, rows))
                else:
                    collector.add(h, ts, col, None, locate=locate, decimal=source.decimal, parsed=parsed)
        next_line += n_lines
    counts["lines"] = next_line - 1
    if not saw_data:
        collector.add_note(name, "file has a header but no readings")
    return counts


def _line_count(buf: bytes) -> int:
    return buf.count(b"\n") + (0 if buf.endswith(b"\n") else 1)


def _parsed_blocks(f, header, source, layout, name, first_line, block_bytes):
    """Parsed blocks of whole lines of ``f`` in file order, each as :func:`parse_block` returns it.

    The next block is read and parsed on a worker thread while the caller collects the current
    one (pyarrow parses without the interpreter lock, so reading, parsing and collecting overlap;
    on the ingest benchmark about 15 % faster for one more block in memory). A block's first line
    number is counted from its line breaks, as :func:`parse_block` counts a block it re-parses.
    """
    from concurrent.futures import ThreadPoolExecutor

    limit = source.max_line_bytes
    where = {"line": first_line}
    state: dict = {}

    def job():
        buf = f.read(block_bytes)
        if not buf:
            return None
        # whole lines, none longer than the limit (a longer one becomes a one-field bad line)
        buf = replace_long_lines(complete_block(f, buf, limit), limit)
        first = where["line"]
        where["line"] += _line_count(buf)
        return parse_block(buf, header, source, layout, name, first, state)

    with ThreadPoolExecutor(max_workers=1, thread_name_prefix="kinetrace-csv") as pool:
        ahead = pool.submit(job)
        while True:
            block = ahead.result()          # re-raises the worker's IngestError or OSError as it was
            if block is None:
                return
            ahead = pool.submit(job)
            yield block


def read_csv_source(path: Path, source: Source, collector: Collector, tags: dict[str, Tag]) -> dict:
    """Read a CSV source (one file, or a folder of files) into ``collector``; returns summed line counts."""
    total = {"files": 0, **dict.fromkeys(_COUNTS, 0)}
    problems: list[Problem] = []
    for p in list_files(path, source.file_pattern):
        try:
            counts = read_csv_file(p, source, collector, tags)
        except IngestError as exc:
            problems.extend(exc.problems)
            continue
        total["files"] += 1
        for k, v in counts.items():
            total[k] += v
    if problems:
        raise IngestError(str(path), problems)
    return total
