"""The :class:`Store`: opening, one transaction per run, and read methods."""

from __future__ import annotations

import hashlib
import traceback
from contextlib import contextmanager
from pathlib import Path
from typing import Iterator

import pandas as pd
from sqlalchemy import Engine, create_engine, event, func, insert, select, text, update
from sqlalchemy.exc import ArgumentError, DatabaseError
from sqlalchemy.engine import make_url
from sqlalchemy.exc import NoSuchModuleError

from ..redact import redact_url, scrub
from . import reader
from .schema import RESULT_TABLES, RUN_STATES, SCHEMA_VERSION, StoreError, metadata, runs, store_meta, to_utc
from .staging import STAGE_SCHEMA
from .writer import RunWriter

SUPPORTED_DIALECTS = ("sqlite", "postgresql")
#: Drivers of each back end the store is written for (the PostgreSQL bulk writer uses psycopg 3's COPY),
#: and the package that provides each.
SUPPORTED_DRIVERS = {"sqlite": {"pysqlite": "Python's own sqlite3 module"}, "postgresql": {"psycopg": "psycopg[binary]"}}


def fingerprint(source) -> str:
    """SHA-256 of a configuration, for ``runs.config_fingerprint``.

    Parameters
    ----------
    source : bytes, str or Path
        Raw bytes, a text, or the path of a file (read as bytes).

    Returns
    -------
    str
        ``"sha256:"`` followed by 64 hexadecimal digits.

    >>> fingerprint(b"abc")[:23]
    'sha256:ba7816bf8f01cfea'
    """
    if isinstance(source, Path):
        data = source.read_bytes()
    elif isinstance(source, str):
        data = source.encode("utf-8")
    elif isinstance(source, (bytes, bytearray)):
        data = bytes(source)
    else:
        raise StoreError(f"fingerprint: expected bytes, str or Path, got {type(source).__name__}")
    return "sha256:" + hashlib.sha256(data).hexdigest()


#: Key of the PostgreSQL advisory lock that serialises runs on one database.
RUN_LOCK_KEY = 0x6B74_0001
#: Key of the PostgreSQL session advisory lock that is the run lease (see :meth:`Store.write_run`).
RUN_LEASE_KEY = 0x6B74_0002


def _sqlite_connect(dbapi_conn, _record) -> None:
    """SQLAlchemy, not the sqlite3 module, emits BEGIN (SQLAlchemy SQLite docs, "Transactions")."""
    dbapi_conn.isolation_level = None
    cur = dbapi_conn.cursor()
    cur.execute("PRAGMA foreign_keys = ON")
    cur.execute("PRAGMA busy_timeout = 30000")
    cur.execute("PRAGMA journal_mode = WAL")
    # where a staged series is loaded inside a run's transaction (ATTACH cannot run inside one)
    cur.execute(f"ATTACH DATABASE ':memory:' AS {STAGE_SCHEMA}")
    cur.close()


def _sqlite_begin(conn) -> None:
    """BEGIN IMMEDIATE for a run (takes the write lock first, so runs queue instead of failing)."""
    immediate = conn.get_execution_options().get("kinetrace_run", False)
    conn.exec_driver_sql("BEGIN IMMEDIATE" if immediate else "BEGIN")


def open_store(url: str, *, create: bool = True, echo: bool = False, base_dir=None) -> "Store":
    """Open (and by default create) a results store.

    Parameters
    ----------
    url : str
        SQLAlchemy URL: ``sqlite:///path/results.sqlite`` (default back end) or
        ``postgresql+psycopg://user@host:port/db``. A plain ``postgresql://`` URL is
        taken to mean psycopg 3.
    create : bool
        Create missing tables (existing tables are left as they are).
    echo : bool
        Log SQL statements (debugging).
    base_dir : path, optional
        Folder that a relative SQLite path is taken from (e.g. the configuration's
        folder); default the working directory. The SQLite file's folder is created
        if missing.

    Returns
    -------
    Store

    >>> store = open_store("sqlite://")
    >>> store.watermark("R-210") is None
    True
    """
    if not isinstance(url, str) or not url:
        raise StoreError(f"store url must be a non-empty string, got {type(url).__name__}")
    if url.startswith("postgresql://"):
        url = "postgresql+psycopg://" + url[len("postgresql://"):]
    shown = redact_url(url)
    try:
        parsed = make_url(url)
    except (ArgumentError, ValueError):
        raise StoreError(f"store url {shown!r} cannot be parsed (expected e.g. sqlite:///out/results.sqlite or "
                         "postgresql+psycopg://user@host:5432/database)") from None
    backend, _, driver = parsed.drivername.partition("+")
    driver = driver or {"sqlite": "pysqlite", "postgresql": "psycopg2"}.get(backend, "")   # SQLAlchemy's defaults
    if backend not in SUPPORTED_DRIVERS:
        raise StoreError(f"store url {shown!r}: back end {backend!r} is not supported; use one of "
                         f"{list(SUPPORTED_DIALECTS)}")
    if driver not in SUPPORTED_DRIVERS[backend]:
        raise StoreError(f"store url {shown!r}: driver {driver!r} of {backend} is not supported; use "
                         + " or ".join(f"{backend}+{d}://..." for d in SUPPORTED_DRIVERS[backend]))
    try:
        if backend == "sqlite" and parsed.database not in (None, "", ":memory:") \
                and not parsed.database.startswith("file:"):
            path = Path(parsed.database)
            if not path.is_absolute() and base_dir is not None:
                path = Path(base_dir) / path
            path.parent.mkdir(parents=True, exist_ok=True)
            parsed = parsed.set(database=str(path))
        engine = create_engine(parsed, echo=echo)
    except (ArgumentError, NoSuchModuleError, TypeError, ValueError) as exc:
        raise StoreError(f"store url {shown!r} cannot be used: {scrub(exc, url)}") from None
    except ImportError:
        raise StoreError(f"store url {shown!r}: its driver {driver!r} is not installed; install it with "
                         f"pip install '{SUPPORTED_DRIVERS[backend][driver]}'") from None
    except OSError as exc:
        raise StoreError(f"store url {shown!r}: the folder of the SQLite file cannot be created "
                         f"({exc.strerror or exc})") from None
    if engine.dialect.name == "sqlite":
        event.listen(engine, "connect", _sqlite_connect)
        event.listen(engine, "begin", _sqlite_begin)
    store = Store(engine)
    try:
        if create:
            store.create()
        store.check_version()
    except DatabaseError as exc:
        store.close()
        detail = scrub(str(exc.orig).strip().splitlines()[0] if str(exc.orig).strip() else type(exc.orig).__name__, url)
        if backend == "sqlite" and "not a database" in detail:
            raise StoreError(f"store {shown}: the file {parsed.database} is not a SQLite database "
                             f"({detail}); point the store at a new or an existing results file") from None
        raise StoreError(f"store {shown}: cannot open: {detail}") from None
    return store


def _upgrade_from_1(conn) -> None:
    """Version 1 -> 2: ``parameters.method`` becomes unbounded text (the calibration's reasons are
    longer than 64 characters; PostgreSQL refused them, SQLite never bounded them)."""
    if conn.dialect.name == "postgresql":
        conn.execute(text("ALTER TABLE parameters ALTER COLUMN method TYPE TEXT"))
    conn.execute(update(store_meta).where(store_meta.c.key == "schema_version").values(value="2"))


def _upgrade_from_2(conn) -> None:
    """Version 2 -> 3: ``alarms`` gains ``rate`` (growth of a drift per day) and ``last_check``
    (the last lab result an analyzer was compared with); older alarms keep NULL there."""
    from sqlalchemy import inspect

    have = {c["name"] for c in inspect(conn).get_columns("alarms")}
    stamp = "TIMESTAMP WITH TIME ZONE" if conn.dialect.name == "postgresql" else "BIGINT"
    for name, kind in (("rate", "DOUBLE PRECISION"), ("last_check", stamp)):
        if name not in have:
            conn.execute(text(f"ALTER TABLE alarms ADD COLUMN {name} {kind}"))
    conn.execute(update(store_meta).where(store_meta.c.key == "schema_version").values(value="3"))


def _upgrade_from_3(conn) -> None:
    """Version 3 -> 4: the series stored with ten rows per hour or more (:func:`kinetrace.store.rollup.is_fine`)
    are listed in ``series_summarised`` and their hourly summary ``series_hourly`` is filled from
    their rows (both tables created empty by ``create_all``), as the writer keeps it from now on."""
    from .bulk import ts_as_epoch_us
    from .rollup import is_fine, mark_summarised, refresh_hours
    from .schema import series_values

    ts = ts_as_epoch_us(conn)
    spans = conn.execute(select(series_values.c.key_id, func.min(ts), func.max(ts), func.count())
                         .group_by(series_values.c.key_id)).all()
    fine = [(k, int(a), int(b)) for k, a, b, n in spans if is_fine(int(a), int(b), int(n))]
    if fine:
        mark_summarised(conn, [k for k, _, _ in fine])
        lo, hi = min(a for _, a, _ in fine), max(b for _, _, b in fine)
        refresh_hours(conn, [k for k, _, _ in fine], pd.Timestamp(lo, unit="us", tz="UTC"),
                      pd.Timestamp(hi + 1, unit="us", tz="UTC"))
    conn.execute(update(store_meta).where(store_meta.c.key == "schema_version").values(value=str(SCHEMA_VERSION)))


class Store:
    """Results store on one database; see the package docstring for the schema.

    Use :func:`open_store` to get one. Writes go through :meth:`write_run`; reads
    return pandas DataFrames with tz-aware UTC time stamps.
    """

    def __init__(self, engine: Engine):
        self.engine = engine

    def __repr__(self) -> str:
        return f"Store({redact_url(self.engine.url)!r})"

    @property
    def dialect(self) -> str:
        """Back end name, ``"sqlite"`` or ``"postgresql"``."""
        return self.engine.dialect.name

    def create(self) -> None:
        """Create missing tables, record the schema version, and let an older runs table hold 'abandoned'."""
        with self.engine.begin() as conn:
            metadata.create_all(conn, checkfirst=True)
            have = conn.execute(select(store_meta.c.value).where(store_meta.c.key == "schema_version")).scalar()
            if have is None:
                conn.execute(insert(store_meta).values(key="schema_version", value=str(SCHEMA_VERSION)))
            else:
                if have == "1":
                    _upgrade_from_1(conn)
                    have = "2"
                if have == "2":
                    _upgrade_from_2(conn)
                    have = "3"
                if have == "3":
                    _upgrade_from_3(conn)
            _upgrade_run_states(conn)

    def check_version(self) -> None:
        """Refuse a store written with another table layout."""
        with self.engine.connect() as conn:
            have = conn.execute(select(store_meta.c.value).where(store_meta.c.key == "schema_version")).scalar()
        # version 3 lacks only the hourly summary, which readers do without (opened to write, it is upgraded)
        if have is not None and have not in (str(SCHEMA_VERSION), "3"):
            raise StoreError(f"store {self!r} has schema version {have}; this kinetrace reads version "
                             f"{SCHEMA_VERSION}")

    def close(self) -> None:
        """Release the connections."""
        self.engine.dispose()

    # -- writing --------------------------------------------------------------------------
    @contextmanager
    def write_run(self, window, *, config_fingerprint: str, software_version: str | None = None,
                  started=None) -> Iterator[RunWriter]:
        """One run: a context manager whose body's writes are ONE transaction.

        The run record is first committed with status ``running``; the results and the
        final status ``complete`` are committed together when the block ends. An
        exception rolls every result back (the previous results stay as they were) and
        marks the run ``failed`` with the error; a process killed in the block leaves
        the run ``running`` with no finish time, and the results untouched, until the
        next run on the store starts and marks it ``abandoned``. Each run holds the
        store's run lease from before its record is written until its final status is
        committed (a lease bound to the process, not a heartbeat; see
        :meth:`_run_lease`), so a run that holds the lease knows every other ``running``
        record is an orphan, and never takes a live run for one. Runs on one store
        are serialised (the lease; SQLite ``BEGIN IMMEDIATE``; a PostgreSQL
        transaction-level advisory lock), so two runs of the same window never mix:
        the one that commits last wins.

        Parameters
        ----------
        window : tuple
            ``(start, end)`` of the data processed, half-open, tz-aware. [UTC]
        config_fingerprint : str
            Fingerprint of the configuration used (see :func:`fingerprint`).
        software_version : str, optional
            Default: ``kinetrace.__version__``.
        started : Timestamp, optional
            Wall-clock start of the run; default now. [UTC]

        Yields
        ------
        RunWriter

        >>> store = open_store("sqlite://")
        >>> with store.write_run(("2026-11-30T00:00Z", "2026-12-01T00:00Z"),
        ...                      config_fingerprint=fingerprint(b"demo")) as run:
        ...     _ = run.set_watermark("R-210", "2026-11-30T23:00Z")
        >>> store.watermark("R-210")
        Timestamp('2026-11-30 23:00:00+0000', tz='UTC')
        """
        from .. import __version__

        if not isinstance(window, (tuple, list)) or len(window) != 2:
            raise StoreError(f"run window must be a (start, end) pair, got {window!r}")
        start, end = to_utc(window[0], "run window start"), to_utc(window[1], "run window end")
        if end <= start:
            raise StoreError(f"run window end {end} is not after its start {start}")
        if not isinstance(config_fingerprint, str) or not config_fingerprint:
            raise StoreError("config_fingerprint must be a non-empty string (see kinetrace.store.fingerprint)")
        started = pd.Timestamp.now(tz="UTC") if started is None else to_utc(started, "started")
        with self._run_lease():
            with self.engine.begin() as conn:
                # holding the lease, no other run is alive: a 'running' record is an orphan
                stale = conn.execute(select(runs.c.run_id).where(runs.c.status == "running")).scalars().all()
                run_id = conn.execute(insert(runs).values(
                    started=started, status="running", config_fingerprint=config_fingerprint,
                    window_start=start, window_end=end,
                    software_version=software_version or __version__).returning(runs.c.run_id)).scalar_one()
                if stale:
                    conn.execute(update(runs).where(runs.c.run_id.in_(stale)).values(
                        status="abandoned", finished=pd.Timestamp.now(tz="UTC"),
                        message=f"abandoned: its process ended before the run finished (it no longer held the "
                                f"run lease); found by run {run_id}"))
            yield from self._write(run_id, start, end)

    def _write(self, run_id: int, start, end):
        """The body of :meth:`write_run` once its record exists (the caller holds the run lease)."""
        try:
            with self.engine.connect() as conn:
                conn.execution_options(kinetrace_run=True)
                with conn.begin():
                    if self.dialect == "postgresql":
                        conn.execute(text("SELECT pg_advisory_xact_lock(:k)"), {"k": RUN_LOCK_KEY})
                    writer = RunWriter(conn, run_id, start, end)
                    yield writer
                    conn.execute(update(runs).where(runs.c.run_id == run_id).values(
                        status="complete", finished=pd.Timestamp.now(tz="UTC"),
                        message=_summary(writer.rows_written)))
        except BaseException as exc:
            err_text = scrub("".join(traceback.format_exception_only(type(exc), exc)).strip(), self.engine.url)
            with self.engine.begin() as conn:
                conn.execute(update(runs).where(runs.c.run_id == run_id).values(
                    status="failed", finished=pd.Timestamp.now(tz="UTC"), message=err_text[:4000]))
            raise

    @contextmanager
    def _run_lease(self):
        """Hold the store's run lease: one run at a time, and released by the OS when its process dies.

        A lease bound to the process, not a heartbeat: on PostgreSQL a session-level advisory lock
        (the server drops it when the connection closes, which a killed process's kernel does at
        once; a host that vanishes without closing its socket is noticed after the TCP keepalive
        time); beside a SQLite file an exclusive ``flock`` on ``<file>.run-lease`` (dropped by the
        kernel with the process). An in-memory SQLite store lives in one process and needs none;
        on a system without ``fcntl`` (Windows) the SQLite lease is not taken.
        """
        if self.dialect == "postgresql":
            with self.engine.connect() as conn:
                conn = conn.execution_options(isolation_level="AUTOCOMMIT")
                conn.execute(text("SELECT pg_advisory_lock(:k)"), {"k": RUN_LEASE_KEY})
                try:
                    yield
                finally:
                    try:
                        conn.execute(text("SELECT pg_advisory_unlock(:k)"), {"k": RUN_LEASE_KEY})
                    except Exception:  # noqa: BLE001 - a broken connection: closing it drops the lease
                        conn.invalidate()
            return
        database = self.engine.url.database
        try:
            import fcntl
        except ImportError:  # pragma: no cover - not on POSIX
            fcntl = None
        if fcntl is None or database in (None, "", ":memory:") or database.startswith("file:"):
            yield
            return
        with open(f"{database}.run-lease", "a+b") as fh:
            fcntl.flock(fh.fileno(), fcntl.LOCK_EX)
            try:
                yield
            finally:
                fcntl.flock(fh.fileno(), fcntl.LOCK_UN)

    # -- reading --------------------------------------------------------------------------
    def _read(self, fn, *args, **kw):
        with self.engine.connect() as conn:
            return fn(conn, *args, **kw)

    def series(self, unit: str, variables=None, start=None, end=None, *, layout: str = "wide") -> pd.DataFrame:
        """Time series of one unit; see :func:`kinetrace.store.reader.read_series`."""
        return self._read(reader.read_series, unit, variables, start, end, layout=layout)

    def series_catalog(self, unit: str | None = None) -> pd.DataFrame:
        """Stored variables and their units of measure."""
        return self._read(reader.read_series_catalog, unit)

    def daily(self, units=None, first_day=None, last_day=None) -> pd.DataFrame:
        """Daily production rows; see :func:`kinetrace.store.reader.read_daily`."""
        return self._read(reader.read_daily, units, first_day, last_day)

    def alarms(self, units=None, *, state: str | None = None, since=None, until=None) -> pd.DataFrame:
        """Alarms; see :func:`kinetrace.store.reader.read_alarms`."""
        return self._read(reader.read_alarms, units, state=state, since=since, until=until)

    def parameters(self, units=None, *, as_of=None, latest: bool = True) -> pd.DataFrame:
        """Fitted parameters; see :func:`kinetrace.store.reader.read_parameters`."""
        return self._read(reader.read_parameters, units, as_of=as_of, latest=latest)

    def forecasts(self, units=None, *, as_of=None, latest: bool = True) -> pd.DataFrame:
        """Forecasts; see :func:`kinetrace.store.reader.read_forecasts`."""
        return self._read(reader.read_forecasts, units, as_of=as_of, latest=latest)

    def whatif(self, units=None, *, as_of=None, latest: bool = True) -> pd.DataFrame:
        """What-if settings; see :func:`kinetrace.store.reader.read_whatif`."""
        return self._read(reader.read_whatif, units, as_of=as_of, latest=latest)

    def quality(self, units=None, start=None, end=None) -> pd.DataFrame:
        """Data-quality counts; see :func:`kinetrace.store.reader.read_quality`."""
        return self._read(reader.read_quality, units, start, end)

    def watermark(self, unit: str) -> pd.Timestamp | None:
        """Last time stamp processed for a unit, ``None`` if never run. [UTC]"""
        return self._read(reader.read_watermark, unit)

    def watermarks(self) -> pd.DataFrame:
        """Watermarks of every unit."""
        return self._read(reader.read_watermarks)

    def runs(self, status: str | None = None) -> pd.DataFrame:
        """Run records, oldest first."""
        return self._read(reader.read_runs, status)

    def dump(self, tables=RESULT_TABLES) -> dict[str, pd.DataFrame]:
        """Every row of the result tables (by name), ordered by primary key."""
        return {name: self._read(reader.read_table, metadata.tables[name]) for name in tables}


def _upgrade_run_states(conn) -> None:
    """Replace a runs-status constraint written before 'abandoned' existed (same table, looser check).

    PostgreSQL: drop and add the constraint. SQLite cannot alter a CHECK constraint; its table
    text in ``sqlite_schema`` is edited as SQLite's documentation of ALTER TABLE describes for a
    change that leaves the stored rows valid ("Making Other Kinds Of Table Schema Changes").
    """
    states = "status IN (" + ", ".join(f"'{x}'" for x in RUN_STATES) + ")"
    if conn.dialect.name == "postgresql":
        have = conn.execute(text("SELECT pg_get_constraintdef(oid) FROM pg_constraint WHERE conname = 'runs_status' "
                                 "AND conrelid = 'runs'::regclass")).scalar()
        if have is not None and "abandoned" not in have:
            conn.execute(text("ALTER TABLE runs DROP CONSTRAINT runs_status"))
            conn.execute(text(f"ALTER TABLE runs ADD CONSTRAINT runs_status CHECK ({states})"))
        return
    sql = conn.execute(text("SELECT sql FROM sqlite_master WHERE type = 'table' AND name = 'runs'")).scalar()
    if sql and "abandoned" not in sql:
        new = sql.replace("'complete', 'failed')", "'complete', 'failed', 'abandoned')")
        version = conn.exec_driver_sql("PRAGMA schema_version").scalar()
        conn.exec_driver_sql("PRAGMA writable_schema = ON")
        conn.execute(text("UPDATE sqlite_master SET sql = :s WHERE type = 'table' AND name = 'runs'"), {"s": new})
        conn.exec_driver_sql(f"PRAGMA schema_version = {int(version) + 1}")
        conn.exec_driver_sql("PRAGMA writable_schema = OFF")


def _summary(counts: dict[str, int]) -> str:
    return ", ".join(f"{k}: {v}" for k, v in sorted(counts.items())) or "no rows written"
