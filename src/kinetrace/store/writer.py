"""Writes of one run: every method works inside the run's single transaction.

A :class:`RunWriter` is handed out by :meth:`kinetrace.store.Store.write_run`. Each
``write_*`` method replaces the unit's rows that fall in the run's window (delete, then
insert, in the same transaction), so re-running a window never duplicates rows. Input
frames are checked first; a bad frame raises :class:`~kinetrace.store.schema.StoreError`
naming the unit, the column or row and what is allowed, and the whole run is rolled back.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from sqlalchemy import Connection, and_, delete, insert, select, update

from .bulk import insert_series
from .rollup import hour_table, is_fine, keep_hours, mark_summarised, summarised
from .staging import StagedSeries, insert_staged, series_arrays
from .records import (
    ALARM_COLUMNS,
    DAILY_COLUMNS,
    FORECAST_COLUMNS,
    PARAMETER_COLUMNS,
    WHATIF_COLUMNS,
    alarm_record,
    as_float,
    check_gap,
    forecast_record,
    frame_columns,
    parameter_record,
    whatif_record,
)
from .schema import (
    StoreError,
    alarms,
    daily_production,
    data_quality,
    epoch_us,
    forecasts,
    parameters,
    series_keys,
    series_values,
    to_utc,
    watermarks,
    whatif,
)


class RunWriter:
    """Writer of one run's results; every write joins the run's transaction.

    Attributes
    ----------
    run_id : int
        Identifier of the run in the ``runs`` table.
    window : tuple of Timestamp
        ``(start, end)`` of the run, UTC, half-open ``[start, end)``.
    """

    def __init__(self, conn: Connection, run_id: int, start: pd.Timestamp, end: pd.Timestamp):
        self._conn = conn
        self.run_id = run_id
        self.window = (start, end)
        self._cleared: set[tuple[str, str]] = set()
        self.rows_written: dict[str, int] = {}

    # -- helpers -------------------------------------------------------------------------
    def _count(self, table: str, n: int) -> None:
        self.rows_written[table] = self.rows_written.get(table, 0) + n

    def _first_time(self, table: str, unit: str) -> bool:
        key = (table, unit)
        if key in self._cleared:
            return False
        self._cleared.add(key)
        return True

    def _check_unit(self, unit) -> str:
        if not isinstance(unit, str) or not unit.strip():
            raise StoreError(f"unit id must be a non-empty string, got {unit!r}")
        return unit

    def _in_window(self, ts: pd.Timestamp, what: str, *, closed_right: bool = False) -> None:
        start, end = self.window
        ok = (start < ts <= end) if closed_right else (start <= ts < end)
        if not ok:
            span = f"({start}, {end}]" if closed_right else f"[{start}, {end})"
            raise StoreError(f"{what}: {ts} is outside the run window {span}")

    # -- time series ---------------------------------------------------------------------
    def write_series(self, unit: str, frame: pd.DataFrame, units: dict[str, str] | None = None) -> int:
        """Write a unit's result time series (wide frame: one column per variable).

        Parameters
        ----------
        unit : str
            Unit id, e.g. ``"R-210"``.
        frame : DataFrame or StagedSeries
            Tz-aware DatetimeIndex inside the run window, unique; numeric or boolean
            columns named after the variables (booleans are stored as 0/1). NaN is
            stored as NULL. Text columns are refused: encode them as numbers or keep
            them out of the series. Or the same frame checked and laid out by
            :func:`kinetrace.store.stage_series` in another process (its units with it),
            which leaves this writer the insert alone. [SI unit of each variable]
        units : dict, optional
            Unit of measure of each variable, e.g. ``{"conversion": "-"}``; kept in
            ``series_keys``. A variable's unit cannot change once stored.

        Returns
        -------
        int
            Number of (variable, time) rows written.
        """
        unit = self._check_unit(unit)
        what = f"series of unit {unit}"
        if isinstance(frame, StagedSeries):
            staged = frame
            if units:
                raise StoreError(f"{what}: a staged series carries its units; give them to stage_series")
            units, variables = dict(staged.units), list(staged.variables)
            first, last = staged.first, staged.last
        else:
            staged = None
            values, units = series_arrays(what, frame, units)
            variables = list(frame.columns)
            first = frame.index.min().tz_convert("UTC") if len(frame) else None
            last = frame.index.max().tz_convert("UTC") if len(frame) else None
        if first is not None:
            self._in_window(first, what)
            self._in_window(last, what)
        key_ids, new_keys = self._series_keys(unit, variables, units)
        cond = and_(series_values.c.ts >= self.window[0], series_values.c.ts < self.window[1])
        if self._first_time("series", unit):
            changed = list(self._conn.execute(select(series_keys.c.key_id)
                                              .where(series_keys.c.unit_id == unit)).scalars())
        else:
            changed = list(key_ids)
        self._conn.execute(delete(series_values).where(series_values.c.key_id.in_(changed), cond))
        if staged is not None:
            written = insert_staged(self._conn, staged, key_ids, self.run_id)
            n = staged.times
        else:
            n = len(frame)
            ts_us = np.tile(epoch_us(frame.index), len(key_ids))
            keys = np.repeat(np.asarray(key_ids, dtype=np.int64), n)
            vals = np.concatenate([values[c] for c in frame.columns]) if key_ids else np.array([], float)
            written = insert_series(self._conn, keys, ts_us, vals, self.run_id)
        # the hourly summary follows the rows (kinetrace.store.rollup): a new series is summarised
        # when its first write has ten rows per hour or more
        if new_keys and first is not None and is_fine(first.value // 1000, last.value // 1000, n):
            mark_summarised(self._conn, new_keys)
        kept = summarised(self._conn, changed)
        if kept:
            table = None
            if staged is not None and staged.hours is not None:
                table = dict(staged.hours, var=np.asarray(key_ids, dtype=np.int64)[staged.hours["var"]])
            elif staged is None:
                pick = np.isin(keys, kept)
                table = hour_table(keys[pick], ts_us[pick], vals[pick])
            keep_hours(self._conn, kept, self.window[0], self.window[1], table)
        self._count("series_values", written)
        return written

    def _series_keys(self, unit: str, variables: list[str], units: dict[str, str]) -> list[int]:
        conn = self._conn
        rows = conn.execute(select(series_keys.c.variable, series_keys.c.key_id, series_keys.c.unit_of_measure)
                            .where(series_keys.c.unit_id == unit)).all()
        known = {r.variable: (r.key_id, r.unit_of_measure) for r in rows}
        new = []
        for v in variables:
            if v in known:
                old = known[v][1]
                if v in units and units[v] != old and old != "":
                    raise StoreError(f"series of unit {unit}: variable {v!r} is stored in {old!r}; "
                                     f"refusing to add values in {units[v]!r}")
                if v in units and old == "" and units[v]:
                    conn.execute(update(series_keys).where(series_keys.c.key_id == known[v][0])
                                 .values(unit_of_measure=units[v]))
            else:
                new.append({"unit_id": unit, "variable": v, "unit_of_measure": units.get(v, "")})
        if new:
            conn.execute(insert(series_keys), new)
            rows = conn.execute(select(series_keys.c.variable, series_keys.c.key_id)
                                .where(series_keys.c.unit_id == unit)).all()
            known = {r.variable: (r.key_id, None) for r in rows}
        return [known[v][0] for v in variables], [known[r["variable"]][0] for r in new]

    # -- daily production ----------------------------------------------------------------
    def write_daily(self, unit: str, frame: pd.DataFrame) -> int:
        """Write a unit's daily production rows (index: the production day).

        Parameters
        ----------
        unit : str
            Unit id.
        frame : DataFrame
            Index of dates (``datetime.date``, ``Timestamp`` or ISO strings), one row per
            day; columns :data:`DAILY_COLUMNS` (``hours_with_data`` optional). Gap is
            target minus production, positive for a shortfall, and must equal the sum of
            its parts (a) feed ``gap_feed_kg``, (b) conversion ``gap_conversion_kg``,
            (c) downtime ``gap_downtime_kg``, (d) data too poor ``gap_data_kg`` within
            round-off (relative :data:`GAP_RTOL`). [kg] per day, hours [h]

        Returns
        -------
        int
            Rows written. Every day whose 24 h overlap the run window is replaced.
        """
        unit = self._check_unit(unit)
        what = f"daily production of unit {unit}"
        frame_columns(frame, DAILY_COLUMNS, DAILY_COLUMNS[:7], what)
        start, end = self.window
        first_day = start.date()
        last_day = (end - pd.Timedelta(microseconds=1)).date()
        records, seen = [], set()
        for label, row in zip(frame.index, frame.itertuples(index=False)):
            try:
                day = pd.Timestamp(label).date()
            except (TypeError, ValueError):
                raise StoreError(f"{what}: row {label!r} is not a date") from None
            if day in seen:
                raise StoreError(f"{what}: day {day} appears twice")
            seen.add(day)
            if not first_day <= day <= last_day:
                raise StoreError(f"{what}: day {day} does not overlap the run window [{start}, {end})")
            rec = {c: as_float(getattr(row, c)) for c in frame.columns}
            check_gap(rec, f"{what}: day {day}")
            rec.update(unit_id=unit, day=day, run_id=self.run_id)
            records.append(rec)
        if self._first_time("daily", unit):
            self._conn.execute(delete(daily_production).where(
                daily_production.c.unit_id == unit, daily_production.c.day >= first_day,
                daily_production.c.day <= last_day))
        elif records:
            self._conn.execute(delete(daily_production).where(
                daily_production.c.unit_id == unit, daily_production.c.day.in_(sorted(seen))))
        return self._insert(daily_production, records)

    def _insert(self, table, records: list[dict]) -> int:
        if records:
            self._conn.execute(insert(table), records)
        self._count(table.name, len(records))
        return len(records)

    # -- tables stamped "as of" the end of the window ---------------------------------------
    def _write_as_of(self, table, unit: str, frame: pd.DataFrame, allowed, required, what: str,
                     as_of, key: str | None, convert) -> int:
        unit = self._check_unit(unit)
        frame_columns(frame, allowed, required, what)
        as_of = self.window[1] if as_of is None else to_utc(as_of, f"{what}: as_of")
        self._in_window(as_of, f"{what}: as_of", closed_right=True)
        records, seen = [], set()
        for i, row in enumerate(frame.to_dict("records")):
            rec = convert(row, f"{what}, row {i}")
            if key is not None:
                if rec[key] in seen:
                    raise StoreError(f"{what}, row {i}: {key} {rec[key]!r} appears twice")
                seen.add(rec[key])
            rec.update(unit_id=unit, as_of=as_of, run_id=self.run_id)
            records.append(rec)
        if self._first_time(table.name, unit):
            self._conn.execute(delete(table).where(table.c.unit_id == unit, table.c.as_of > self.window[0],
                                                   table.c.as_of <= self.window[1]))
        else:
            self._conn.execute(delete(table).where(table.c.unit_id == unit, table.c.as_of == as_of))
        return self._insert(table, records)

    def write_parameters(self, unit: str, frame: pd.DataFrame, *, as_of=None) -> int:
        """Write fitted parameters of a unit, stamped ``as_of`` (default: the window end).

        Parameters
        ----------
        unit : str
            Unit id.
        frame : DataFrame
            One row per parameter: ``name`` and ``value`` (required), ``std_error``,
            ``ci_low``, ``ci_high`` [unit of the parameter], ``ci_level`` [-],
            ``unit_of_measure``, ``method`` (text).
        as_of : str or Timestamp, optional
            Instant the estimates describe; must lie in ``(start, end]`` of the window.

        Returns
        -------
        int
            Rows written.
        """
        return self._write_as_of(parameters, unit, frame, PARAMETER_COLUMNS, ("name", "value"),
                                 f"parameters of unit {unit}", as_of, "name", parameter_record)

    def write_forecast(self, unit: str, *, activity_now, activity_needed, miss_earliest=None,
                       miss_expected=None, miss_latest=None, statement: str = "", as_of=None) -> int:
        """Write a unit's forecast of the day it falls below target.

        Parameters
        ----------
        unit : str
            Unit id.
        activity_now, activity_needed : float
            Catalyst activity today and the activity needed to meet the target. [-]
        miss_earliest, miss_expected, miss_latest : Timestamp, optional
            Interval and central estimate of the first time below target; ``None`` when
            the trend does not cross within the horizon. [UTC]
        statement : str
            The forecast in plain words, as shown in the report.
        as_of : Timestamp, optional
            Default: the window end.
        """
        frame = pd.DataFrame([{"activity_now": activity_now, "activity_needed": activity_needed,
                               "miss_earliest": miss_earliest, "miss_expected": miss_expected,
                               "miss_latest": miss_latest, "statement": statement}], dtype=object)

        return self._write_as_of(forecasts, unit, frame, FORECAST_COLUMNS, FORECAST_COLUMNS[:2],
                                 f"forecast of unit {unit}", as_of, None, forecast_record)

    def write_whatif(self, unit: str, frame: pd.DataFrame, *, as_of=None) -> int:
        """Write what-if settings of a unit; a proposal outside its safe limits is refused.

        Parameters
        ----------
        unit : str
            Unit id.
        frame : DataFrame
            One row per lever: ``lever`` (e.g. ``"temperature"``), ``current_value``,
            ``proposed_value`` (NaN when no safe setting meets the target),
            ``safe_low``, ``safe_high`` (the configured safe operating limits) [unit of
            the lever], ``unit_of_measure``, ``restores_target`` (bool), ``note``.
        as_of : Timestamp, optional
            Default: the window end.
        """
        return self._write_as_of(whatif, unit, frame, WHATIF_COLUMNS,
                                 ("lever", "proposed_value", "safe_low", "safe_high", "restores_target"),
                                 f"what-if of unit {unit}", as_of, "lever", whatif_record)

    # -- alarms ---------------------------------------------------------------------------
    def write_alarms(self, unit: str, frame: pd.DataFrame) -> int:
        """Write a unit's alarms.

        Alarms detected inside the window replace those the window held before. An
        alarm detected before the window (e.g. one now closed) updates the stored alarm
        with the same (unit, kind, variable, detected), or is added if there is none.

        Parameters
        ----------
        unit : str
            Unit id.
        frame : DataFrame
            One row per alarm: ``kind`` (e.g. ``"drift"``, ``"step"``), ``variable``
            (sensor tag or result variable), ``onset`` (estimated start) and
            ``detected`` [UTC, tz-aware], ``magnitude`` [``magnitude_unit``], optionally ``rate``
            (growth of a drift) [``magnitude_unit`` per day] and ``last_check`` (the last lab result
            the sensor was compared with) [UTC],
            ``evidence`` (text), ``state`` (``"open"`` or ``"closed"``), ``closed``
            [UTC] when closed.

        Returns
        -------
        int
            Rows inserted or updated.
        """
        unit = self._check_unit(unit)
        what = f"alarms of unit {unit}"
        frame_columns(frame, ALARM_COLUMNS, ("kind", "variable", "detected", "state"), what)
        start, end = self.window
        inside, before, seen = [], [], set()
        for i, row in enumerate(frame.to_dict("records")):
            where = f"{what}, row {i}"
            rec = alarm_record(row, where, unit, self.run_id)
            if rec["detected"] >= end:
                raise StoreError(f"{where}: detected {rec['detected']} is after the run window end {end}")
            nk = (rec["kind"], rec["variable"], rec["detected"])
            if nk in seen:
                raise StoreError(f"{where}: alarm {nk} appears twice")
            seen.add(nk)
            (inside if rec["detected"] >= start else before).append(rec)
        conn = self._conn
        first = self._first_time("alarms", unit)
        if first:
            conn.execute(delete(alarms).where(alarms.c.unit_id == unit, alarms.c.detected >= start,
                                              alarms.c.detected < end))
            self._insert(alarms, inside)
        for rec in before if first else before + inside:
            hit = conn.execute(update(alarms).where(
                alarms.c.unit_id == unit, alarms.c.kind == rec["kind"], alarms.c.variable == rec["variable"],
                alarms.c.detected == rec["detected"]).values(**rec))
            if hit.rowcount:
                self._count("alarms", 1)
            else:
                self._insert(alarms, [rec])
        return len(before) + len(inside)

    # -- data quality ---------------------------------------------------------------------
    def write_quality(self, unit: str, frame: pd.DataFrame, *, period_start=None, period_end=None) -> int:
        """Write per-tag data-quality counts of a unit for one period (default: the run window).

        Parameters
        ----------
        unit : str
            Unit id.
        frame : DataFrame
            Index: tag names; columns: count names (e.g. ``good``, ``bad_quality_code``,
            ``out_of_range``); values: non-negative whole numbers of readings. [-]
        period_start, period_end : Timestamp, optional
            Period the counts cover; ``period_start`` must lie in the window. [UTC]

        Returns
        -------
        int
            Rows written (one per tag and count name).
        """
        unit = self._check_unit(unit)
        what = f"data quality of unit {unit}"
        if not isinstance(frame, pd.DataFrame):
            raise StoreError(f"{what}: expected a pandas DataFrame, got {type(frame).__name__}")
        p0 = self.window[0] if period_start is None else to_utc(period_start, f"{what}: period_start")
        p1 = self.window[1] if period_end is None else to_utc(period_end, f"{what}: period_end")
        self._in_window(p0, f"{what}: period_start")
        if p1 <= p0:
            raise StoreError(f"{what}: period_end {p1} is not after period_start {p0}")
        records = []
        for tag, row in frame.iterrows():
            if not isinstance(tag, str) or not tag:
                raise StoreError(f"{what}: tag names (the index) must be non-empty strings, got {tag!r}")
            for measure, count in row.items():
                if not isinstance(measure, str) or not measure:
                    raise StoreError(f"{what}: count names (the columns) must be non-empty strings, got {measure!r}")
                try:
                    c = float(count)
                except (TypeError, ValueError):
                    raise StoreError(f"{what}: tag {tag!r}, {measure}: {count!r} is not a count") from None
                if not np.isfinite(c) or c < 0 or c != int(c):
                    raise StoreError(f"{what}: tag {tag!r}, {measure}: {count!r} is not a non-negative whole number")
                records.append({"unit_id": unit, "tag": tag, "measure": measure, "count": int(c),
                                "period_start": p0, "period_end": p1, "run_id": self.run_id})
        if self._first_time("quality", unit):
            self._conn.execute(delete(data_quality).where(
                data_quality.c.unit_id == unit, data_quality.c.period_start >= self.window[0],
                data_quality.c.period_start < self.window[1]))
        else:
            self._conn.execute(delete(data_quality).where(
                data_quality.c.unit_id == unit, data_quality.c.period_start == p0))
        return self._insert(data_quality, records)

    # -- watermark ------------------------------------------------------------------------
    def set_watermark(self, unit: str, last_ts) -> pd.Timestamp:
        """Record the last time stamp processed for a unit; the watermark never moves back.

        Parameters
        ----------
        unit : str
            Unit id.
        last_ts : str or Timestamp
            Last time stamp processed; must lie in the run window. [UTC]

        Returns
        -------
        Timestamp
            The unit's watermark after the call (the later of the stored and the new). [UTC]
        """
        unit = self._check_unit(unit)
        ts = to_utc(last_ts, f"watermark of unit {unit}")
        self._in_window(ts, f"watermark of unit {unit}")
        conn = self._conn
        old = conn.execute(select(watermarks.c.last_ts).where(watermarks.c.unit_id == unit)).scalar()
        if old is None:
            conn.execute(insert(watermarks).values(unit_id=unit, last_ts=ts, run_id=self.run_id))
        elif ts > old:
            conn.execute(update(watermarks).where(watermarks.c.unit_id == unit)
                         .values(last_ts=ts, run_id=self.run_id))
        else:
            ts = old
        self._count("watermarks", 1)
        return ts

