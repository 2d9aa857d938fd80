"""The daily report's numbers as an XLSX workbook (openpyxl).

Sheets: ``Summary`` (one row per unit), ``Daily production`` (the week's rows of every
unit, as stored), ``Alarms`` (detected in the week or open at the end of the day),
``Parameters`` (newest set per unit), ``Data quality`` (per-tag counts of the day),
``Outlook`` (forecast and what-if, under the
cautions text). Numbers are the stored values (openpyxl writes 16 significant digits,
i.e. within 1e-15 relative of the stored double; display formats only round what is
shown). Time stamps are UTC, written without a zone because the format
has none; the headers say "UTC".
"""

from __future__ import annotations

import datetime as dt
from pathlib import Path

import numpy as np
import pandas as pd
from openpyxl import Workbook
from openpyxl.styles import Alignment, Font, PatternFill
from openpyxl.utils import get_column_letter

from ..store import GAP_PARTS
from .content import ReportContent
from .wording import CAUTIONS

SHEETS = ("Summary", "Daily production", "Alarms", "Parameters", "Data quality", "Outlook")

SUMMARY_COLUMNS = ("unit_id", "day", "status", "production_kg", "target_kg", "gap_kg", *GAP_PARTS,
                   "week_production_kg", "week_target_kg", "week_gap_kg", "week_days", "open_alarms",
                   "watermark_utc")
DAILY_COLUMNS = ("unit_id", "day", "production_kg", "target_kg", "gap_kg", *GAP_PARTS, "hours_with_data",
                 "run_id")
ALARM_COLUMNS = ("unit_id", "kind", "variable", "onset_utc", "detected_utc", "magnitude", "magnitude_unit",
                 "state", "closed_utc", "evidence", "run_id")
PARAMETER_COLUMNS = ("unit_id", "as_of_utc", "name", "value", "std_error", "ci_low", "ci_high", "ci_level",
                     "unit_of_measure", "method", "run_id")
WHATIF_COLUMNS = ("unit_id", "as_of_utc", "lever", "current_value", "proposed_value", "safe_low", "safe_high",
                  "unit_of_measure", "restores_target", "note", "run_id")
QUALITY_COLUMNS = ("unit_id", "tag", "period_start_utc", "period_end_utc", "measure", "count", "run_id")
FORECAST_COLUMNS = ("unit_id", "as_of_utc", "activity_now", "activity_needed", "miss_earliest_utc",
                    "miss_expected_utc", "miss_latest_utc", "statement", "run_id")

_HEAD = Font(bold=True, color="FFFFFF")
_FILL = PatternFill("solid", fgColor="3B5B92")


def _cell(v):
    """A value openpyxl can write: floats stay floats, NaN becomes empty, UTC times become naive UTC."""
    if v is None:
        return None
    if isinstance(v, pd.Timestamp):
        return None if pd.isna(v) else v.tz_convert("UTC").tz_localize(None).to_pydatetime()
    if isinstance(v, (float, np.floating)):
        return None if np.isnan(v) else float(v)
    if isinstance(v, (np.integer,)):
        return int(v)
    if isinstance(v, np.bool_):
        return bool(v)
    if isinstance(v, dt.date) or isinstance(v, (int, str, bool)):
        return v
    if pd.isna(v):
        return None
    return str(v)


def _table(ws, columns, rows, *, start_row: int = 1) -> None:
    for j, c in enumerate(columns, start=1):
        cell = ws.cell(row=start_row, column=j, value=c)
        cell.font, cell.fill = _HEAD, _FILL
    for i, row in enumerate(rows, start=start_row + 1):
        for j, v in enumerate(row, start=1):
            cell = ws.cell(row=i, column=j, value=_cell(v))
            if isinstance(cell.value, float):
                cell.number_format = "#,##0" if columns[j - 1].endswith("_kg") else "0.0000E+00" \
                    if abs(cell.value) < 1e-2 and cell.value != 0 else "#,##0.000"
            elif isinstance(cell.value, dt.datetime):
                cell.number_format = "yyyy-mm-dd hh:mm:ss"
            elif isinstance(cell.value, dt.date):
                cell.number_format = "yyyy-mm-dd"
    for j, c in enumerate(columns, start=1):
        ws.column_dimensions[get_column_letter(j)].width = max(12, min(48, len(c) + 4))
    ws.freeze_panes = ws.cell(row=start_row + 1, column=1)


def _rows(frame: pd.DataFrame, columns, rename: dict[str, str]) -> list[list]:
    if frame.empty:
        return []
    src = [rename.get(c, c) for c in columns]
    return [[r[c] for c in src] for r in frame.to_dict("records")]


def write_workbook(content: ReportContent, path: str | Path) -> Path:
    """Write the report's numbers to an XLSX file.

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
    wb = Workbook()
    ws = wb.active
    ws.title = SHEETS[0]
    summary = []
    for u in content.units:
        d = {c: (u.day[c].value if c in u.day else None) for c in ("production_kg", "target_kg", "gap_kg",
                                                                 *GAP_PARTS)}
        summary.append([u.unit, content.day, u.status, *d.values(), u.week["production_kg"].value,
                        u.week["target_kg"].value, u.week["gap_kg"].value, u.week_days, len(u.alarms_open),
                        u.watermark])
    _table(ws, SUMMARY_COLUMNS, summary)

    ws = wb.create_sheet(SHEETS[1])
    week = pd.concat([u.week_rows for u in content.units if len(u.week_rows)], ignore_index=True) \
        if any(len(u.week_rows) for u in content.units) else pd.DataFrame()
    _table(ws, DAILY_COLUMNS, _rows(week, DAILY_COLUMNS, {}))

    ws = wb.create_sheet(SHEETS[2])
    frames = [pd.concat([u.alarms_today, u.alarms_open]) for u in content.units]
    frames = [f for f in frames if len(f)]
    al = pd.concat(frames, ignore_index=True).drop_duplicates(["unit_id", "kind", "variable", "detected"]) \
        if frames else pd.DataFrame()
    times = {"onset_utc": "onset", "detected_utc": "detected", "closed_utc": "closed"}
    _table(ws, ALARM_COLUMNS, _rows(al, ALARM_COLUMNS, times))

    ws = wb.create_sheet(SHEETS[3])
    frames = [u.parameters for u in content.units if len(u.parameters)]
    params = pd.concat(frames, ignore_index=True) if frames else pd.DataFrame()
    _table(ws, PARAMETER_COLUMNS, _rows(params, PARAMETER_COLUMNS, {"as_of_utc": "as_of"}))

    ws = wb.create_sheet(SHEETS[4])
    frames = [u.quality for u in content.units if len(u.quality)]
    qual = pd.concat(frames, ignore_index=True) if frames else pd.DataFrame()
    _table(ws, QUALITY_COLUMNS, _rows(qual, QUALITY_COLUMNS, {"period_start_utc": "period_start",
                                                             "period_end_utc": "period_end"}))

    ws = wb.create_sheet(SHEETS[5])
    ws.cell(row=1, column=1, value="Cautions").font = Font(bold=True)
    ws.cell(row=2, column=1, value=CAUTIONS).alignment = Alignment(wrap_text=True, vertical="top")
    ws.merge_cells(start_row=2, start_column=1, end_row=2, end_column=8)
    ws.row_dimensions[2].height = 60
    fc = pd.DataFrame([u.forecast for u in content.units if u.forecast is not None])
    ren = {"as_of_utc": "as_of", "miss_earliest_utc": "miss_earliest", "miss_expected_utc": "miss_expected",
           "miss_latest_utc": "miss_latest"}
    _table(ws, FORECAST_COLUMNS, _rows(fc, FORECAST_COLUMNS, ren), start_row=4)
    frames = [u.whatif for u in content.units if len(u.whatif)]
    wi = pd.concat(frames, ignore_index=True) if frames else pd.DataFrame()
    _table(ws, WHATIF_COLUMNS, _rows(wi, WHATIF_COLUMNS, {"as_of_utc": "as_of"}), start_row=6 + len(fc))
    ws.freeze_panes = None

    path = Path(path)
    wb.save(path)
    return path
