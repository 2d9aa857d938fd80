"""Bulk paths for the long time-series table ``series_values``: one writer and one reader per back end.

A year of 1-minute results of 20 variables is about 10 million rows per unit, so
these paths avoid building one Python object per value where they can:

* PostgreSQL: ``COPY ... FROM STDIN (FORMAT binary)`` with the whole payload built by
  numpy as big-endian records (PostgreSQL documentation, "COPY", section "Binary
  Format"); rows without a value use the NULL field length -1.
* SQLite: ``executemany`` of plain tuples on the driver cursor, in chunks.

Both run on the caller's connection, inside its transaction.

References
----------
.. [1] PostgreSQL Global Development Group (2023). PostgreSQL 15 Documentation, SQL
   Commands, COPY: Binary Format (file header, tuples, field length -1 for NULL,
   trailer -1).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from sqlalchemy import BigInteger, Connection, and_, cast, extract, select, true, type_coerce

from .schema import series_values

#: Microseconds between 1970-01-01 and 2000-01-01 (the PostgreSQL time origin). [us]
PG_EPOCH_OFFSET_US = 946_684_800_000_000

_CHUNK = 200_000

_PG_HEADER = b"PGCOPY\n\xff\r\n\x00" + np.array([0, 0], dtype=">i4").tobytes()
_PG_TRAILER = np.array([-1], dtype=">i2").tobytes()
_ROW_FULL = np.dtype([("n", ">i2"), ("l1", ">i4"), ("key", ">i4"), ("l2", ">i4"), ("ts", ">i8"),
                      ("l3", ">i4"), ("value", ">f8"), ("l4", ">i4"), ("run", ">i4")])
_ROW_NULL = np.dtype([("n", ">i2"), ("l1", ">i4"), ("key", ">i4"), ("l2", ">i4"), ("ts", ">i8"),
                      ("l3", ">i4"), ("l4", ">i4"), ("run", ">i4")])


def pg_binary_records(key_id: np.ndarray, ts_us: np.ndarray, value: np.ndarray, run_id: int) -> bytes:
    """Binary COPY tuples for ``series_values (key_id, ts, value, run_id)``, without header or trailer.

    Parameters
    ----------
    key_id : ndarray of int
        Series key of each row.
    ts_us : ndarray of int64
        Time stamps as microseconds since the Unix epoch. [us]
    value : ndarray of float
        Values; NaN is written as NULL. [unit of the series]
    run_id : int
        Run that writes the rows.

    Returns
    -------
    bytes
        One tuple per row in the format of [1]_ (field count, then length and data of
        each field; length -1 and no data for NULL).

    >>> len(pg_binary_records(np.array([1]), np.array([0]), np.array([1.5]), 7))
    42
    >>> len(pg_binary_records(np.array([1]), np.array([0]), np.array([np.nan]), 7))
    34
    """
    null = np.isnan(value)
    parts = []
    for mask, dtype in ((~null, _ROW_FULL), (null, _ROW_NULL)):
        n = int(mask.sum())
        if not n:
            continue
        rec = np.empty(n, dtype=dtype)
        rec["n"] = 4
        rec["l1"] = 4
        rec["key"] = key_id[mask]
        rec["l2"] = 8
        rec["ts"] = ts_us[mask] - PG_EPOCH_OFFSET_US
        if dtype is _ROW_FULL:
            rec["l3"] = 8
            rec["value"] = value[mask]
        else:
            rec["l3"] = -1
        rec["l4"] = 4
        rec["run"] = run_id
        parts.append(rec.tobytes())
    return b"".join(parts)


def insert_series(conn: Connection, key_id: np.ndarray, ts_us: np.ndarray, value: np.ndarray,
                  run_id: int) -> int:
    """Insert long rows into ``series_values`` on ``conn`` (inside its transaction).

    Parameters
    ----------
    conn : Connection
        Open SQLAlchemy connection with a transaction begun.
    key_id, ts_us, value : ndarray
        Equal-length columns: series key, time stamp [us since the Unix epoch], value
        (NaN stored as NULL). [unit of the series]
    run_id : int
        Run that writes the rows.

    Returns
    -------
    int
        Number of rows inserted.
    """
    n = len(key_id)
    if n == 0:
        return 0
    if conn.dialect.name == "postgresql":
        raw = conn.connection.driver_connection
        with raw.cursor() as cur:
            with cur.copy("COPY series_values (key_id, ts, value, run_id) FROM STDIN (FORMAT binary)") as cp:
                cp.write(_PG_HEADER)
                for lo in range(0, n, _CHUNK * 5):
                    hi = min(n, lo + _CHUNK * 5)
                    cp.write(pg_binary_records(key_id[lo:hi], ts_us[lo:hi], value[lo:hi], run_id))
                cp.write(_PG_TRAILER)
        return n
    sql = "INSERT INTO series_values (key_id, ts, value, run_id) VALUES (?, ?, ?, ?)"
    for lo in range(0, n, _CHUNK):
        hi = min(n, lo + _CHUNK)
        vals = value[lo:hi].astype(object)
        vals[np.isnan(value[lo:hi])] = None
        rows = list(zip(key_id[lo:hi].tolist(), ts_us[lo:hi].tolist(), vals.tolist(),
                        [run_id] * (hi - lo)))
        conn.exec_driver_sql(sql, rows)
    return n


def ts_as_epoch_us(conn: Connection):
    """SQL expression of ``series_values.ts`` as integer microseconds since the Unix epoch."""
    col = series_values.c.ts
    if conn.dialect.name == "postgresql":
        return cast(extract("epoch", col) * 1_000_000, BigInteger)
    return type_coerce(col, BigInteger)


def read_series_rows(conn: Connection, key_ids: list[int], start_us: int | None,
                     end_us: int | None) -> pd.DataFrame:
    """Rows of ``series_values`` for some keys in ``[start, end)``, ordered by key and time.

    Returns a frame with ``key_id``, ``ts`` (tz-aware UTC), ``value`` and ``run_id``.
    """
    ts_expr = ts_as_epoch_us(conn).label("ts_us")
    stmt = select(series_values.c.key_id, ts_expr, series_values.c.value, series_values.c.run_id)
    stmt = stmt.where(series_values.c.key_id.in_(key_ids))
    stmt = stmt.where(ts_range_condition(conn, start_us, end_us))
    stmt = stmt.order_by(series_values.c.key_id, series_values.c.ts)
    result = conn.execute(stmt)
    try:
        # plain DBAPI tuples: the selected columns need no result processing (integers and floats)
        raw = result.cursor.fetchall()
    finally:
        result.close()
    frame = pd.DataFrame.from_records(raw, columns=["key_id", "ts_us", "value", "run_id"], nrows=len(raw))
    return pd.DataFrame({
        "key_id": frame["key_id"].to_numpy(dtype="int64"),
        "ts": pd.to_datetime(frame["ts_us"].to_numpy(dtype="int64"), unit="us", utc=True),
        "value": pd.to_numeric(frame["value"], errors="raise").to_numpy(dtype=float, na_value=np.nan),
        "run_id": frame["run_id"].to_numpy(dtype="int64"),
    })


def ts_range_condition(conn: Connection, start_us: int | None, end_us: int | None):
    """Condition ``start <= series_values.ts < end`` that uses the primary-key index on both back ends.

    Parameters
    ----------
    conn : Connection
        Open connection (its dialect picks the form).
    start_us, end_us : int or None
        Bounds as microseconds since the Unix epoch; ``None`` leaves a side open. [us]

    Returns
    -------
    SQL expression
        Compares the stored column itself (timestamptz on PostgreSQL, integer on
        SQLite), never a function of it, so the index on ``(key_id, ts)`` serves the range.
    """
    conds = []
    if conn.dialect.name == "postgresql":
        col = series_values.c.ts
        to_ts = lambda us: pd.Timestamp(us, unit="us", tz="UTC")  # noqa: E731
    else:
        col = type_coerce(series_values.c.ts, BigInteger)
        to_ts = int
    if start_us is not None:
        conds.append(col >= to_ts(start_us))
    if end_us is not None:
        conds.append(col < to_ts(end_us))
    return and_(true(), *conds)
