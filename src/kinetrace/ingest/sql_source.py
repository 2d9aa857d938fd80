"""Read a long historian table through SQLAlchemy 2, streamed in chunks.

The statement is built from ``source.table`` and ``source.columns`` with quoted
identifiers, or taken from ``source.query`` (a view or query text whose only
inputs are the bound parameters ``:since`` and ``:until``); the time window and
the unit's tag list are bound parameters, never pasted into SQL text. The window
is widened by a day on each side before it is pushed down (:func:`_bound`) and
applied exactly after parsing, so that stamps with an offset, in local wall
time, with a space for ``T`` or in a timestamp type without zone never lose
readings at its edges; a text that does not start with an ISO date is always
read (it cannot be compared as text). Rows
arrive in partitions of ``source.chunk_rows`` (server-side cursor where the
driver has one), so memory stays bounded. On PostgreSQL (psycopg 3) the rows
are streamed with ``COPY (SELECT ...) TO STDOUT`` and parsed as CSV.

Rows are taken in the order the database returns them (no ORDER BY, which would
cost a sort of the whole window): ``out_of_order`` then counts arrival order,
and the repeated-hour ``"infer"`` policy for naive local times relies on it, so
a historian storing local time should give ``query`` with an ORDER BY on its
insertion id. SQLite's bulk path reads in rowid (insertion) order.

The connection URL of ``kind = "sql"`` comes from the environment variable
``source.url_env``; it is never written to messages or logs (only the
variable's name and the database dialect are).
"""

from __future__ import annotations

import io
import os
import sqlite3
import urllib.parse
from datetime import datetime, timedelta, timezone
from pathlib import Path

import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.csv as pcsv
import pandas as pd
import sqlalchemy as sa

from ..config.schema import Source
from ..errors import ConfigError, IngestError, Problem
from ..redact import scrub
from .collect import Collector
from .files import refuse_special_file
from .sqlite_arrow import RangeReader, ReaderPool
from .sqlite_bounds import rowid_bounds
from .timestamps import NAT

#: Stream PostgreSQL (psycopg 3) reads with COPY ... TO STDOUT; False uses the generic streamed SELECT.
USE_COPY = True
#: Read SQLite by rowid ranges (binary through ADBC where it can, else each range written by SQLite as
#: CSV text); False uses the generic SELECT.
USE_SQLITE_BULK = True
#: In the SQLite bulk path, read the ranges in binary through the ADBC SQLite driver first.
USE_SQLITE_ARROW = True
#: Connections (threads) reading SQLite rowid ranges at once on the binary path. [-]
READ_THREADS = 2


def source_url(source: Source, base_dir: Path | None = None) -> tuple[sa.URL, str]:
    """SQLAlchemy URL of a SQL source and a name for messages that reveals no secret.

    Raises
    ------
    ConfigError
        The environment variable is not set, or holds no valid URL.
    IngestError
        A SQLite file does not exist.
    """
    if source.kind == "sqlite":
        p = Path(source.path)
        if base_dir is not None and not p.is_absolute():
            p = base_dir / p
        if not p.exists():
            raise IngestError(str(p), [Problem("(file)", "SQLite file not found (source.path is relative to the config file)")])
        refuse_special_file(p)
        # a URI filename, percent-encoded, so that '#', '?', '%' or a space in the path is read as
        # part of it (and read-only, so a wrong path can never create an empty database)
        return sa.URL.create("sqlite", database="file:" + urllib.parse.quote(str(p.resolve())),
                             query={"mode": "ro", "uri": "true"}), str(p)
    name = f"database from ${source.url_env}"
    raw = os.environ.get(source.url_env or "")
    if not raw:
        raise ConfigError("source", [Problem("source.url_env", f"environment variable {source.url_env!r} is not set; "
                                             "it must hold the historian's SQLAlchemy URL")])
    try:
        url = sa.make_url(raw)
    except (sa.exc.ArgumentError, ValueError):
        raise ConfigError("source", [Problem("source.url_env", f"environment variable {source.url_env!r} does not "
                                             "hold a valid SQLAlchemy URL (e.g. postgresql+psycopg://user@host/db)")]) from None
    return url, f"{name} ({url.get_backend_name()})"


#: How far the pushed-down window is widened on each side: local times and offsets lie within
#: UTC-12 .. UTC+14, so a reading inside the window is stamped at most 14 h away from its UTC time. [ns]
_WIDEN = 86_400 * 10**9
_ISO_SHAPE = "____-__-__%"    # LIKE pattern of a text that starts with an ISO 8601 date


def _iso_text(ns: int, default: int) -> str:
    """ISO 8601 UTC text of a window edge for a template whose stamps cannot be compared in SQL."""
    return pd.Timestamp(ns if ns != NAT else default, tz="UTC").strftime("%Y-%m-%dT%H:%M:%S")


def window_kind(source: Source) -> str | None:
    """How the time window can be pushed into SQL for this source's time column.

    ``"native"`` (a timestamp type), ``"iso_text"`` (texts starting with an ISO date: compared
    by their date part, widened), ``"number"`` (Unix or spreadsheet numbers), or None (another
    spelling: only the tag list is pushed down, the window is applied after parsing).
    """
    if source.time_column == "native":
        return "native"
    fmt = source.time_format
    if fmt is None or fmt.startswith("%Y-%m-%d"):
        return "iso_text"
    if fmt in ("unix_s", "unix_ms", "spreadsheet_days"):
        return "number"
    return None


def _bound(ns: int, source: Source, side: int):
    """The pushed-down bound for a window edge ``ns`` [ns UTC]; ``side`` -1 lower, +1 upper.

    Never exact: widened so that no reading of the window can fall outside it whatever its
    spelling (offset, local wall time, space or ``T``, fractions); the exact window is applied
    after parsing (:class:`~kinetrace.ingest.collect.Collector`). None for an open edge or a
    spelling that cannot be compared in SQL.
    """
    kind = window_kind(source)
    if ns == NAT or kind is None:
        return None
    edge = ns + side * _WIDEN
    if kind == "native":
        return datetime.fromtimestamp(edge / 1e9, tz=timezone.utc)
    if kind == "number":
        fmt = source.time_format
        if fmt == "spreadsheet_days":
            return edge / 86_400e9 + 25569 + side          # a further day: local wall time of the serial
        return (edge / 1e9) * (1e3 if fmt == "unix_ms" else 1.0)
    day = datetime.fromtimestamp(edge / 1e9, tz=timezone.utc).date()
    if side > 0:
        day = day + timedelta(days=1)                      # every stamp dated up to the day after the edge
    # a text bound of the date alone: '2026-09-01' <= '2026-09-01 00:00+09:00' < '2026-09-02'
    return day.isoformat()


#: Labels of the compact columns of a table-mode SELECT (small integers cost the driver least).
TAG_CODE, QUALITY_BAD = "kt_tag_code", "kt_quality_bad"


def build_statement(source: Source, tags: list[str], since_ns: int, until_ns: int, good: list[str] | None = None):
    """The SELECT for one unit and window, with bound parameters only; returns (statement, params).

    In table mode the tag comes back as its position in ``tags`` (``CASE``), and,
    when ``good`` is given, the quality as NULL for a good code and the code
    itself otherwise (``''`` for a missing code), so most rows carry small
    integers and NULLs instead of strings.
    """
    c = source.columns
    since, until = _bound(since_ns, source, -1), _bound(until_ns, source, +1)
    if source.query:
        # a template compares with both bounds: an open end is bound as a time far outside any
        # historian (1900 / 2200 UTC), since "timestamp >= NULL" would match nothing
        far = (int(pd.Timestamp("1900-01-01", tz="UTC").value), int(pd.Timestamp("2200-01-01", tz="UTC").value))
        if since is None:
            since = _bound(since_ns if since_ns != NAT else far[0], source, -1) or _iso_text(since_ns, far[0])
        if until is None:
            until = _bound(until_ns if until_ns != NAT else far[1], source, +1) or _iso_text(until_ns, far[1])
        params = {"since": since, "until": until}
        return sa.text(source.query), params
    schema, _, table = source.table.rpartition(".")
    cols = [sa.column(c.timestamp), sa.column(c.tag), sa.column(c.value)]
    if c.quality:
        cols.append(sa.column(c.quality))
    t = sa.table(table, *cols, schema=schema or None)
    out = [t.c[c.timestamp], sa.case({name: i for i, name in enumerate(tags)}, value=t.c[c.tag], else_=-1).label(TAG_CODE),
           t.c[c.value]]
    if c.quality:
        if good:
            q = t.c[c.quality]
            out.append(sa.case((q.in_(good), sa.null()), (q.is_(None), ""), else_=q).label(QUALITY_BAD))
        else:
            out.append(t.c[c.quality])
    stmt = sa.select(*out).where(t.c[c.tag].in_(tags))
    ts = t.c[c.timestamp]
    window = []
    if since is not None:
        window.append(ts >= since)
    if until is not None:
        window.append(ts < until)
    if window:
        cond = sa.and_(*window)
        if window_kind(source) == "iso_text":
            # texts of another shape cannot be compared as text: they are read and placed after parsing
            cond = sa.or_(cond, ts.is_(None), sa.not_(ts.like(_ISO_SHAPE)))
        stmt = stmt.where(cond)
    return stmt, {}


def _explain(exc: Exception, url: sa.URL) -> str:
    orig = getattr(exc, "orig", None) or exc
    text = str(orig).strip().splitlines()[0] if str(orig).strip() else type(orig).__name__
    return f"{type(orig).__name__}: {scrub(text, url)}"


def read_sql_source(source: Source, collector: Collector, tags: list[str], since_ns: int = NAT,
                    until_ns: int = NAT, *, base_dir: Path | None = None, engine: sa.Engine | None = None) -> dict:
    """Stream a unit's readings for ``[since, until)`` from the historian table into ``collector``.

    Parameters
    ----------
    source : Source
        Source configuration (kind ``"sqlite"`` or ``"sql"``).
    collector : Collector
    tags : list of str
        The unit's tag names (bound into ``WHERE tag IN (...)``).
    since_ns, until_ns : int
        Window bounds [ns UTC]; ``NAT`` for open.
    base_dir : Path, optional
        Folder of the config file, for a relative SQLite path.
    engine : sqlalchemy.Engine, optional
        Use this engine instead of building one from the source.

    Returns
    -------
    dict
        ``{"rows": number of rows fetched, "chunks": number of chunks}``.

    Raises
    ------
    IngestError
        The database cannot be reached or the table/columns do not exist; the
        message names the source without its URL.
    """
    url, name = source_url(source, base_dir) if engine is None else (engine.url, f"database ({engine.url.get_backend_name()})")
    own = engine is None
    if own:
        engine = sa.create_engine(url)
    own_good = any(t.good_quality is not None for t in collector.tags)
    good = None if own_good else list(source.good_quality)
    stmt, params = build_statement(source, tags, since_ns, until_ns, good)
    counts = {"rows": 0, "chunks": 0}
    dbapi_error = getattr(getattr(engine.dialect, "dbapi", None), "Error", sa.exc.SQLAlchemyError)
    try:
        with engine.connect() as conn:
            if USE_COPY and conn.dialect.name == "postgresql" and conn.dialect.driver == "psycopg":
                _copy_postgres(conn, stmt, params, collector, counts, tags, good)
            elif USE_SQLITE_BULK and conn.dialect.name == "sqlite" and not source.query and \
                    _sqlite_bulk(conn, source, tags, good, since_ns, until_ns, collector, counts):
                pass
            else:
                cur = _raw_execute(conn, stmt, params)   # DBAPI cursor: plain tuples, no Row objects
                try:
                    names = [d[0] for d in cur.description]
                    while True:
                        part = cur.fetchmany(source.chunk_rows)
                        if not part:
                            break
                        _add_rows(collector, names, part, source, tags, good)
                        counts["rows"] += len(part)
                        counts["chunks"] += 1
                finally:
                    cur.close()
    except (sa.exc.SQLAlchemyError, dbapi_error) as exc:
        raise IngestError(name, [Problem(f"table {source.table!r}" if not source.query else "source.query",
                                         f"cannot read readings: {_explain(exc, url)}")]) from None
    finally:
        if own:
            engine.dispose()
    return counts


#: Most distinct tag names asked of a table for the "nearest tag names" hint.
TAG_NAMES_LIMIT = 10_000


def source_tag_names(source: Source, *, base_dir: Path | None = None, engine: sa.Engine | None = None) -> set[str]:
    """Distinct tag names of a historian table (at most :data:`TAG_NAMES_LIMIT`), for the hint of a
    missing tag; an empty set when the table cannot say (a query source, a database error)."""
    if source.query:
        return set()
    url = None if engine is not None else source_url(source, base_dir)[0]
    eng = engine if engine is not None else sa.create_engine(url)
    schema, _, table = source.table.rpartition(".")
    t = sa.table(table, sa.column(source.columns.tag), schema=schema or None)
    stmt = sa.select(t.c[source.columns.tag]).distinct().limit(TAG_NAMES_LIMIT)
    try:
        with eng.connect() as conn:
            return {r[0] for r in conn.execute(stmt) if isinstance(r[0], str)}
    except sa.exc.SQLAlchemyError:
        return set()
    finally:
        if engine is None:
            eng.dispose()


def _raw_execute(conn, stmt, params: dict):
    """Execute a compiled statement on the DBAPI connection; a server-side cursor where the driver has one."""
    compiled = stmt.compile(dialect=conn.dialect, compile_kwargs={"render_postcompile": True})
    values = compiled.construct_params(params or None)
    if conn.dialect.positional:
        args = tuple(values[k] for k in compiled.positiontup)
    else:
        args = values
    raw = conn.connection.driver_connection
    if conn.dialect.name == "postgresql":
        cur = raw.cursor(name="kinetrace_stream")    # psycopg server-side cursor: bounded memory
    else:
        cur = raw.cursor()                            # sqlite3 steps through rows lazily
    cur.execute(str(compiled), args)
    return cur


#: Arrow's system allocator for the parsed chunks: freed blocks go back to the system at once,
#: where the default pool keeps them for the whole read (peak memory).
_SYSTEM_POOL = pa.system_memory_pool()


def _sqlite_bulk(conn, source: Source, tags: list[str], good, since_ns: int, until_ns: int,
                 collector: Collector, counts: dict) -> bool:
    """SQLite bulk path: each rowid range comes back as one CSV text (group_concat) parsed by pyarrow.

    Numbers go through ``quote()``, which writes a REAL with the digits it needs to
    round-trip exactly; a text value comes back SQL-quoted (``'abc'``) and is refused
    like any text. A range whose text does not parse as the expected CSV (a comma or
    line break inside a text) is read again row by row. Returns False (caller uses
    the generic path) if the table has no rowid.
    """
    c = source.columns
    raw = conn.connection.driver_connection
    q = lambda name: '"' + name.replace('"', '""') + '"'   # noqa: E731  (SQL identifier quoting)
    schema, _, table = source.table.rpartition(".")
    tbl = (q(schema) + "." if schema else "") + q(table)
    ts, tg, val = q(c.timestamp), q(c.tag), q(c.value)
    marks = ",".join("?" * len(tags))
    where, args = [f"{{p}}{tg} IN ({marks})"], list(tags)
    since, until = _bound(since_ns, source, -1), _bound(until_ns, source, +1)
    window, wargs = [], []
    if since is not None:
        window.append(f"{{p}}{ts} >= ?")
        wargs.append(since)
    if until is not None:
        window.append(f"{{p}}{ts} < ?")
        wargs.append(until)
    odd = None
    if window:
        other = f" OR {{p}}{ts} IS NULL OR NOT {{p}}{ts} LIKE '{_ISO_SHAPE}'" if window_kind(source) == "iso_text" else ""
        where.append(f"({' AND '.join(window)}{other})")
        args += wargs
        if other:
            odd = f"({ts} IS NULL OR NOT {ts} LIKE '{_ISO_SHAPE}')"
    # in the chunk query a unary + keeps SQLite on the rowid range instead of a (tag, time) index
    cond_rowid = " AND ".join(where).format(p="+")
    # SQLite reads an unknown "double-quoted" name as a string literal: check the columns first
    err = sqlite3.OperationalError
    have = {r[1] for r in raw.execute(f"PRAGMA {q(schema) + '.' if schema else ''}table_info({q(table)})")}
    if not have:
        raise err(f"no such table: {source.table}")
    for name in [c.timestamp, c.tag, c.value] + ([c.quality] if c.quality else []):
        if name not in have:
            raise err(f"no such column: {table}.{name}")
    if not _has_rowid(raw, schema, table, have):
        return False      # a view, a WITHOUT ROWID or virtual table, or "rowid" names a column: streamed SELECT
    # SQLite builds each range's text in memory (and Python copies it): ranges of at most 50,000
    # rows keep that near 5 MB instead of ~20 MB, for about 5 % more time (benchmarks/bench_ingest.py)
    step = min(source.chunk_rows, 50_000)
    database = conn.engine.url.database or ""
    if database.startswith("file:"):  # a URI filename, as source_url writes for a read-only file
        database = urllib.parse.unquote(database[len("file:"):].partition("?")[0])
    binary = ReaderPool(database, step, READ_THREADS) if USE_SQLITE_ARROW and RangeReader.available(database) \
        else None
    try:
        return _sqlite_ranges(raw, binary, source, tags, args, window, wargs, odd, database,
                              tbl=tbl, cond_rowid=cond_rowid, step=step, collector=collector, counts=counts)
    finally:
        if binary is not None:
            binary.close()


def _sqlite_ranges(raw, binary, source: Source, tags, args, window, wargs, odd, database, *, tbl, cond_rowid,
                   step, collector, counts) -> bool:
    """The rowid ranges of :func:`_sqlite_bulk` read into ``collector`` (``binary``: a
    :class:`ReaderPool`, or None for the text path only)."""
    c = source.columns
    q = lambda name: '"' + name.replace('"', '""') + '"'   # noqa: E731  (SQL identifier quoting)
    ts, tg, val = q(c.timestamp), q(c.tag), q(c.value)
    # the window's rows by index range searches; the odd-stamped rows' bounds remembered per file state
    lo, hi = rowid_bounds(raw, binary, tbl=tbl, tags=list(tags), tag_col=tg, window=[w.format(p="") for w in window],
                          window_args=list(wargs), odd=odd, database=database)
    counts.setdefault("rows", 0)
    if lo is None:
        return True
    ifn = lambda e: f"ifnull({e}, '')"   # noqa: E731  (NULL would blank the whole line)
    # quote() writes a REAL with as many digits as it needs to round-trip exactly
    fields = [ifn(ts), ifn(tg), f"CASE WHEN {val} IS NULL THEN '' ELSE quote({val}) END"]
    names = [c.timestamp, c.tag, c.value]
    if c.quality:
        fields.append(ifn(q(c.quality)))
        names.append(c.quality)
    line = " || ',' || ".join(fields)
    # in a UTF-8 database, CAST AS BLOB hands the text over as bytes (no decoding to str and encoding back)
    utf8 = raw.execute("PRAGMA encoding").fetchone()[0].upper() == "UTF-8"
    text_sql = "group_concat(line, char(10))"
    sql = (f"SELECT {f'CAST({text_sql} AS BLOB)' if utf8 else text_sql}, count(*) FROM (SELECT {line} AS line "
           f"FROM {tbl} WHERE rowid >= ? AND rowid < ? AND {cond_rowid})")
    d = pa.dictionary(pa.int32(), pa.string())
    fast = {c.timestamp: d, c.tag: d, c.value: pa.float64(), **({c.quality: d} if c.quality else {})}
    text_types = {n: pa.string() for n in names}
    opts = dict(strings_can_be_null=True, null_values=[""], quoted_strings_can_be_null=False)
    ro = pcsv.ReadOptions(column_names=names, use_threads=True, block_size=1 << 20)
    po = pcsv.ParseOptions(quote_char="'", double_quote=True)
    plain = (f"SELECT {ts}, {tg}, {val}{', ' + q(c.quality) if c.quality else ''} FROM {tbl} "
             f"WHERE rowid >= ? AND rowid < ? AND {cond_rowid}")
    def text_range(range_args):
        """The range written by SQLite as CSV text and parsed by pyarrow (row by row where
        the text does not parse as the expected CSV)."""
        text, n = raw.execute(sql, range_args).fetchone()
        if not n:
            return
        buf = pa.py_buffer(text if utf8 else text.encode("utf-8"))
        tab = None
        for types in (fast, text_types):
            try:
                tab = pcsv.read_csv(buf, read_options=ro, parse_options=po,
                                    convert_options=pcsv.ConvertOptions(column_types=types, **opts),
                                    memory_pool=_SYSTEM_POOL)
                break
            except pa.ArrowInvalid:
                continue
        if tab is None or tab.num_rows != n:
            # a text with a comma, quote or line break: read this rowid range row by row instead
            _add_rows(collector, names, raw.execute(plain, range_args).fetchall(), source, tags, None)
        else:
            tab = tab.unify_dictionaries()
            by = {h: tab.column(h).combine_chunks() for h in names}
            collector.add(*_columns(collector, by, source, tags, None))
        counts["rows"] += int(n)
        counts["chunks"] += 1

    ranges = ([a, a + step] + args for a in range(lo, hi + 1, step))
    if binary is None:
        for range_args in ranges:
            text_range(range_args)
        return True
    # ranges read side by side, taken in rowid order: the collector sees what one sequential read gives
    for range_args, by in binary.read_all(plain, ranges, names, [n for n in names if n != c.value]):
        if by is None:
            text_range(range_args)
        elif len(by[c.value]):
            collector.add(*_columns(collector, by, source, tags, None))
            counts["rows"] += len(by[c.value])
            counts["chunks"] += 1
    return True


def _has_rowid(raw, schema: str, table: str, columns: set[str]) -> bool:
    """Whether a SQLite table has a rowid that ``rowid`` names: not a view (whose rowid is NULL on
    every row, so a rowid range would read nothing), not a WITHOUT ROWID or virtual table, and no
    column of its own called ``rowid``."""
    master = ('"' + schema.replace('"', '""') + '".' if schema else "") + "sqlite_master"
    row = raw.execute(f"SELECT type, sql FROM {master} WHERE lower(name) = lower(?)", [table]).fetchone()
    if row is None:                     # e.g. a temporary table: let the generic path read it
        return False
    kind, sql = row[0], " ".join((row[1] or "").upper().split())
    if kind != "table" or sql.startswith("CREATE VIRTUAL") or "WITHOUT ROWID" in sql:
        return False
    return "rowid" not in {c.lower() for c in columns}


def _str_array(values) -> pa.Array:
    try:
        return pa.array(values, type=pa.string())
    except (pa.ArrowInvalid, pa.ArrowTypeError):
        return pa.array([None if v is None else str(v) for v in values], type=pa.string())


def _columns(collector: Collector, by: dict, source: Source, tags: list[str], good: list[str] | None):
    """(tag, time, value, quality) arrays for the collector from result columns keyed by name."""
    c = source.columns

    def col(key):
        if key not in by:
            raise IngestError("query result", [Problem("columns", f"result has no column {key!r}; it has {list(by)!r}")])
        return by[key]

    if TAG_CODE in by:
        codes = pa.array(by[TAG_CODE], type=pa.int32()) if not isinstance(by[TAG_CODE], pa.Array) \
            else pc.cast(by[TAG_CODE], pa.int32())
        codes = pc.if_else(pc.less(codes, 0), pa.scalar(None, pa.int32()), codes)
        tag = pa.DictionaryArray.from_arrays(codes, pa.array(tags, type=pa.string()))
    else:
        tag = by[c.tag] if isinstance(by[c.tag], pa.Array) else _str_array(col(c.tag))
    ts_list = col(c.timestamp)
    if isinstance(ts_list, pa.Array):
        ts = ts_list
    elif ts_list and isinstance(first := next((v for v in ts_list if v is not None), ""), datetime):
        if first.tzinfo is None:     # a timestamp type without zone: wall time, placed by the collector
            ts = pa.array([None if v is None else v.replace(tzinfo=None) for v in ts_list], type=pa.timestamp("us"))
        else:
            ts = pa.array([_utc(v) for v in ts_list], type=pa.timestamp("us", tz="UTC"))
    else:
        ts = _str_array(ts_list)
    values = col(c.value)
    if isinstance(values, pa.Array):
        val = values
    else:
        try:
            val = pa.array(values, type=pa.float64())
        except (pa.ArrowInvalid, pa.ArrowTypeError):
            val = _str_array(values)
    q = None
    if QUALITY_BAD in by:
        raw = by[QUALITY_BAD] if isinstance(by[QUALITY_BAD], pa.Array) else _str_array(by[QUALITY_BAD])
        q = pc.fill_null(raw, good[0])
    elif c.quality and c.quality in by:
        q = by[c.quality] if isinstance(by[c.quality], pa.Array) else _str_array(by[c.quality])
    return tag, ts, val, q


def _add_rows(collector: Collector, names: list[str], part, source: Source, tags, good) -> None:
    by = dict(zip(names, zip(*part)))
    collector.add(*_columns(collector, by, source, tags, good))


def _utc(v):
    if v is None:
        return None
    return v.replace(tzinfo=timezone.utc) if v.tzinfo is None else v.astimezone(timezone.utc)


def _copy_postgres(conn, stmt, params, collector: Collector, counts: dict, tags, good,
                   block_bytes: int = 8 << 20) -> None:
    """Stream a SELECT through COPY ... TO STDOUT (CSV), parsed in blocks by pyarrow."""
    compiled = stmt.compile(dialect=conn.dialect, compile_kwargs={"literal_binds": True}) \
        if not params else None
    if compiled is None:
        # a query template: bind :since/:until as literals through the driver's own quoting
        raw = conn.connection.driver_connection
        from psycopg import sql as psql

        text = str(stmt)
        for key, val in params.items():
            lit = psql.Literal(val).as_string(raw) if val is not None else "NULL"
            text = text.replace(f":{key}", lit)
        sql_text = text
    else:
        sql_text = str(compiled)
    raw = conn.connection.driver_connection
    with raw.cursor() as cur:
        cur.execute("SET TIME ZONE 'UTC'")
        buf = bytearray()
        header = None
        with cur.copy(f"COPY ({sql_text}) TO STDOUT WITH (FORMAT csv, HEADER true)") as cp:
            for data in cp:
                buf += data
                if len(buf) >= block_bytes:
                    header = _flush_copy(buf, header, collector, counts, tags, good)
                    buf = bytearray()
        if buf:
            _flush_copy(buf, header, collector, counts, tags, good)


def _flush_copy(buf: bytearray, header, collector: Collector, counts: dict, tags, good):
    data = bytes(buf)
    if header is None:
        first, _, data = data.partition(b"\n")
        header = first.decode().split(",")
    if not data:
        return header
    types = {h: pa.string() for h in header}
    if TAG_CODE in types:
        types[TAG_CODE] = pa.int32()
    table = pcsv.read_csv(io.BytesIO(data), read_options=pcsv.ReadOptions(column_names=header),
                          convert_options=pcsv.ConvertOptions(column_types=types, strings_can_be_null=True,
                                                              null_values=[""], quoted_strings_can_be_null=False))
    by = {h: table.column(h).combine_chunks() for h in header}
    collector.add(*_columns(collector, by, collector.source, tags, good))
    counts["rows"] += table.num_rows
    counts["chunks"] += 1
    return header
