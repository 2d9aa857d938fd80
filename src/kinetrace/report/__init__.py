"""kinetrace.report: the daily report, built from the results store only.

:func:`build_report` writes two files for one production day:

* ``kinetrace-day-YYYY-MM-DD.html``: one self-contained page for operations (inline CSS
  and SVG charts, no scripts, no external links): status per unit, production against
  target for the day and the last 7 days, the gap split into its four causes, the
  day's alarms in plain words, the forecast, any what-if settings (always under the
  cautions text, :data:`CAUTIONS`), and the newest fitted parameters;
* ``kinetrace-day-YYYY-MM-DD.xlsx``: the same numbers as stored, sheet by sheet.

Nothing is recomputed: every number is a stored value or a sum of stored daily rows,
and the page names the row of each number (``data-src``).

>>> import tempfile
>>> import pandas as pd
>>> from kinetrace.store import fingerprint, open_store
>>> store = open_store("sqlite://")
>>> collect(store)
Traceback (most recent call last):
...
kinetrace.report.content.ReportError: the results store holds no daily production rows; run the daily check first
>>> day = pd.DataFrame({"production_kg": [23000.0], "target_kg": [24000.0], "gap_kg": [1000.0],
...                     "gap_feed_kg": [600.0], "gap_conversion_kg": [400.0], "gap_downtime_kg": [0.0],
...                     "gap_data_kg": [0.0]}, index=["2026-11-30"])
>>> with store.write_run(("2026-11-30T00:00Z", "2026-12-01T00:00Z"),
...                      config_fingerprint=fingerprint(b"example")) as run:
...     _ = run.write_daily("R-210", day)
>>> files = build_report(store, tempfile.mkdtemp())
>>> files.html.name, files.content.units[0].status, alert_reasons(store)
('kinetrace-day-2026-11-30.html', 'below target', ['unit R-210: below target on 30 Nov'])
>>> files.content.units[0].verdict.sentence
'R-210 below target on 30 Nov: feed below plan; conversion below expectation. Next: the feed rate against plan.'
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from ..store import Store
from .content import STATUSES, Figure, ReportContent, ReportError, UnitReport, attention_reasons, collect
from .page import render_html
from .wording import CAUTIONS
from .workbook import SHEETS, write_workbook


@dataclass(frozen=True)
class ReportFiles:
    """Paths of the files written by :func:`build_report`, and what they report."""

    html: Path
    xlsx: Path
    content: ReportContent


def build_report(store: Store, out_dir, day=None, *, tz: str = "UTC", site: str = "",
                 units=None, display_units: dict | None = None, production_unit: str = "kg/d") -> ReportFiles:
    """Write the HTML page and the XLSX workbook of one production day.

    Parameters
    ----------
    store : Store
        The results store (see :func:`kinetrace.store.open_store`).
    out_dir : path
        Folder for the two files; created if missing.
    day : date or str, optional
        Production day; default the latest day with a daily production row.
    tz : str
        Site time zone (IANA name) used for the day's alarm window.
    site : str
        Site name shown in the heading.
    units : list of str, optional
        Units to report; default all.
    production_unit : str
        The site's production unit (``site.production_unit``); daily amounts are shown in its mass.
    display_units : dict, optional
        Unit id -> {SI unit: display unit}, e.g. ``{"R-220": {"m3/s": "gpm", "K": "degF"}}``: the
        unit's own instrument units for its what-if settings (see
        :attr:`kinetrace.config.UnitModel.display_units`).

    Returns
    -------
    ReportFiles
    """
    content = collect(store, day, tz=tz, site=site, units=units, production_unit=production_unit)
    content.display_units = dict(display_units or {})
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    stem = f"kinetrace-day-{content.day.isoformat()}"
    html = out / f"{stem}.html"
    html.write_text(render_html(content), encoding="utf-8")
    xlsx = write_workbook(content, out / f"{stem}.xlsx")
    return ReportFiles(html=html, xlsx=xlsx, content=content)


def alert_reasons(store: Store, day=None, *, tz: str = "UTC") -> list[str]:
    """Why a scheduler should alert for a day: units below target or without data, open alarms.

    An empty list means every unit met its target with no open alarm; a command such
    as ``kinetrace check`` can exit non-zero when the list is not empty.

    Parameters
    ----------
    store : Store
        The results store.
    day : date or str, optional
        Production day; default the latest stored.
    tz : str
        Site time zone (IANA name).

    Returns
    -------
    list of str
    """
    return attention_reasons(collect(store, day, tz=tz))


__all__ = ["CAUTIONS", "SHEETS", "STATUSES", "Figure", "ReportContent", "ReportError", "ReportFiles",
           "UnitReport", "alert_reasons", "attention_reasons", "build_report", "collect", "render_html", "write_workbook"]
