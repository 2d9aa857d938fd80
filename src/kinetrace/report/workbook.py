"""The daily report as an XLSX workbook for operations (openpyxl).

One table per sheet, each with a readable header row, a units row under it and both frozen:

``Verdict``          one row per unit: state (coloured), days in that state, since, the verdict sentence;
``Summary``          the day's production, target, gap and its four causes, and the week's totals;
``Daily production`` the week's stored daily rows, with a chart of production against target per unit;
``Activity``         hourly catalyst activity of the last 30 days and the activity needed, with a chart;
``Alarms``           detected in the week or open at the end of the day;
``Parameters``       the newest parameter set: readable name, value in engineering units, interval,
                     how it was determined, and the stored name and SI value it comes from;
``Data quality``     per-tag counts of the period covering the day;
``Forecast``         the expected first day below target;
``What-if``          settings within the safe limits, under the cautions text.

Numbers are the stored values (openpyxl writes 16 significant digits); display formats only round
what is shown. Dates are site-local production days; times are site-local clock times, the zone
named in the units row.
"""

from __future__ import annotations

import datetime as dt
from pathlib import Path

import numpy as np
import pandas as pd
from openpyxl import Workbook
from openpyxl.chart import BarChart, LineChart, Reference
from openpyxl.styles import Alignment, Font, PatternFill
from openpyxl.utils import get_column_letter

from .content import ReportContent
from .names import engineering, parameter_label
from .wording import CAUTIONS

SHEETS = ("Verdict", "Summary", "Daily production", "Activity", "Alarms", "Parameters", "Data quality",
          "Forecast", "What-if")

#: Fill colour of each state (light, printable; the state word is always written too).
STATE_FILL = {"on target": "C6E7C1", "below target": "F6CDB4", "down": "CFD5DA", "no data": "E2E2E2"}

_GAPS = (("gap_feed_kg", "Gap: feed below plan", "kg"), ("gap_conversion_kg", "Gap: conversion below expectation", "kg"),
         ("gap_downtime_kg", "Gap: downtime", "kg"), ("gap_data_kg", "Gap: data too poor to judge", "kg"))

#: Columns of each sheet: (key, header, unit). ``{tz}`` in a unit is the site's time zone.
COLUMNS = {
    "Verdict": (("unit", "Unit", ""), ("state", "State", ""), ("days", "Days in this state", "d"),
                ("since", "Since", "date"), ("day", "Day judged", "date"), ("sentence", "Verdict", "")),
    "Summary": (("unit", "Unit", ""), ("day", "Production day", "date"), ("state", "State", ""),
                ("production_kg", "Production", "kg"), ("target_kg", "Target", "kg"), ("gap_kg", "Gap (target - production)", "kg"),
                *_GAPS, ("week_production_kg", "Production, 7 days", "kg"), ("week_target_kg", "Target, 7 days", "kg"),
                ("week_gap_kg", "Gap, 7 days", "kg"), ("week_days", "Days with data, 7 days", "d"),
                ("open_alarms", "Open alarms", ""), ("watermark", "Data processed up to", "site time ({tz})")),
    "Daily production": (("unit_id", "Unit", ""), ("day", "Production day", "date"), ("production_kg", "Production", "kg"),
                         ("target_kg", "Target", "kg"), ("gap_kg", "Gap (target - production)", "kg"), *_GAPS,
                         ("hours_with_data", "Hours with data", "h"), ("run_id", "Run", "")),
    "Activity": (("unit", "Unit", ""), ("time", "Hour", "site time ({tz})"), ("activity", "Catalyst activity", "-"),
                 ("needed", "Activity needed for the target", "-")),
    "Alarms": (("unit_id", "Unit", ""), ("what", "Alarm", ""), ("kind", "Kind", ""), ("variable", "Signal or tag", ""),
               ("onset", "Began about", "site time ({tz})"), ("detected", "Detected", "site time ({tz})"),
               ("magnitude", "Size", ""), ("magnitude_unit", "Size unit", ""), ("state", "State", ""),
               ("closed", "Cleared", "site time ({tz})"), ("evidence", "Evidence", ""), ("run_id", "Run", "")),
    "Parameters": (("unit_id", "Unit", ""), ("as_of", "As of", "site time ({tz})"), ("label", "Parameter", ""),
                   ("shown", "Value", ""), ("shown_low", "95 % interval, low", ""), ("shown_high", "95 % interval, high", ""),
                   ("shown_unit", "Unit", ""), ("method", "How it was determined", ""), ("name", "Stored name", ""),
                   ("value", "Stored value", "SI"), ("std_error", "Standard error", "SI"), ("ci_low", "Stored low", "SI"),
                   ("ci_high", "Stored high", "SI"), ("unit_of_measure", "SI unit", ""), ("run_id", "Run", "")),
    "Data quality": (("unit_id", "Unit", ""), ("tag", "Tag", ""), ("period_start", "Counted from", "site time ({tz})"),
                     ("period_end", "Counted to", "site time ({tz})"), ("what", "Fate of the readings", ""),
                     ("measure", "Stored measure", ""), ("count", "Readings", ""), ("run_id", "Run", "")),
    "Forecast": (("unit_id", "Unit", ""), ("as_of", "As of", "site time ({tz})"), ("activity_now", "Activity now", "-"),
                 ("activity_needed", "Activity needed", "-"), ("miss_earliest", "Below target earliest", "site time ({tz})"),
                 ("miss_expected", "Below target expected", "site time ({tz})"),
                 ("miss_latest", "Below target latest", "site time ({tz})"), ("statement", "Outlook", ""), ("run_id", "Run", "")),
    "What-if": (("unit_id", "Unit", ""), ("as_of", "As of", "site time ({tz})"), ("lever", "Setting", ""),
                ("current_value", "Now", "SI"), ("proposed_value", "Proposed", "SI"), ("safe_low", "Safe low", "SI"),
                ("safe_high", "Safe high", "SI"), ("unit_of_measure", "SI unit", ""),
                ("restores_target", "Restores the target", ""), ("note", "Note", ""), ("run_id", "Run", "")),
}

_HEAD = Font(bold=True, color="FFFFFF")
_UNITS = Font(italic=True, color="44505A")
_FILL = PatternFill("solid", fgColor="3B5B92")
_UNIT_FILL = PatternFill("solid", fgColor="E4E9F2")
_TIME_KEYS = {"watermark", "time", "onset", "detected", "closed", "as_of", "period_start", "period_end",
              "miss_earliest", "miss_expected", "miss_latest"}


def _cell(v, tz: str):
    """A value openpyxl can write: NaN empty, times as site-local clock times (no zone in XLSX)."""
    if v is None:
        return None
    if isinstance(v, pd.Timestamp):
        return None if pd.isna(v) else v.tz_convert(tz).tz_localize(None).to_pydatetime()
    if isinstance(v, (float, np.floating)):
        return None if np.isnan(v) else float(v)
    if isinstance(v, np.integer):
        return int(v)
    if isinstance(v, np.bool_):
        return bool(v)
    if isinstance(v, (dt.date, int, str, bool)):
        return v
    if pd.isna(v):
        return None
    return str(v)


def _table(ws, sheet: str, records: list[dict], tz: str, *, start_row: int = 1) -> int:
    """Header row, units row, then one row per record; frozen under the units row. Returns the last row."""
    cols = COLUMNS[sheet]
    for j, (_, head, unit) in enumerate(cols, start=1):
        c = ws.cell(row=start_row, column=j, value=head)
        c.font, c.fill = _HEAD, _FILL
        c.alignment = Alignment(wrap_text=True, vertical="top")
        u = ws.cell(row=start_row + 1, column=j, value=unit.format(tz=tz) or None)
        u.font, u.fill = _UNITS, _UNIT_FILL
    row = start_row + 1
    for row, rec in enumerate(records, start=start_row + 2):
        for j, (key, _, unit) in enumerate(cols, start=1):
            v = rec.get(key)
            if key in _TIME_KEYS and v is not None and not isinstance(v, pd.Timestamp) and not pd.isna(v):
                v = pd.Timestamp(v, tz="UTC") if pd.Timestamp(v).tzinfo is None else pd.Timestamp(v)
            cell = ws.cell(row=row, column=j, value=_cell(v, tz))
            if isinstance(cell.value, float):
                cell.number_format = "#,##0" if unit == "kg" else "0.000E+00" \
                    if abs(cell.value) < 1e-2 and cell.value != 0 else "#,##0.000"
            elif isinstance(cell.value, dt.datetime):
                cell.number_format = "yyyy-mm-dd hh:mm"
            elif isinstance(cell.value, dt.date):
                cell.number_format = "yyyy-mm-dd"
            if key == "state" and rec.get(key) in STATE_FILL:
                cell.fill = PatternFill("solid", fgColor=STATE_FILL[rec[key]])
    for j, (key, head, _) in enumerate(cols, start=1):
        wide = 90 if key in ("sentence", "evidence", "statement", "method") else 14
        ws.column_dimensions[get_column_letter(j)].width = max(wide, min(40, len(head) + 2)) if wide > 14 else \
            max(12, min(30, len(head) + 2))
    ws.freeze_panes = ws.cell(row=start_row + 2, column=2)
    return row


def _records(frame: pd.DataFrame) -> list[dict]:
    return [] if frame is None or frame.empty else frame.to_dict("records")


def _production_charts(ws, week: pd.DataFrame) -> None:
    """One chart per unit: daily production (bars) against the target (line), from the table's cells."""
    first = 3
    anchor_row = 1
    for unit, rows in week.groupby("unit_id", sort=False):
        n = len(rows)
        bars = BarChart()
        bars.title = f"{unit}: production and target per day"
        bars.y_axis.title = "kg"
        bars.add_data(Reference(ws, min_col=3, min_row=first, max_row=first + n - 1), titles_from_data=False)
        bars.set_categories(Reference(ws, min_col=2, min_row=first, max_row=first + n - 1))
        line = LineChart()
        line.add_data(Reference(ws, min_col=4, min_row=first, max_row=first + n - 1), titles_from_data=False)
        bars += line
        bars.height, bars.width = 7, 16
        ws.add_chart(bars, f"{get_column_letter(len(COLUMNS['Daily production']) + 2)}{anchor_row}")
        first += n
        anchor_row += 15


def _activity_charts(ws, spans: list[tuple[str, int, int]]) -> None:
    for k, (unit, a, b) in enumerate(spans):
        ch = LineChart()
        ch.title = f"{unit}: catalyst activity and the activity needed"
        ch.y_axis.title = "activity [-]"
        ch.add_data(Reference(ws, min_col=3, max_col=4, min_row=a, max_row=b), titles_from_data=False)
        ch.set_categories(Reference(ws, min_col=2, min_row=a, max_row=b))
        ch.height, ch.width = 7, 18
        ws.add_chart(ch, f"F{1 + 15 * k}")


def write_workbook(content: ReportContent, path: str | Path) -> Path:
    """Write the report's workbook.

    Parameters
    ----------
    content : ReportContent
        From :func:`kinetrace.report.content.collect`.
    path : path
        File to write (``.xlsx``); its folder must exist.

    Returns
    -------
    Path
        The file written.
    """
    tz = content.tz
    wb = Workbook()
    ws = wb.active
    ws.title = SHEETS[0]
    _table(ws, "Verdict", [{"unit": u.unit, "state": u.verdict.state, "days": u.verdict.days,
                            "since": u.verdict.since, "day": u.verdict.day, "sentence": u.verdict.sentence}
                           for u in content.units if u.verdict is not None], tz)
    for r in range(3, 3 + len(content.units)):
        ws.cell(row=r, column=6).alignment = Alignment(wrap_text=True, vertical="top")

    summary = []
    for u in content.units:
        rec = {"unit": u.unit, "day": content.day, "state": u.status, "week_days": u.week_days,
               "open_alarms": len(u.alarms_open), "watermark": u.watermark}
        rec.update({k: f.value for k, f in u.day.items()})
        rec.update({f"week_{k}": u.week[k].value for k in ("production_kg", "target_kg", "gap_kg")})
        summary.append(rec)
    _table(wb.create_sheet(SHEETS[1]), "Summary", summary, tz)

    ws = wb.create_sheet(SHEETS[2])
    week = pd.concat([u.week_rows for u in content.units if len(u.week_rows)], ignore_index=True) \
        if any(len(u.week_rows) for u in content.units) else pd.DataFrame()
    _table(ws, "Daily production", _records(week), tz)
    if len(week):
        _production_charts(ws, week)

    ws = wb.create_sheet(SHEETS[3])
    recs, spans = [], []
    for u in content.units:
        if u.trend is None or not len(u.trend):
            continue
        needed = None if u.forecast is None else u.forecast.get("activity_needed")
        a = 3 + len(recs)
        recs += [{"unit": u.unit, "time": t, "activity": v, "needed": needed} for t, v in u.trend.items()]
        spans.append((u.unit, a, 2 + len(recs)))
    _table(ws, "Activity", recs, tz)
    if spans:
        _activity_charts(ws, spans)

    from .verdict import alarm_words

    frames = [pd.concat([u.alarms_today, u.alarms_open]) for u in content.units]
    frames = [f for f in frames if len(f)]
    al = pd.concat(frames, ignore_index=True).drop_duplicates(["unit_id", "kind", "variable", "detected"]) \
        if frames else pd.DataFrame()
    _table(wb.create_sheet(SHEETS[4]), "Alarms", [{**r, "what": alarm_words(r)} for r in _records(al)], tz)

    params = []
    for u in content.units:
        for r in _records(u.parameters):
            label = parameter_label(r["name"])
            if label is None:
                label = r["name"]     # model rows keep their stored name; they are listed after the plant's
            shown, unit = engineering(r["name"], r["value"], r["unit_of_measure"])
            lo, _ = engineering(r["name"], r["ci_low"], r["unit_of_measure"])
            hi, _ = engineering(r["name"], r["ci_high"], r["unit_of_measure"])
            params.append({**r, "label": label, "shown": shown, "shown_low": lo, "shown_high": hi, "shown_unit": unit})
    _table(wb.create_sheet(SHEETS[5]), "Parameters", params, tz)

    from .wording import quality_word

    qual = [{**r, "what": quality_word(r["measure"])} for u in content.units for r in _records(u.quality)]
    _table(wb.create_sheet(SHEETS[6]), "Data quality", qual, tz)

    _table(wb.create_sheet(SHEETS[7]), "Forecast", [u.forecast for u in content.units if u.forecast is not None], tz)

    ws = wb.create_sheet(SHEETS[8])
    ws.cell(row=1, column=1, value="Cautions").font = Font(bold=True)
    ws.cell(row=2, column=1, value=CAUTIONS).alignment = Alignment(wrap_text=True, vertical="top")
    ws.merge_cells(start_row=2, start_column=1, end_row=2, end_column=8)
    ws.row_dimensions[2].height = 60
    wi = [r for u in content.units for r in _records(u.whatif)]
    _table(ws, "What-if", wi, tz, start_row=4)

    path = Path(path)
    wb.save(path)
    return path


__all__ = ["COLUMNS", "SHEETS", "STATE_FILL", "write_workbook"]
