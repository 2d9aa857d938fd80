"""What the daily report says, gathered from the results store only.

:func:`collect` reads the store and returns a :class:`ReportContent`: per unit, the
day's production row, the 7-day totals, alarms, the newest parameters, forecast and
what-if rows. Every number is a :class:`Figure` that carries the store row it comes
from (``source``), so the HTML and the workbook can show where each number lives and
the tests can check each one against the store.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..errors import KinetraceError
from ..store import GAP_PARTS, Store
from .verdict import STATES, Verdict, build_verdict, day_state

#: Report statuses of a unit, worst first (the verdict's states).
STATUSES = STATES

#: Days in the week block of the report, the report day included. [d]
WEEK_DAYS = 7

#: Days of the activity trend chart. [d]
TREND_DAYS = 30


class ReportError(KinetraceError):
    """The report cannot be built from the store (e.g. nothing stored for the day)."""


@dataclass(frozen=True)
class Figure:
    """A number shown in the report and the store row it comes from.

    Attributes
    ----------
    value : float
        The number as stored (NaN when the store holds NULL). [``unit``]
    source : str
        ``table|key...|column``, or ``table|unit|first..last|column|sum`` for a total
        over days; enough to find the row(s) again.
    unit : str
        Unit of measure of the value.
    """

    value: float
    source: str
    unit: str = ""

    @property
    def known(self) -> bool:
        return bool(np.isfinite(self.value))


def iso(ts) -> str:
    """Key text of a time stamp in a :class:`Figure` source (UTC, seconds).

    >>> iso(pd.Timestamp("2026-11-30T05:00Z"))
    '2026-11-30T05:00:00Z'
    """
    return pd.Timestamp(ts).tz_convert("UTC").strftime("%Y-%m-%dT%H:%M:%SZ")


@dataclass
class UnitReport:
    """Everything the report shows for one unit."""

    unit: str
    status: str
    day: dict[str, Figure] = field(default_factory=dict)          # column -> Figure, the report day
    week: dict[str, Figure] = field(default_factory=dict)         # column -> total over the week
    week_days: int = 0                                            # days with a row in the week
    week_rows: pd.DataFrame = field(default_factory=pd.DataFrame)  # daily rows of the week, for charts
    alarms_today: pd.DataFrame = field(default_factory=pd.DataFrame)
    alarms_open: pd.DataFrame = field(default_factory=pd.DataFrame)
    parameters: pd.DataFrame = field(default_factory=pd.DataFrame)
    forecast: dict | None = None
    whatif: pd.DataFrame = field(default_factory=pd.DataFrame)
    trend: pd.Series | None = None                                # hourly mean activity [-]
    watermark: pd.Timestamp | None = None
    quality: pd.DataFrame = field(default_factory=pd.DataFrame)   # per-tag counts of the day's periods
    complete: bool = False                                         # data processed to the day's end
    verdict: Verdict | None = None                                 # the sentence that opens every output
    so_far: dict | None = None                                     # daily row of the day in progress


@dataclass
class ReportContent:
    """The whole report: the day, its UTC span, and one :class:`UnitReport` per unit."""

    day: dt.date
    span: tuple[pd.Timestamp, pd.Timestamp]
    tz: str
    site: str
    units: list[UnitReport]
    generated: pd.Timestamp
    last_run: dict | None
    display_units: dict = field(default_factory=dict)   # unit id -> {SI unit: the unit's instrument unit}
    mass: str = "kg"                                     # mass unit daily amounts are shown in


DAY_FIGURES = ("production_kg", "target_kg", "gap_kg", *GAP_PARTS, "hours_with_data")
WEEK_FIGURES = ("production_kg", "target_kg", "gap_kg", *GAP_PARTS)


def day_span(day: dt.date, tz: str) -> tuple[pd.Timestamp, pd.Timestamp]:
    """UTC start and end of a local calendar day.

    >>> day_span(dt.date(2026, 7, 1), "Europe/London")[0]
    Timestamp('2026-06-30 23:00:00+0000', tz='UTC')
    """
    start = pd.Timestamp(day).tz_localize(tz)
    end = (pd.Timestamp(day) + pd.Timedelta(days=1)).tz_localize(tz)
    return start.tz_convert("UTC"), end.tz_convert("UTC")


def production_mass(production_unit: str) -> str:
    """Mass unit of a production unit's amounts per day: ``"t/d"`` -> ``"t"``, ``"kg/h"`` -> ``"kg"``.

    >>> production_mass("t/d"), production_mass("kg/h"), production_mass("lb/d")
    ('t', 'kg', 'lb')
    """
    head = production_unit.split("/")[0].strip()
    return head if head in ("t", "kg", "lb", "klb") else "kg"


def _status(day: dict[str, Figure]) -> str:
    if not day:
        return "no data"
    return day_state({k: f.value for k, f in day.items()})


def _complete(watermark, day: dt.date, tz: str) -> bool:
    """The unit's data reach the end of the local day (within one hour); without a watermark
    (daily rows written without series) nothing says the day is still in progress."""
    return watermark is None or pd.isna(watermark) or watermark >= day_span(day, tz)[1] - pd.Timedelta(hours=1)


def _unit_report(store: Store, unit: str, day: dt.date, span, daily: pd.DataFrame, tz: str = "UTC",
                 mass: str = "kg") -> UnitReport:
    rows = daily.loc[daily["unit_id"] == unit]
    today = rows.loc[rows["day"] == day]
    figs: dict[str, Figure] = {}
    if len(today):
        r = today.iloc[0]
        key = f"daily_production|{unit}|{day.isoformat()}"
        for c in DAY_FIGURES:
            figs[c] = Figure(float(r[c]), f"{key}|{c}", "h" if c == "hours_with_data" else "kg")
    first = day - dt.timedelta(days=WEEK_DAYS - 1)
    week_rows = rows.loc[(rows["day"] >= first) & (rows["day"] <= day)]
    week = {c: Figure(float(week_rows[c].sum(min_count=1)) if len(week_rows) else float("nan"),
                      f"daily_production|{unit}|{first.isoformat()}..{day.isoformat()}|{c}|sum", "kg")
            for c in WEEK_FIGURES}
    ur = UnitReport(unit=unit, status=_status(figs), day=figs, week=week, week_days=len(week_rows),
                    week_rows=week_rows.reset_index(drop=True))
    start, end = span
    alarms = store.alarms(unit, until=end)
    ur.alarms_today = alarms.loc[alarms["detected"] >= start].reset_index(drop=True)
    # open at the end of the day: not closed, or closed only after the day
    still = (alarms["state"] == "open") | (alarms["closed"] >= end)
    ur.alarms_open = alarms.loc[still].reset_index(drop=True)
    ur.parameters = store.parameters(unit, as_of=end)
    fc = store.forecasts(unit, as_of=end)
    ur.forecast = fc.iloc[0].to_dict() if len(fc) else None
    ur.whatif = store.whatif(unit, as_of=end)
    w = ur.whatif
    outside = w.loc[w["proposed_value"].notna() & ((w["proposed_value"] < w["safe_low"])
                                                   | (w["proposed_value"] > w["safe_high"]))]
    if len(outside):
        r = outside.iloc[0]
        raise ReportError(f"unit {unit}: stored what-if for {r['lever']} proposes {r['proposed_value']}, outside "
                          f"its safe limits [{r['safe_low']}, {r['safe_high']}]; refusing to show it")
    cat = store.series_catalog(unit)
    if "activity" in set(cat["variable"]):
        s = store.series(unit, ["activity"], end - pd.Timedelta(days=TREND_DAYS), end)["activity"]
        ur.trend = s.resample("1h").mean().dropna() if len(s) else None
    ur.watermark = store.watermark(unit)
    ur.complete = _complete(ur.watermark, day, tz)
    # data-quality counts of the period that covers the day (a run counts over its whole window)
    q = store.quality(unit, None, end)
    q = q.loc[(q["period_start"] < end) & (q["period_end"] > start)] if len(q) else q
    ur.quality = q.loc[q["period_start"] == q["period_start"].max()].reset_index(drop=True) if len(q) else q
    # the verdict judges complete days only; the day in progress is said apart
    later = rows.loc[rows["day"] > day].sort_values("day")
    if len(later) and not _complete(ur.watermark, later["day"].iloc[0], tz):
        ur.so_far = later.iloc[0].to_dict()
    done = rows.loc[rows["day"] <= day] if ur.complete else rows.loc[rows["day"] < day]
    judged = day if ur.complete or not len(done) else max(done["day"])
    if not ur.complete and len(today):
        ur.so_far = today.iloc[0].to_dict()
    ur.verdict = build_verdict(unit, judged, done, alarms_open=ur.alarms_open, forecast=ur.forecast,
                               so_far_row=ur.so_far, mass=mass)
    ur.status = ur.verdict.state
    return ur


def collect(store: Store, day=None, *, tz: str = "UTC", site: str = "", units=None,
            production_unit: str = "kg/d") -> ReportContent:
    """Gather the report of one production day from the store.

    Parameters
    ----------
    store : Store
        The results store.
    day : date or str, optional
        Production day reported (``daily_production.day``); default the latest day stored.
    tz : str
        Site time zone; the day's alarms are those detected between its local midnights.
    site : str
        Site name for the heading.
    units : list of str, optional
        Units to report; default every unit with a daily row, an alarm or a watermark.
    production_unit : str
        The site's production unit (``site.production_unit``, a mass per time); daily amounts are
        said in its mass (``"t/d"``: t).

    Returns
    -------
    ReportContent
    """
    daily_all = store.daily()
    if day is None:
        if daily_all.empty:
            raise ReportError("the results store holds no daily production rows; run the daily check first")
        # the latest complete day: a day whose data end mid-day is not judged against a full day's target
        marks = store.watermarks()
        newest = marks["last_ts"].max() if len(marks) else None
        days = sorted(set(daily_all["day"]), reverse=True)
        day = next((d for d in days if _complete(newest, d, tz)), days[-1])
    try:
        day = pd.Timestamp(day).date()
    except (TypeError, ValueError):
        raise ReportError(f"report day {day!r} is not a date (use YYYY-MM-DD)") from None
    span = day_span(day, tz)
    if units is None:
        found = set(daily_all["unit_id"]) | set(store.alarms()["unit_id"]) | set(store.watermarks()["unit_id"])
        units = sorted(found)
    if not units:
        raise ReportError("the results store holds no units; run the daily check first")
    mass = production_mass(production_unit)
    reports = [_unit_report(store, u, day, span, daily_all, tz, mass) for u in units]
    runs = store.runs()
    done = runs.loc[runs["status"] == "complete"]
    last = done.iloc[-1].to_dict() if len(done) else None
    return ReportContent(day=day, span=span, tz=tz, site=site, units=reports,
                         generated=pd.Timestamp.now(tz="UTC"), last_run=last, mass=mass)


def attention_reasons(content: ReportContent) -> list[str]:
    """Plain reasons a scheduler should alert on: a unit not on target on its latest complete day, or
    with an open alarm (each alarm named). The day in progress never counts.

    Returns
    -------
    list of str
        Empty when every unit is on target with no open alarm.
    """
    out = []
    for u in content.units:
        v = u.verdict
        if v is None:
            continue
        if v.state != "on target":
            out.append(f"unit {u.unit}: {v.headline}")
        out += [f"unit {u.unit}: open alarm: {a}" for a in v.alarms]
    return out
