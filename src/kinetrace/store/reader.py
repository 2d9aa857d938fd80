"""Reads of the results store, each returning a pandas DataFrame with UTC time stamps.

These are plain functions of an open connection; :class:`kinetrace.store.Store` wraps
them as methods. Time columns come back as tz-aware UTC ``datetime64`` columns and
days as ``datetime.date`` objects; floats stored as NULL come back as NaN.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from sqlalchemy import Connection, Table, func, select

from .bulk import read_series_rows
from .schema import (
    StoreError,
    alarms,
    daily_production,
    data_quality,
    epoch_us,
    forecasts,
    parameters,
    runs,
    series_keys,
    to_utc,
    watermarks,
    whatif,
)


def _as_list(units) -> list[str] | None:
    if units is None:
        return None
    return [units] if isinstance(units, str) else list(units)


def frame_of(conn: Connection, stmt, table: Table) -> pd.DataFrame:
    """Run a select on one table and return its rows with the table's column names and types."""
    rows = conn.execute(stmt).all()
    cols = list(stmt.selected_columns.keys())
    df = pd.DataFrame([tuple(r) for r in rows], columns=cols, dtype=object)
    for c in cols:
        col = table.c[c]
        kind = type(col.type).__name__
        if kind == "UtcTime":
            df[c] = pd.to_datetime(df[c], utc=True) if len(df) else pd.Series([], dtype="datetime64[us, UTC]")
        elif kind == "Double":
            df[c] = pd.to_numeric(df[c].astype(object).where(df[c].notna(), np.nan)).astype(float)
        elif kind in ("Integer", "BigInteger"):
            df[c] = df[c].astype("int64")
        elif kind == "Boolean":
            df[c] = df[c].astype(bool)
    return df


def read_series(conn: Connection, unit: str, variables=None, start=None, end=None, *,
                layout: str = "wide") -> pd.DataFrame:
    """Result time series of one unit over ``[start, end)``.

    Parameters
    ----------
    conn : Connection
        Open connection.
    unit : str
        Unit id.
    variables : str or list of str, optional
        Variables to read; default all the unit has.
    start, end : str or Timestamp, optional
        Half-open time range; default everything. [UTC or any offset]
    layout : {"wide", "long"}
        ``"wide"``: index ``ts``, one column per variable (NaN where absent);
        ``"long"``: columns ``variable``, ``ts``, ``value``, ``run_id``.

    Returns
    -------
    DataFrame
        Values in the unit of measure stored in ``series_keys``. [unit of each variable]
    """
    if layout not in ("wide", "long"):
        raise StoreError(f"layout {layout!r} is not one of ['wide', 'long']")
    q = select(series_keys.c.variable, series_keys.c.key_id).where(series_keys.c.unit_id == unit)
    known = {r.variable: r.key_id for r in conn.execute(q)}
    wanted = sorted(known) if variables is None else _as_list(variables)
    missing = [v for v in wanted if v not in known]
    if missing:
        raise StoreError(f"series of unit {unit}: no variable(s) {missing} in the store; "
                         f"stored variables are {sorted(known)}")
    s_us = None if start is None else int(epoch_us(pd.DatetimeIndex([to_utc(start, 'start')]))[0])
    e_us = None if end is None else int(epoch_us(pd.DatetimeIndex([to_utc(end, 'end')]))[0])
    rows = read_series_rows(conn, [known[v] for v in wanted], s_us, e_us) if wanted else None
    by_key = {known[v]: v for v in wanted}
    if rows is None:
        rows = pd.DataFrame({"key_id": [], "ts": pd.to_datetime([], utc=True), "value": [], "run_id": []})
    rows["variable"] = pd.Series([by_key[k] for k in rows["key_id"]] if len(rows) else [], dtype=str,
                                 index=rows.index)
    if layout == "long":
        return rows[["variable", "ts", "value", "run_id"]].reset_index(drop=True)
    wide = rows.pivot(index="ts", columns="variable", values="value") if len(rows) else \
        pd.DataFrame(index=pd.DatetimeIndex([], tz="UTC", name="ts"))
    wide = wide.reindex(columns=wanted)
    wide.columns.name = None
    return wide


def read_series_catalog(conn: Connection, unit: str | None = None) -> pd.DataFrame:
    """Stored variables (``unit_id``, ``variable``, ``unit_of_measure``), optionally of one unit."""
    stmt = select(series_keys.c.unit_id, series_keys.c.variable, series_keys.c.unit_of_measure)
    if unit is not None:
        stmt = stmt.where(series_keys.c.unit_id == unit)
    return frame_of(conn, stmt.order_by(series_keys.c.unit_id, series_keys.c.variable), series_keys)


def read_daily(conn: Connection, units=None, first_day=None, last_day=None) -> pd.DataFrame:
    """Daily production rows, ordered by unit and day; days between ``first_day`` and ``last_day`` inclusive.

    Returns
    -------
    DataFrame
        Columns of ``daily_production``; masses [kg] per day, ``hours_with_data`` [h].
    """
    t = daily_production
    stmt = select(*t.c)
    if (u := _as_list(units)) is not None:
        stmt = stmt.where(t.c.unit_id.in_(u))
    if first_day is not None:
        stmt = stmt.where(t.c.day >= pd.Timestamp(first_day).date())
    if last_day is not None:
        stmt = stmt.where(t.c.day <= pd.Timestamp(last_day).date())
    return frame_of(conn, stmt.order_by(t.c.unit_id, t.c.day), t)


def read_alarms(conn: Connection, units=None, *, state: str | None = None, since=None,
                until=None) -> pd.DataFrame:
    """Alarms ordered by unit and detection time.

    Parameters
    ----------
    units : str or list, optional
        Units to read; default all.
    state : {"open", "closed"}, optional
        Only alarms in this state.
    since, until : Timestamp, optional
        Only alarms detected in ``[since, until)``. [UTC]
    """
    t = alarms
    stmt = select(*t.c)
    if (u := _as_list(units)) is not None:
        stmt = stmt.where(t.c.unit_id.in_(u))
    if state is not None:
        if state not in ("open", "closed"):
            raise StoreError(f"alarm state {state!r} is not one of ['open', 'closed']")
        stmt = stmt.where(t.c.state == state)
    if since is not None:
        stmt = stmt.where(t.c.detected >= to_utc(since, "since"))
    if until is not None:
        stmt = stmt.where(t.c.detected < to_utc(until, "until"))
    return frame_of(conn, stmt.order_by(t.c.unit_id, t.c.detected, t.c.kind, t.c.variable), t)


def _read_as_of(conn: Connection, table: Table, units, as_of, latest: bool, order) -> pd.DataFrame:
    stmt = select(*table.c)
    if (u := _as_list(units)) is not None:
        stmt = stmt.where(table.c.unit_id.in_(u))
    if as_of is not None:
        stmt = stmt.where(table.c.as_of <= to_utc(as_of, "as_of"))
    if latest:
        last = select(table.c.unit_id, func.max(table.c.as_of).label("last"))
        if as_of is not None:
            last = last.where(table.c.as_of <= to_utc(as_of, "as_of"))
        last = last.group_by(table.c.unit_id).subquery()
        stmt = stmt.join(last, (last.c.unit_id == table.c.unit_id) & (last.c["last"] == table.c.as_of))
    return frame_of(conn, stmt.order_by(*order), table)


def read_parameters(conn: Connection, units=None, *, as_of=None, latest: bool = True) -> pd.DataFrame:
    """Fitted parameters; with ``latest`` only each unit's newest set at or before ``as_of``.

    Returns
    -------
    DataFrame
        Columns of ``parameters``; values in each row's ``unit_of_measure``.
    """
    t = parameters
    return _read_as_of(conn, t, units, as_of, latest, (t.c.unit_id, t.c.as_of, t.c.name))


def read_forecasts(conn: Connection, units=None, *, as_of=None, latest: bool = True) -> pd.DataFrame:
    """Forecasts of the first time below target (activity [-], dates [UTC])."""
    t = forecasts
    return _read_as_of(conn, t, units, as_of, latest, (t.c.unit_id, t.c.as_of))


def read_whatif(conn: Connection, units=None, *, as_of=None, latest: bool = True) -> pd.DataFrame:
    """What-if settings within the safe limits (values in each row's ``unit_of_measure``)."""
    t = whatif
    return _read_as_of(conn, t, units, as_of, latest, (t.c.unit_id, t.c.as_of, t.c.lever))


def read_quality(conn: Connection, units=None, start=None, end=None) -> pd.DataFrame:
    """Per-tag data-quality counts with ``period_start`` in ``[start, end)``. [readings]"""
    t = data_quality
    stmt = select(*t.c)
    if (u := _as_list(units)) is not None:
        stmt = stmt.where(t.c.unit_id.in_(u))
    if start is not None:
        stmt = stmt.where(t.c.period_start >= to_utc(start, "start"))
    if end is not None:
        stmt = stmt.where(t.c.period_start < to_utc(end, "end"))
    return frame_of(conn, stmt.order_by(t.c.unit_id, t.c.period_start, t.c.tag, t.c.measure), t)


def read_watermark(conn: Connection, unit: str) -> pd.Timestamp | None:
    """Last time stamp processed for a unit, or ``None`` when the unit was never run. [UTC]"""
    return conn.execute(select(watermarks.c.last_ts).where(watermarks.c.unit_id == unit)).scalar()


def read_watermarks(conn: Connection) -> pd.DataFrame:
    """Watermarks of every unit (``unit_id``, ``last_ts`` [UTC], ``run_id``)."""
    return frame_of(conn, select(*watermarks.c).order_by(watermarks.c.unit_id), watermarks)


def read_runs(conn: Connection, status: str | None = None) -> pd.DataFrame:
    """Run records, oldest first; a ``running`` row without ``finished`` is a run that died."""
    stmt = select(*runs.c)
    if status is not None:
        stmt = stmt.where(runs.c.status == status)
    return frame_of(conn, stmt.order_by(runs.c.run_id), runs)


def read_table(conn: Connection, table: Table) -> pd.DataFrame:
    """Every row of a store table, ordered by its primary key (for dumps and comparisons)."""
    order = list(table.primary_key.columns) or list(table.c)
    return frame_of(conn, select(*table.c).order_by(*order), table)
