"""Tables of the results store (SQLAlchemy Core), and the UTC time type they share.

See the package docstring of :mod:`kinetrace.store` for the table-by-table description
and the reasons behind the layout of the time-series tables.

Time stamps
-----------
Every time column uses :class:`UtcTime`: ``TIMESTAMP WITH TIME ZONE`` on PostgreSQL and
an ``INTEGER`` count of microseconds since 1970-01-01T00:00:00Z on SQLite. Both hold
microseconds exactly, so the same writes read back equal on both back ends; reads
return timezone-aware UTC :class:`pandas.Timestamp`. Naive time stamps are refused
(a naive value has no defined instant).
"""

from __future__ import annotations

import datetime as dt

import pandas as pd
from sqlalchemy import (
    BigInteger,
    Boolean,
    CheckConstraint,
    Column,
    Date,
    Double,
    ForeignKey,
    Index,
    Integer,
    MetaData,
    String,
    Table,
    Text,
    UniqueConstraint,
)
from sqlalchemy.dialects.postgresql import TIMESTAMP
from sqlalchemy.types import TypeDecorator

from ..errors import KinetraceError

#: Version of the table layout; stored in ``store_meta`` and checked on open.
SCHEMA_VERSION = 4

#: Run states written to ``runs.status``.
#: ``abandoned``: a run whose process ended without finishing (killed, host lost), marked so by the
#: next run that takes the run lease (see :meth:`kinetrace.store.Store.write_run`).
RUN_STATES = ("running", "complete", "failed", "abandoned")

#: Alarm states written to ``alarms.state``.
ALARM_STATES = ("open", "closed")


class StoreError(KinetraceError):
    """A write or read of the results store was refused; the message says which unit, row and why."""


def to_utc(value, what: str = "time stamp") -> pd.Timestamp:
    """A single time stamp as a tz-aware UTC :class:`pandas.Timestamp`.

    Parameters
    ----------
    value : str, datetime or Timestamp
        The instant; strings and datetimes must carry an offset.
    what : str
        Name used in the error message.

    Returns
    -------
    Timestamp
        The same instant in UTC. [UTC]

    >>> to_utc("2026-03-01T12:00:00+01:00")
    Timestamp('2026-03-01 11:00:00+0000', tz='UTC')
    """
    try:
        ts = pd.Timestamp(value)
    except (TypeError, ValueError) as exc:
        raise StoreError(f"{what}: cannot read {value!r} as a time stamp ({exc})") from None
    if ts is pd.NaT:
        raise StoreError(f"{what}: missing time stamp (NaT)")
    if ts.tzinfo is None:
        raise StoreError(f"{what}: {value!r} is naive; give a time zone (the store keeps UTC)")
    return ts.tz_convert("UTC")


def epoch_us(index) -> "pd.Index":
    """Microseconds since 1970-01-01T00:00:00Z of tz-aware time stamps (vectorised).

    Parameters
    ----------
    index : DatetimeIndex or Series of datetimes
        Tz-aware time stamps.

    Returns
    -------
    ndarray of int64
        Microseconds since the Unix epoch. [us]

    >>> epoch_us(pd.DatetimeIndex(["1970-01-01T00:00:01Z"])).tolist()
    [1000000]
    """
    idx = pd.DatetimeIndex(index)
    if idx.tz is None:
        raise StoreError("time stamps are naive; give a time zone (the store keeps UTC)")
    return idx.tz_convert("UTC").as_unit("us").asi8


class UtcTime(TypeDecorator):
    """Instant in UTC: timestamptz on PostgreSQL, integer microseconds on SQLite."""

    impl = BigInteger
    cache_ok = True

    def load_dialect_impl(self, dialect):
        if dialect.name == "postgresql":
            return dialect.type_descriptor(TIMESTAMP(timezone=True))
        return dialect.type_descriptor(BigInteger())

    def process_bind_param(self, value, dialect):
        if value is None:
            return None
        ts = to_utc(value)
        if dialect.name == "postgresql":
            return ts.to_pydatetime()
        return int(ts.value // 1000)

    def process_result_value(self, value, dialect):
        if value is None:
            return None
        if isinstance(value, dt.datetime):
            return pd.Timestamp(value).tz_convert("UTC")
        return pd.Timestamp(int(value), unit="us", tz="UTC")


metadata = MetaData()

store_meta = Table(
    "store_meta", metadata,
    Column("key", String(64), primary_key=True),
    Column("value", Text, nullable=False),
)

runs = Table(
    "runs", metadata,
    Column("run_id", Integer, primary_key=True, autoincrement=True),
    Column("started", UtcTime, nullable=False),
    Column("finished", UtcTime),
    Column("status", String(16), nullable=False),
    Column("config_fingerprint", String(128), nullable=False),
    Column("window_start", UtcTime, nullable=False),
    Column("window_end", UtcTime, nullable=False),
    Column("software_version", String(64), nullable=False),
    Column("message", Text),
    CheckConstraint("status IN (" + ", ".join(f"'{x}'" for x in RUN_STATES) + ")", name="runs_status"),
)

series_keys = Table(
    "series_keys", metadata,
    Column("key_id", Integer, primary_key=True, autoincrement=True),
    Column("unit_id", String(64), nullable=False),
    Column("variable", String(128), nullable=False),
    Column("unit_of_measure", String(64), nullable=False, default=""),
    UniqueConstraint("unit_id", "variable", name="series_keys_unit_variable"),
)

# No foreign keys here on purpose: on PostgreSQL a foreign key is a trigger per row, which
# made a 2.6-million-row write about 17 times slower than the bare COPY; key_id and run_id
# are set by the writer in the same transaction that creates the key and holds the run.
series_values = Table(
    "series_values", metadata,
    Column("key_id", Integer, primary_key=True, autoincrement=False),
    Column("ts", UtcTime, primary_key=True),
    Column("value", Double),
    Column("run_id", Integer, nullable=False),
    sqlite_with_rowid=False,
)

# Series whose hourly summary the writer keeps: those first written with ten rows per hour or more
# (kinetrace.store.rollup.is_fine); listed at their first write, for good.
series_summarised = Table(
    "series_summarised", metadata,
    Column("key_id", Integer, primary_key=True, autoincrement=False),
)

# Hourly summary of the summarised series, kept by the writer in the same transaction
# (kinetrace.store.rollup): per series and UTC hour the first time, minimum, maximum, sum and count
# of the non-NULL values, so a chart of a year of 1-minute results reads 8,760 rows per series
# instead of 525,600. Derived data: not in dumps.
series_hourly = Table(
    "series_hourly", metadata,
    Column("key_id", Integer, primary_key=True, autoincrement=False),
    Column("hour", UtcTime, primary_key=True),
    Column("t_first", UtcTime, nullable=False),
    Column("lo", Double, nullable=False),
    Column("hi", Double, nullable=False),
    Column("total", Double, nullable=False),
    Column("n", BigInteger, nullable=False),
    sqlite_with_rowid=False,
)

daily_production = Table(
    "daily_production", metadata,
    Column("unit_id", String(64), primary_key=True),
    Column("day", Date, primary_key=True),
    Column("production_kg", Double),
    Column("target_kg", Double),
    Column("gap_kg", Double),
    Column("gap_feed_kg", Double),
    Column("gap_conversion_kg", Double),
    Column("gap_downtime_kg", Double),
    Column("gap_data_kg", Double),
    Column("hours_with_data", Double),
    Column("run_id", Integer, ForeignKey("runs.run_id"), nullable=False),
)

parameters = Table(
    "parameters", metadata,
    Column("unit_id", String(64), primary_key=True),
    Column("as_of", UtcTime, primary_key=True),
    Column("name", String(128), primary_key=True),
    Column("value", Double),
    Column("std_error", Double),
    Column("ci_low", Double),
    Column("ci_high", Double),
    Column("ci_level", Double),
    Column("unit_of_measure", String(64), nullable=False, default=""),
    Column("method", Text, nullable=False, default=""),   # version 1: String(64)
    Column("run_id", Integer, ForeignKey("runs.run_id"), nullable=False),
)

alarms = Table(
    "alarms", metadata,
    Column("unit_id", String(64), primary_key=True),
    Column("kind", String(64), primary_key=True),
    Column("variable", String(128), primary_key=True),
    Column("detected", UtcTime, primary_key=True),
    Column("onset", UtcTime),
    Column("magnitude", Double),
    Column("magnitude_unit", String(64), nullable=False, default=""),
    Column("evidence", Text, nullable=False, default=""),
    Column("state", String(8), nullable=False),
    Column("closed", UtcTime),
    Column("run_id", Integer, ForeignKey("runs.run_id"), nullable=False),
    Column("rate", Double),             # version 3: growth of a drift [magnitude_unit per day]
    Column("last_check", UtcTime),      # version 3: last independent check (a lab result) [UTC]
    CheckConstraint("state IN ('open', 'closed')", name="alarms_state"),
)
Index("alarms_unit_detected", alarms.c.unit_id, alarms.c.detected)

data_quality = Table(
    "data_quality", metadata,
    Column("unit_id", String(64), primary_key=True),
    Column("tag", String(128), primary_key=True),
    Column("period_start", UtcTime, primary_key=True),
    Column("measure", String(64), primary_key=True),
    Column("period_end", UtcTime, nullable=False),
    Column("count", BigInteger, nullable=False),
    Column("run_id", Integer, ForeignKey("runs.run_id"), nullable=False),
)

forecasts = Table(
    "forecasts", metadata,
    Column("unit_id", String(64), primary_key=True),
    Column("as_of", UtcTime, primary_key=True),
    Column("activity_now", Double),
    Column("activity_needed", Double),
    Column("miss_earliest", UtcTime),
    Column("miss_expected", UtcTime),
    Column("miss_latest", UtcTime),
    Column("statement", Text, nullable=False, default=""),
    Column("run_id", Integer, ForeignKey("runs.run_id"), nullable=False),
)

whatif = Table(
    "whatif", metadata,
    Column("unit_id", String(64), primary_key=True),
    Column("as_of", UtcTime, primary_key=True),
    Column("lever", String(64), primary_key=True),
    Column("current_value", Double),
    Column("proposed_value", Double),
    Column("safe_low", Double, nullable=False),
    Column("safe_high", Double, nullable=False),
    Column("unit_of_measure", String(64), nullable=False, default=""),
    Column("restores_target", Boolean, nullable=False),
    Column("note", Text, nullable=False, default=""),
    Column("run_id", Integer, ForeignKey("runs.run_id"), nullable=False),
)

watermarks = Table(
    "watermarks", metadata,
    Column("unit_id", String(64), primary_key=True),
    Column("last_ts", UtcTime, nullable=False),
    Column("run_id", Integer, ForeignKey("runs.run_id"), nullable=False),
)

#: Tables that hold results, in the order a dump lists them.
RESULT_TABLES = ("series_keys", "series_values", "daily_production", "parameters", "alarms",
                 "data_quality", "forecasts", "whatif", "watermarks")
