"""The hourly summary of the finely sampled time series (``series_hourly``): kept by the writer, read
for long charts.

For each summarised series and UTC hour the store keeps the first time, minimum, maximum, sum and
count of the hour's non-NULL values. A series is summarised when its first write has at least ten
rows per hour on average (:func:`is_fine`, e.g. results on a 1-minute grid); it is then listed in
``series_summarised`` for good. Series on coarser grids (the hourly grid of most plants) are not:
their summary would have about as many rows as the series, cost the writer as much again and save
a reader nothing. In the write's own transaction the writer (:func:`keep_hours`) takes the hours
wholly inside the run window from the rows it has just written (:func:`hour_table`, computed with
NumPy, on a backfill worker for a staged write) and recomputes the two part-hours at the window's
ends from ``series_values`` (:func:`refresh_hours`), so the summary always equals one computed
from the stored rows. A chart of a long range reads time buckets of whole hours from it
(:func:`hour_buckets`): min and max are those of the rows, sums and counts add up, and no row is
read twice. Per-bucket min/max for line charts of many points per pixel column:
Jugel, U. et al. (2014), "M4: A Visualization-Oriented Time Series Data Aggregation", Proc.
VLDB Endowment 7(10), 797-808.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from sqlalchemy import BigInteger, Connection, and_, delete, func, insert, literal, select, text, type_coerce

from .schema import series_hourly, series_summarised, series_values

#: One hour. [us]
HOUR_US = 3_600_000_000
#: Largest mean spacing of a first write's rows for which the series is summarised by the hour:
#: ten rows per hour, so that a chart of a long range reads at least ten times fewer rows. [us]
FINE_SPACING_US = 360_000_000
#: Columns of :func:`hour_table`.
HOUR_COLUMNS = ("var", "hour", "t_first", "lo", "hi", "total", "n")


def is_fine(first_us: int, last_us: int, rows: int) -> bool:
    """Whether rows of one series between ``first_us`` and ``last_us`` are at most
    :data:`FINE_SPACING_US` apart on average (the series is then summarised by the hour).

    Parameters
    ----------
    first_us, last_us : int
        First and last time stamp. [us since the Unix epoch]
    rows : int
        Rows of the series in between, both ends counted. [-]

    >>> is_fine(0, 59 * 60_000_000, 60), is_fine(0, 23 * HOUR_US, 24), is_fine(0, 0, 1)
    (True, False, False)
    """
    return rows >= 2 and int(last_us) - int(first_us) <= FINE_SPACING_US * (rows - 1)


def hour_table(var: np.ndarray, ts: np.ndarray, value: np.ndarray) -> dict[str, np.ndarray]:
    """Per variable and UTC hour of long rows: first time, min, max, sum and count of the non-NaN values.

    Parameters
    ----------
    var : ndarray of int
        Variable (position or key) of each row. [-]
    ts : ndarray of int64
        Time stamp of each row. [us since the Unix epoch]
    value : ndarray of float
        Values; NaN rows are left out, as the store leaves out NULL. [unit of the series]

    Returns
    -------
    dict of ndarray
        :data:`HOUR_COLUMNS`: ``var``, ``hour`` and ``t_first`` [us], ``lo``, ``hi``, ``total``
        [unit of the series], ``n`` [-]; one entry per (variable, hour) with values, sorted by both.

    >>> t = np.array([0, 60_000_000, HOUR_US, HOUR_US + 1])
    >>> h = hour_table(np.zeros(4, int), t, np.array([1.0, 3.0, np.nan, 5.0]))
    >>> h["hour"].tolist(), h["lo"].tolist(), h["total"].tolist(), h["n"].tolist()
    ([0, 3600000000], [1.0, 5.0], [4.0, 5.0], [2, 1])
    """
    ok = ~np.isnan(value)
    var, ts, value = np.asarray(var, np.int64)[ok], np.asarray(ts, np.int64)[ok], np.asarray(value, float)[ok]
    if len(ts) > 1 and not (np.all(var[1:] >= var[:-1]) and np.all((ts[1:] > ts[:-1]) | (var[1:] > var[:-1]))):
        order = np.lexsort((ts, var))
        var, ts, value = var[order], ts[order], value[order]
    hour = ts - np.mod(ts, HOUR_US)                # np.mod floors, also before 1970
    if not len(ts):
        return {c: np.array([], dtype=float if c in ("lo", "hi", "total") else np.int64) for c in HOUR_COLUMNS}
    start = np.flatnonzero(np.r_[True, (var[1:] != var[:-1]) | (hour[1:] != hour[:-1])])
    return {"var": var[start], "hour": hour[start], "t_first": ts[start],
            "lo": np.minimum.reduceat(value, start), "hi": np.maximum.reduceat(value, start),
            "total": np.add.reduceat(value, start), "n": np.diff(np.r_[start, len(ts)]).astype(np.int64)}


def summarised(conn: Connection, key_ids) -> list[int]:
    """Those of ``key_ids`` whose hourly summary the store keeps."""
    key_ids = [int(k) for k in key_ids]
    if not key_ids:
        return []
    got = set(conn.execute(select(series_summarised.c.key_id)
                           .where(series_summarised.c.key_id.in_(key_ids))).scalars())
    return [k for k in key_ids if k in got]


def mark_summarised(conn: Connection, key_ids) -> None:
    """List new series keys in ``series_summarised`` (from now on the writer keeps their summary)."""
    if key_ids:
        conn.execute(insert(series_summarised), [{"key_id": int(k)} for k in key_ids])


def keep_hours(conn: Connection, key_ids, start, end, table: dict | None) -> None:
    """Bring ``series_hourly`` of ``key_ids`` in line with ``series_values`` after a write that
    replaced their rows in ``[start, end)``.

    Parameters
    ----------
    conn : Connection
        Inside the write's transaction, after the rows were deleted and inserted.
    key_ids : list of int
        Summarised series (:func:`summarised`) whose rows in the window were replaced (some may
        have no rows there now).
    start, end : Timestamp
        Run window. [UTC]
    table : dict or None
        :func:`hour_table` of the rows written, with ``var`` the key id; None: recompute the
        hours from the stored rows.
    """
    keys = [int(k) for k in key_ids]
    if not keys:
        return
    w0, w1 = int(pd.Timestamp(start).value // 1000), int(pd.Timestamp(end).value // 1000)
    a, z = ceil_hour(w0), floor_hour(w1)
    if z <= a or table is None:                 # no whole hour inside, or no rows at hand
        refresh_hours(conn, keys, start, end)
        return
    if w0 < a:
        refresh_hours(conn, keys, start, _ts(a))          # the part-hour at each end, from the rows
    if z < w1:
        refresh_hours(conn, keys, _ts(z), end)
    h = series_hourly.c
    conn.execute(delete(series_hourly).where(h.key_id.in_(keys), h.hour >= _ts(a), h.hour < _ts(z)))
    pick = np.isin(table["var"], keys) & (table["hour"] >= a) & (table["hour"] < z)
    rows = {c: table[c][pick] for c in HOUR_COLUMNS}
    if not len(rows["var"]):
        return
    if conn.dialect.name == "sqlite":                     # UtcTime is integer microseconds there
        conn.exec_driver_sql("INSERT INTO series_hourly (key_id, hour, t_first, lo, hi, total, n) "
                             "VALUES (?, ?, ?, ?, ?, ?, ?)",
                             list(zip(*(rows[c].tolist() for c in HOUR_COLUMNS))))
        return
    conn.execute(insert(series_hourly), [
        {"key_id": k, "hour": _ts(hr), "t_first": _ts(t), "lo": lo, "hi": hi, "total": tot, "n": n}
        for k, hr, t, lo, hi, tot, n in zip(*(rows[c].tolist() for c in HOUR_COLUMNS))])


def _ts(us: int) -> pd.Timestamp:
    return pd.Timestamp(int(us), unit="us", tz="UTC")


def floor_hour(us: int) -> int:
    """Start of the UTC hour holding ``us``. [us since the Unix epoch]

    >>> floor_hour(3_600_000_001), floor_hour(-1)
    (3600000000, -3600000000)
    """
    return (int(us) // HOUR_US) * HOUR_US


def ceil_hour(us: int) -> int:
    """Smallest whole UTC hour at or after ``us``. [us since the Unix epoch]

    >>> ceil_hour(3_600_000_000), ceil_hour(3_600_000_001)
    (3600000000, 7200000000)
    """
    return -((-int(us)) // HOUR_US) * HOUR_US


def _hour_of_ts(conn: Connection):
    """SQL expression: the UTC hour of ``series_values.ts`` in the column's own type."""
    if conn.dialect.name == "postgresql":
        return func.date_bin(text("INTERVAL '1 hour'"), series_values.c.ts,
                             text("TIMESTAMPTZ '2000-01-01 00:00:00+00'"))
    ts = type_coerce(series_values.c.ts, BigInteger)
    # floor towards minus infinity (SQLite's integer division truncates towards zero)
    return ts - (((ts % HOUR_US) + HOUR_US) % HOUR_US)


def refresh_hours(conn: Connection, key_ids, start, end) -> None:
    """Recompute ``series_hourly`` of ``key_ids`` for every hour that meets ``[start, end)``.

    Parameters
    ----------
    conn : Connection
        Inside the write's transaction, after ``series_values`` was changed.
    key_ids : select or list of int
        The series (a SELECT of key ids, or a list).
    start, end : Timestamp
        The rows changed lie in ``[start, end)``; the whole hours around them are recomputed. [UTC]
    """
    s_us = floor_hour(int(pd.Timestamp(start).value // 1000))
    e_us = ceil_hour(int(pd.Timestamp(end).value // 1000))
    lo = pd.Timestamp(s_us, unit="us", tz="UTC")
    hi = pd.Timestamp(e_us, unit="us", tz="UTC")
    keys = series_hourly.c.key_id.in_(key_ids)
    conn.execute(delete(series_hourly).where(keys, series_hourly.c.hour >= lo, series_hourly.c.hour < hi))
    hour = _hour_of_ts(conn).label("hour")
    v = series_values.c.value
    sel = (select(series_values.c.key_id, hour, func.min(series_values.c.ts), func.min(v), func.max(v),
                  func.sum(v), func.count(v))
           .where(series_values.c.key_id.in_(key_ids), series_values.c.ts >= lo, series_values.c.ts < hi,
                  v.is_not(None))
           .group_by(series_values.c.key_id, hour))
    conn.execute(series_hourly.insert().from_select(["key_id", "hour", "t_first", "lo", "hi", "total", "n"], sel))


def has_hours(conn: Connection) -> bool:
    """Whether the store has the hourly summary (schema version 4 and later)."""
    from sqlalchemy import inspect

    return inspect(conn).has_table("series_summarised")


def hour_buckets(conn: Connection, key_id: int, s_us: int, e_us: int, width_us: int) -> list[tuple]:
    """Per bucket of whole hours: (bucket, first time, min, max, sum, count) from the hourly summary.

    Bucket ``b`` holds the hours ``[origin + b * width, origin + (b + 1) * width)`` with origin
    ``floor_hour(s_us)``; only whole hours inside ``[ceil_hour(s_us), floor_hour(e_us))`` are read
    here (the caller reads the part-hours at the ends from the rows).

    Parameters
    ----------
    conn : Connection
    key_id : int
    s_us, e_us : int
        The range. [us since the Unix epoch]
    width_us : int
        Bucket width, a whole number of hours. [us]

    Returns
    -------
    list of tuple
        ``(b, t_first [us], lo, hi, total, n)``, buckets with values only.
    """
    from sqlalchemy import cast

    origin = floor_hour(s_us)
    a, z = ceil_hour(s_us), floor_hour(e_us)
    if z <= a:
        return []
    h = series_hourly.c
    if conn.dialect.name == "postgresql":
        us = lambda col: cast(func.floor(func.extract("epoch", col) * 1_000_000), BigInteger)  # noqa: E731
        hour_cond = and_(h.hour >= pd.Timestamp(a, unit="us", tz="UTC"), h.hour < pd.Timestamp(z, unit="us", tz="UTC"))
    else:
        us = lambda col: type_coerce(col, BigInteger)  # noqa: E731
        hour_cond = and_(us(h.hour) >= a, us(h.hour) < z)
    # hours at or after the origin: integer division is the floor on both back ends
    b = ((us(h.hour) - literal(origin, BigInteger)) // literal(int(width_us), BigInteger)).label("b")
    stmt = (select(b, func.min(us(h.t_first)), func.min(h.lo), func.max(h.hi), func.sum(h.total), func.sum(h.n))
            .where(h.key_id == key_id, hour_cond).group_by(b).order_by(b))
    return [(int(r[0]), int(r[1]), float(r[2]), float(r[3]), float(r[4]), int(r[5])) for r in conn.execute(stmt)]
