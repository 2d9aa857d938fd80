"""The hourly summary of the time series (``series_hourly``): kept by the writer, read for long charts.

For each series and UTC hour the store keeps the first time, minimum, maximum, sum and count of
the hour's non-NULL values. The writer recomputes the hours a write touches from
``series_values`` itself, in the same transaction (:func:`refresh_hours`), so the summary always
equals one computed from the stored rows. A chart of a long range reads time buckets of whole
hours from it (:func:`hour_buckets`): min and max are those of the rows, sums and counts add up,
and no row is read twice. Per-bucket min/max for line charts of many points per pixel column:
Jugel, U. et al. (2014), "M4: A Visualization-Oriented Time Series Data Aggregation", Proc.
VLDB Endowment 7(10), 797-808.
"""

from __future__ import annotations

from sqlalchemy import BigInteger, Connection, and_, delete, func, literal, select, text, type_coerce

from .schema import series_hourly, series_values

#: One hour. [us]
HOUR_US = 3_600_000_000


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
    import pandas as pd

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

    return inspect(conn).has_table("series_hourly")


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
    import pandas as pd
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
