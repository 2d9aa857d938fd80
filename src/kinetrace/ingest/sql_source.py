"""Read a long historian table through SQLAlchemy 2, streamed in chunks.

The statement is built from ``source.table`` and ``source.columns`` with quoted
identifiers, or taken from ``source.query`` (a view or query text whose only
inputs are the bound parameters ``:since`` and ``:until``); the time window and
the unit's tag list are bound parameters, never pasted into SQL text. Rows
arrive in partitions of ``source.chunk_rows`` (server-side cursor where the
driver has one), so memory stays bounded. On PostgreSQL (psycopg 3) the rows
are streamed with ``COPY (SELECT ...) TO STDOUT`` and parsed as CSV.

The connection URL of ``kind = "sql"`` comes from the environment variable
``source.url_env``; it is never written to messages or logs (only the
variable's name and the database dialect are).
"""

from __future__ import annotations

import io
import os
from datetime import datetime, timezone
from pathlib import Path

import pyarrow as pa
import pyarrow.csv as pcsv
import sqlalchemy as sa

from ..config.schema import Source
from ..errors import ConfigError, IngestError, Problem
from .collect import Collector
from .timestamps import NAT

#: Stream PostgreSQL (psycopg 3) reads with COPY ... TO STDOUT; False uses the generic streamed SELECT.
USE_COPY = True


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
        return sa.make_url(f"sqlite:///file:{p.resolve()}?mode=ro&uri=true"), str(p)
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


def _bound(ns: int, source: Source):
    if ns == NAT:
        return None
    dt = datetime.fromtimestamp(ns / 1e9, tz=timezone.utc)
    if source.time_column == "native":
        return dt
    # ISO 8601 UTC text compares in time order when every row has the same layout
    return dt.strftime("%Y-%m-%dT%H:%M:%S")


def build_statement(source: Source, tags: list[str], since_ns: int, until_ns: int):
    """The SELECT for one unit and window, with bound parameters only; returns (statement, params)."""
    c = source.columns
    since, until = _bound(since_ns, source), _bound(until_ns, source)
    if source.query:
        params = {"since": since, "until": until}
        return sa.text(source.query), params
    schema, _, table = source.table.rpartition(".")
    cols = [sa.column(c.timestamp), sa.column(c.tag), sa.column(c.value)]
    if c.quality:
        cols.append(sa.column(c.quality))
    t = sa.table(table, *cols, schema=schema or None)
    stmt = sa.select(*[t.c[x.name] for x in cols]).where(t.c[c.tag].in_(tags))
    if since is not None:
        stmt = stmt.where(t.c[c.timestamp] >= since)
    if until is not None:
        stmt = stmt.where(t.c[c.timestamp] < until)
    return stmt, {}


def _explain(exc: Exception, url: sa.URL) -> str:
    orig = getattr(exc, "orig", None) or exc
    text = str(orig).strip().splitlines()[0] if str(orig).strip() else type(orig).__name__
    if url.password:
        text = text.replace(str(url.password), "***")
    return f"{type(orig).__name__}: {text}"


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
    stmt, params = build_statement(source, tags, since_ns, until_ns)
    counts = {"rows": 0, "chunks": 0}
    dbapi_error = getattr(getattr(engine.dialect, "dbapi", None), "Error", sa.exc.SQLAlchemyError)
    try:
        with engine.connect() as conn:
            if USE_COPY and conn.dialect.name == "postgresql" and conn.dialect.driver == "psycopg":
                _copy_postgres(conn, stmt, params, collector, counts)
            else:
                res = conn.execution_options(stream_results=True, max_row_buffer=source.chunk_rows).execute(stmt, params)
                names = list(res.keys())
                for part in res.partitions(source.chunk_rows):
                    _add_rows(collector, names, part, source)
                    counts["rows"] += len(part)
                    counts["chunks"] += 1
    except (sa.exc.SQLAlchemyError, dbapi_error) as exc:
        raise IngestError(name, [Problem(f"table {source.table!r}" if not source.query else "source.query",
                                         f"cannot read readings: {_explain(exc, url)}")]) from None
    finally:
        if own:
            engine.dispose()
    return counts


def _add_rows(collector: Collector, names: list[str], part, source: Source) -> None:
    c = source.columns
    cols = list(zip(*part))
    by = dict(zip(names, cols))

    def arr(key):
        if key not in by:
            raise IngestError("query result", [Problem("columns", f"result has no column {key!r}; it has {names!r}")])
        return by[key]

    ts_list = arr(c.timestamp)
    if ts_list and isinstance(next((v for v in ts_list if v is not None), ""), datetime):
        ts = pa.array([_utc(v) for v in ts_list], type=pa.timestamp("us", tz="UTC"))
    else:
        ts = pa.array([None if v is None else str(v) for v in ts_list], type=pa.string())
    values = arr(c.value)
    try:
        val = pa.array(values, type=pa.float64())
    except (pa.ArrowInvalid, pa.ArrowTypeError):
        val = pa.array([None if v is None else str(v) for v in values], type=pa.string())
    tag = pa.array([None if v is None else str(v) for v in arr(c.tag)], type=pa.string())
    q = pa.array([None if v is None else str(v) for v in by[c.quality]], type=pa.string()) if c.quality in by else None
    collector.add(tag, ts, val, q)


def _utc(v):
    if v is None:
        return None
    return v.replace(tzinfo=timezone.utc) if v.tzinfo is None else v.astimezone(timezone.utc)


def _copy_postgres(conn, stmt, params, collector: Collector, counts: dict, block_bytes: int = 8 << 20) -> None:
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
                    header = _flush_copy(buf, header, collector, counts)
                    buf = bytearray()
        if buf:
            _flush_copy(buf, header, collector, counts)


def _flush_copy(buf: bytearray, header, collector: Collector, counts: dict):
    data = bytes(buf)
    if header is None:
        first, _, data = data.partition(b"\n")
        header = first.decode().split(",")
    if not data:
        return header
    table = pcsv.read_csv(io.BytesIO(data), read_options=pcsv.ReadOptions(column_names=header),
                          convert_options=pcsv.ConvertOptions(column_types={h: pa.string() for h in header},
                                                              strings_can_be_null=True, null_values=[""]))
    c = collector.source.columns
    collector.add(table.column(c.tag).combine_chunks(), table.column(c.timestamp).combine_chunks(),
                  table.column(c.value).combine_chunks(),
                  table.column(c.quality).combine_chunks() if c.quality and c.quality in header else None)
    counts["rows"] += table.num_rows
    counts["chunks"] += 1
    return header
