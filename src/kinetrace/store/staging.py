"""Time series prepared for the store by another process, so the single writer only inserts them.

A backfill computes each unit on a worker process and writes every result through one writer
process (:mod:`kinetrace.fleet`). Handing the writer a wide frame leaves it the per-value work of a
long insert (one Python tuple bound per value, about 3 us each on SQLite), which on a two-core
machine is as much as the workers' own work. :func:`stage_series` does the checking and that
per-value work where the results are computed: it checks a frame exactly as
:meth:`kinetrace.store.RunWriter.write_series` does and returns the long rows as the image of a
small SQLite database (``sqlite3.Connection.serialize``). The writer loads the image into a
schema of its own connection (``deserialize``) and copies the rows with one
``INSERT ... SELECT`` per variable, inside the run's transaction (SQLite documentation,
"sqlite3_serialize", "sqlite3_deserialize"); on PostgreSQL it reads the arrays back from the image
and sends them by binary COPY as for a frame. What is stored is the same either way (tested).
"""

from __future__ import annotations

import sqlite3
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from sqlalchemy import Connection

from .schema import StoreError, epoch_us

#: Schema name under which a store connection loads a staged image (attached when it connects).
STAGE_SCHEMA = "kt_stage"


@dataclass(frozen=True)
class StagedSeries:
    """A unit's time series checked and laid out as long rows (see :func:`stage_series`).

    Attributes
    ----------
    variables : tuple of str
        The variables, in the order of their rows in the image.
    units : dict
        Unit of measure of a variable, where given.
    first, last : Timestamp or None
        First and last time stamp (None for no rows). [UTC]
    times : int
        Time stamps per variable (each variable has one row per time stamp).
    image : bytes
        SQLite database image with table ``staged (ts INTEGER, value REAL)``: variable k holds the
        rowids ``k * times + 1`` to ``(k + 1) * times``, time stamps in microseconds since the Unix
        epoch, NaN as NULL. [us], [unit of each variable]
    hours : dict or None
        :func:`kinetrace.store.rollup.hour_table` of the rows (``var`` the variable's position) when
        they are ten or more per hour (:func:`kinetrace.store.rollup.is_fine`), for the store's
        hourly summary; else None.
    """

    variables: tuple
    units: dict = field(default_factory=dict)
    first: pd.Timestamp | None = None
    last: pd.Timestamp | None = None
    times: int = 0
    image: bytes = b""
    hours: dict | None = None


def series_arrays(what: str, frame, units: dict | None) -> tuple[dict, dict]:
    """Check a wide series frame for the store; return ``(values per variable, units)``.

    The rules of :meth:`kinetrace.store.RunWriter.write_series`: a DataFrame on a tz-aware,
    unique DatetimeIndex without missing stamps; non-empty string column names; numeric or
    boolean columns (booleans become 0/1); units only for columns of the frame.

    Parameters
    ----------
    what : str
        What the frame is, for the error message (e.g. ``"series of unit R-210"``).
    frame : DataFrame
    units : dict or None

    Returns
    -------
    (dict, dict)
        Variable -> float ndarray (NaN for missing) [unit of the variable]; variable -> unit.
    """
    if not isinstance(frame, pd.DataFrame):
        raise StoreError(f"{what}: expected a pandas DataFrame, got {type(frame).__name__}")
    if not isinstance(frame.index, pd.DatetimeIndex):
        raise StoreError(f"{what}: index must be a DatetimeIndex, got {type(frame.index).__name__}")
    if frame.index.tz is None:
        raise StoreError(f"{what}: index is naive; give a time zone (the store keeps UTC)")
    if frame.index.hasnans:
        raise StoreError(f"{what}: index holds {int(frame.index.isna().sum())} missing time stamp(s)")
    dup = frame.index.duplicated()
    if dup.any():
        raise StoreError(f"{what}: duplicate time stamp {frame.index[dup][0]} "
                         f"({int(dup.sum())} duplicate(s))")
    units = dict(units or {})
    bad = [c for c in frame.columns if not isinstance(c, str) or not c]
    if bad:
        raise StoreError(f"{what}: variable names must be non-empty strings, got {bad}")
    values = {}
    for c in frame.columns:
        col = frame[c]
        if pd.api.types.is_bool_dtype(col.dtype):
            values[c] = col.to_numpy(dtype=float)
        elif pd.api.types.is_numeric_dtype(col.dtype):
            values[c] = col.to_numpy(dtype=float, na_value=np.nan)
        else:
            raise StoreError(f"{what}: column {c!r} has dtype {col.dtype}; only numeric or boolean "
                             "columns can be stored as a series")
    extra = set(units) - set(frame.columns)
    if extra:
        raise StoreError(f"{what}: units given for variables not in the frame: {sorted(extra)}")
    return values, units


def stage_series(frame: pd.DataFrame, units: dict | None = None, *, unit: str = "") -> StagedSeries:
    """Check a unit's wide series frame and lay it out as long rows for the store's writer.

    Parameters
    ----------
    frame : DataFrame
        As for :meth:`kinetrace.store.RunWriter.write_series`. [SI unit of each variable]
    units : dict, optional
        Unit of measure of each variable.
    unit : str
        Unit id, for error messages.

    Returns
    -------
    StagedSeries
        To be passed to ``write_series`` in place of the frame.

    >>> ts = pd.date_range("2026-11-30", periods=2, freq="h", tz="UTC")
    >>> s = stage_series(pd.DataFrame({"conversion": [0.8, np.nan]}, index=ts), {"conversion": "-"})
    >>> s.variables, s.times
    (('conversion',), 2)
    >>> staged_arrays(s)[2].tolist()
    [0.8, nan]
    """
    from .rollup import hour_table, is_fine

    values, units = series_arrays(f"series of unit {unit}" if unit else "staged series", frame, units)
    n = len(frame)
    variables = tuple(frame.columns)
    rows = np.empty(n * len(variables), dtype=[("ts", "<i8"), ("value", "<f8")])
    hours = None
    if len(rows):
        stamps = epoch_us(frame.index)
        rows["ts"] = np.tile(stamps, len(variables))
        rows["value"] = np.concatenate([values[c] for c in variables])
        if is_fine(stamps.min(), stamps.max(), n):
            hours = hour_table(np.repeat(np.arange(len(variables)), n), rows["ts"], rows["value"])
    con = sqlite3.connect(":memory:")
    try:
        con.execute("CREATE TABLE staged (ts INTEGER NOT NULL, value REAL)")
        # SQLite stores a NaN bound as REAL as NULL (SQLite documentation, "sqlite3_bind_double")
        con.executemany("INSERT INTO staged (ts, value) VALUES (?, ?)", rows.tolist())
        con.commit()
        image = con.serialize()
    finally:
        con.close()
    first = frame.index.min().tz_convert("UTC") if n else None
    last = frame.index.max().tz_convert("UTC") if n else None
    return StagedSeries(variables, units, first, last, n, bytes(image), hours)


def staged_arrays(staged: StagedSeries) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The long rows of a staged image: (variable position, time stamp, value). [-], [us], [unit]"""
    con = sqlite3.connect(":memory:")
    try:
        con.deserialize(staged.image)
        got = con.execute("SELECT ts, value FROM staged ORDER BY rowid").fetchall()
    finally:
        con.close()
    ts = np.array([r[0] for r in got], dtype=np.int64)       # integers exactly, not through float
    value = np.array([np.nan if r[1] is None else r[1] for r in got], dtype=float)
    var = np.repeat(np.arange(len(staged.variables), dtype=np.int64), staged.times)
    return var, ts, value


def insert_staged(conn: Connection, staged: StagedSeries, key_ids: list[int], run_id: int) -> int:
    """Insert a staged image's rows into ``series_values`` on ``conn`` (inside its transaction).

    Parameters
    ----------
    conn : Connection
        Open SQLAlchemy connection with a transaction begun (a store connection: on SQLite it has
        the schema :data:`STAGE_SCHEMA` attached).
    staged : StagedSeries
    key_ids : list of int
        Series key of each of ``staged.variables``, in order.
    run_id : int

    Returns
    -------
    int
        Rows inserted.
    """
    from .bulk import insert_series

    n = staged.times * len(staged.variables)
    if n == 0:
        return 0
    if conn.dialect.name != "sqlite":
        var, ts, value = staged_arrays(staged)
        return insert_series(conn, np.asarray(key_ids, dtype=np.int64)[var], ts, value, run_id)
    raw = conn.connection.driver_connection
    raw.deserialize(staged.image, name=STAGE_SCHEMA)
    try:
        sql = (f"INSERT INTO series_values (key_id, ts, value, run_id) SELECT ?, ts, value, ? "
               f"FROM {STAGE_SCHEMA}.staged WHERE rowid > ? AND rowid <= ?")
        cur = raw.cursor()
        try:
            for k, key in enumerate(key_ids):     # one statement per variable, a few dozen per unit
                cur.execute(sql, (int(key), int(run_id), k * staged.times, (k + 1) * staged.times))
        finally:
            cur.close()
    finally:
        raw.deserialize(_EMPTY_IMAGE, name=STAGE_SCHEMA)     # let the image's memory go
    return n


def _empty_image() -> bytes:
    con = sqlite3.connect(":memory:")
    try:
        con.execute("CREATE TABLE staged (ts INTEGER NOT NULL, value REAL)")
        return bytes(con.serialize())
    finally:
        con.close()


_EMPTY_IMAGE = _empty_image()
