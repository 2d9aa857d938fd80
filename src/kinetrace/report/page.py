"""The daily report as one self-contained HTML page (inline CSS and SVG; no scripts, no links out).

Every number is wrapped as ``<span class="num" data-src="..." data-value="...">``:
``data-src`` names the store row (see :class:`kinetrace.report.content.Figure`) and
``data-value`` holds the stored value exactly (``repr`` of the float), so a reader or
a test can trace each number to the store.
"""

from __future__ import annotations

from html import escape

import pandas as pd

from .content import Figure, ReportContent, UnitReport, iso
from ..units import display
from .charts import COLOURS, activity_chart, production_chart, to_svg
from .wording import CAUTIONS, alarm_sentence, gap_sentence, mass_text, number, quality_word, sig, when, whatif_sentence

STATUS_CLASS = {"on target": "met", "below target": "short", "down": "down", "no data": "nodata"}

_CSS = f"""
body {{ font-family: "Segoe UI", "DejaVu Sans", Arial, sans-serif; color: {COLOURS['ink']};
       background: #fbfaf7; margin: 0 auto; max-width: 980px; padding: 16px 20px; line-height: 1.4; }}
h1 {{ font-size: 1.45em; margin: 0 0 2px 0; }}
h2 {{ font-size: 1.15em; margin: 0; }}
h3 {{ font-size: 0.98em; margin: 12px 0 4px 0; }}
.sub {{ color: #5b6770; font-size: 0.9em; margin-bottom: 14px; }}
table {{ border-collapse: collapse; margin: 4px 0 10px 0; font-size: 0.92em; }}
th, td {{ padding: 3px 9px; border-bottom: 1px solid {COLOURS['grid']}; text-align: left; }}
td.n, th.n {{ text-align: right; font-variant-numeric: tabular-nums; }}
.unit {{ border: 1px solid {COLOURS['grid']}; border-radius: 6px; padding: 10px 14px; margin: 14px 0;
         background: #ffffff; }}
.badge {{ display: inline-block; padding: 1px 9px; border-radius: 10px; color: #fff; font-size: 0.85em;
          margin-left: 8px; vertical-align: 2px; }}
.met {{ background: {COLOURS['met']}; }} .short {{ background: {COLOURS['short']}; }}
.nodata {{ background: #7a7a7a; }} .down {{ background: #4d5b66; }}
.verdicts {{ padding-left: 18px; margin: 6px 0 14px 0; }} .verdicts li {{ margin: 3px 0; }}
.verdict {{ font-size: 1.0em; margin: 4px 0 8px 0; }}
.charts {{ display: flex; flex-wrap: wrap; gap: 12px; }}
.caution {{ border-left: 4px solid {COLOURS['short']}; background: #fbf1ec; padding: 6px 10px;
            font-size: 0.9em; margin: 6px 0; }}
.evidence {{ color: #5b6770; font-size: 0.88em; }}
footer {{ color: #5b6770; font-size: 0.82em; margin-top: 18px; }}
svg {{ max-width: 100%; height: auto; }}
@media (max-width: 820px) {{ body {{ padding: 10px; }} table {{ font-size: 0.86em; }} th, td {{ padding: 3px 5px; }} }}
@media print {{ body {{ background: #ffffff; max-width: none; padding: 0; }} .unit {{ break-inside: avoid-page; }}
  .badge {{ border: 1px solid #1f2b33; }} }}
"""


def fig(f: Figure | None, decimals: int = 0, *, unit: bool = True, digits: int | None = None,
        mass: str = "kg") -> str:
    """HTML of one number with its store source; an amount in kg is shown in ``mass`` (the site's
    production mass unit), its stored value kept in data-value."""
    if f is None:
        return "—"
    conv = ""
    if f.unit == "kg" and mass != "kg":
        text = mass_text(f.value, mass)
        if not unit:
            text = text.rsplit(" ", 1)[0]
        conv = f' data-si-unit="kg" data-unit="{escape(mass)}"'
    else:
        text = sig(f.value, digits) if digits else number(f.value, decimals)
        if unit and f.unit and f.unit != "-" and f.known:
            text += f" {f.unit}"
    return (f'<span class="num" data-src="{escape(f.source)}" data-value="{escape(repr(float(f.value)))}"{conv} '
            f'title="{escape(f.source)}">{escape(text)}</span>')


def _summary_table(content: ReportContent) -> str:
    head = ("<tr><th>Unit</th><th>Status</th><th class='n'>Production</th><th class='n'>Target</th>"
            "<th class='n'>Gap</th><th class='n'>7-day production</th><th class='n'>7-day target</th>"
            "<th class='n'>Open alarms</th></tr>")
    rows, m = [], content.mass
    for u in content.units:
        rows.append(
            f"<tr><td>{escape(u.unit)}</td><td><span class='badge {STATUS_CLASS[u.status]}'>{escape(u.status)}"
            f"</span></td><td class='n'>{fig(u.day.get('production_kg'), mass=m)}</td>"
            f"<td class='n'>{fig(u.day.get('target_kg'), mass=m)}</td><td class='n'>{fig(u.day.get('gap_kg'), mass=m)}</td>"
            f"<td class='n'>{fig(u.week['production_kg'], mass=m)}</td><td class='n'>{fig(u.week['target_kg'], mass=m)}</td>"
            f"<td class='n'>{len(u.alarms_open)}</td></tr>")
    return f"<table class='summary'>{head}{''.join(rows)}</table>"


def _verdicts(content: ReportContent) -> str:
    """The verdict sentence of every unit, first on the page (kinetrace.report.verdict)."""
    items = [f"<li><span class='badge {STATUS_CLASS[u.status]}'>{escape(u.status)}</span> "
             f"{escape(u.verdict.sentence)}</li>" for u in content.units if u.verdict is not None]
    return f"<ol class='verdicts'>{''.join(items)}</ol>" if items else ""


def _production_block(u: UnitReport, content: ReportContent) -> str:
    parts = ("gap_feed_kg", "gap_conversion_kg", "gap_downtime_kg", "gap_data_kg")
    names = {"production_kg": "Production", "target_kg": "Target", "gap_kg": "Gap (target − production)",
             "gap_feed_kg": "  (a) feed below plan", "gap_conversion_kg": "  (b) conversion below expectation",
             "gap_downtime_kg": "  (c) downtime", "gap_data_kg": "  (d) data too poor to judge"}
    rows = []
    for c in ("production_kg", "target_kg", "gap_kg", *parts):
        rows.append(f"<tr><td>{escape(names[c])}</td><td class='n'>{fig(u.day.get(c), mass=content.mass)}</td>"
                    f"<td class='n'>{fig(u.week[c], mass=content.mass)}</td></tr>")
    hours = u.day.get("hours_with_data")
    head = (f"<tr><th></th><th class='n'>{escape(content.day.strftime('%d %b %Y'))}</th>"
            f"<th class='n'>7 days ({u.week_days} with data)</th></tr>")
    if "gap_kg" in u.day:
        text = escape(gap_sentence(u.day["gap_kg"].value, {c: u.day[c].value for c in parts}, content.mass))
        if hours is not None and hours.known:
            text += f" Hours with data: {fig(hours, 1, unit=False)}."
    else:
        text = "No production row stored for this day."
    return f"<h3>Production against target</h3><p>{text}</p><table>{head}{''.join(rows)}</table>"


def _alarm_block(u: UnitReport, content: ReportContent) -> str:
    earlier = u.alarms_open.loc[u.alarms_open["detected"] < content.span[0]]
    items = []
    for title, frame in (("Alarms detected this day", u.alarms_today), ("Still open from earlier days", earlier)):
        lines = []
        for _, r in frame.iterrows():
            src = f"alarms|{u.unit}|{r['kind']}|{r['variable']}|{iso(r['detected'])}|magnitude"
            size = "" if pd.isna(r["magnitude"]) else \
                f" Size {fig(Figure(float(r['magnitude']), src, r['magnitude_unit']), digits=3)}."
            lines.append(f"<li>{escape(alarm_sentence(r, content.span[1]))}{size}"
                         f"<div class='evidence'>{escape(r['evidence'])}</div></li>")
        items.append(f"<h3>{title}</h3>" + (f"<ul>{''.join(lines)}</ul>" if lines else "<p>None.</p>"))
    return "".join(items)


def _quality_block(u: UnitReport) -> str:
    if u.quality.empty:
        return ""
    lines = []
    for (tag, p0), rows in u.quality.groupby(["tag", "period_start"], sort=True):
        total = int(rows["count"].sum())
        bad = rows.loc[(rows["measure"] != "good") & (rows["count"] > 0)]
        if bad.empty:
            continue
        key = f"data_quality|{u.unit}|{tag}|{iso(p0)}"
        parts = ", ".join(f"{escape(quality_word(r['measure']))} "
                          f"{fig(Figure(float(r['count']), key + '|' + r['measure'] + '|count'))}"
                          for _, r in bad.iterrows())
        lines.append(f"<li>{escape(tag)}: {number(float(bad['count'].sum()))} of {number(float(total))} "
                     f"readings not used ({parts}).</li>")
    body = f"<ul>{''.join(lines)}</ul>" if lines else "<p>Every reading of the day passed screening.</p>"
    return f"<h3>Data quality</h3>{body}"


def _parameter_block(u: UnitReport) -> str:
    """The newest parameters with readable names, in engineering units, and how each was determined
    (the stored SI value is in each number's data-value)."""
    if u.parameters.empty:
        return ""
    from .names import engineering, parameter_label

    rows = []
    for _, r in u.parameters.iterrows():
        label = parameter_label(r["name"])
        if label is None:
            continue
        key = f"parameters|{u.unit}|{iso(r['as_of'])}|{r['name']}"
        shown = []
        for c in ("value", "ci_low", "ci_high"):
            v, unit = engineering(r["name"], float(r[c]), r["unit_of_measure"])
            text = sig(v, 4)
            conv = (f' data-si-unit="{escape(r["unit_of_measure"])}" data-unit="{escape(unit)}"'
                    if unit != r["unit_of_measure"] else "")
            shown.append(f'<span class="num" data-src="{escape(key)}|{c}" data-value="{escape(repr(float(r[c])))}"'
                         f'{conv} title="{escape(key)}|{c}">{escape(text)}</span>')
        _, unit = engineering(r["name"], float(r["value"]), r["unit_of_measure"])
        how = str(r["method"]).split("; configured")[0]
        rows.append(f"<tr><td>{escape(label)}</td>" + "".join(f"<td class='n'>{c}</td>" for c in shown)
                    + f"<td>{escape('' if unit == '-' else unit)}</td><td>{escape(how)}</td></tr>")
    if not rows:
        return ""
    as_of = when(u.parameters["as_of"].iloc[0])
    return (f"<h3>Rate-law and activity parameters (as of {escape(as_of)})</h3><table><tr><th>Parameter</th>"
            "<th class='n'>Value</th><th class='n'>95 % low</th><th class='n'>95 % high</th><th>Unit</th>"
            f"<th>How it was determined</th></tr>{''.join(rows)}</table>")


def _outlook_block(u: UnitReport, units: dict | None = None) -> str:
    out = []
    if u.forecast is not None:
        f = u.forecast
        key = f"forecasts|{u.unit}|{iso(f['as_of'])}"
        now = fig(Figure(float(f["activity_now"]), f"{key}|activity_now"), digits=3)
        need = fig(Figure(float(f["activity_needed"]), f"{key}|activity_needed"), digits=3)
        out.append(f"<h3>Outlook</h3><p>{escape(f['statement'])}</p>"
                   f"<p>Catalyst activity now {now}; needed for the target {need}.</p>")
    if not u.whatif.empty:
        lines = []
        for _, r in u.whatif.iterrows():
            src = f"whatif|{u.unit}|{iso(r['as_of'])}|{r['lever']}|proposed_value"
            shown = ""
            if not pd.isna(r["proposed_value"]) and r["proposed_value"] != r["current_value"]:
                # in the unit's display unit; the stored SI value stays in data-value
                text = display(float(r["proposed_value"]), r["unit_of_measure"], (units or {}).get(r["unit_of_measure"]))
                si, to = r["unit_of_measure"], text.split(" ", 1)[1]
                conv = f' data-si-unit="{escape(si)}" data-unit="{escape(to)}"' if to != si else ""
                shown = (f' Proposed: <span class="num" data-src="{escape(src)}" data-value='
                         f'"{escape(repr(float(r["proposed_value"])))}"{conv} title="{escape(src)}">{escape(text)}</span>.')
            lines.append(f"<li>{escape(whatif_sentence(r, units))}{shown}"
                         + (f"<div class='evidence'>{escape(r['note'])}</div>" if r["note"] else "") + "</li>")
        out.append(f"<h3>What-if within the safe limits</h3><div class='caution'>{escape(CAUTIONS)}</div>"
                   f"<ul>{''.join(lines)}</ul>")
    return "".join(out)


def _charts(u: UnitReport) -> str:
    charts = []
    if len(u.week_rows):
        charts.append(to_svg(production_chart(u.week_rows, title=f"{u.unit}: daily production and target, 7 days")))
    if u.trend is not None and len(u.trend) >= 2:
        needed = None if u.forecast is None else float(u.forecast["activity_needed"])
        charts.append(to_svg(activity_chart(u.trend, title=f"{u.unit}: catalyst activity, hourly means", needed=needed)))
    if not charts:
        return ""
    caption = ("Bars: production per day (green at or above target, rust below); dark ticks: target. "
               "Line: hourly mean of the stored activity series; dashed: activity needed for the target.")
    return f"<div class='charts'>{''.join(charts)}</div><div class='evidence'>{escape(caption)}</div>"


def _unit_section(u: UnitReport, content: ReportContent) -> str:
    mark = when(u.watermark) if u.watermark is not None else "never"
    note = "" if u.complete else " — the day is not fully processed yet; its figures may change"
    return (f"<section class='unit' id='unit-{escape(u.unit)}'><h2>{escape(u.unit)}"
            f"<span class='badge {STATUS_CLASS[u.status]}'>{escape(u.status)}</span></h2>"
            f"<div class='sub'>Data processed up to {escape(mark)}{escape(note)}</div>"
            + (f"<p class='verdict'>{escape(u.verdict.sentence)}</p>" if u.verdict is not None else "") +
            f"{_charts(u)}{_production_block(u, content)}{_alarm_block(u, content)}{_quality_block(u)}"
            f"{_outlook_block(u, content.display_units.get(u.unit))}{_parameter_block(u)}</section>")


def render_html(content: ReportContent) -> str:
    """The report page.

    Parameters
    ----------
    content : ReportContent
        From :func:`kinetrace.report.content.collect`.

    Returns
    -------
    str
        A complete HTML document, self-contained.
    """
    title = f"Reactor day sheet — {content.day.strftime('%d %b %Y')}"
    site = f"{content.site} · " if content.site else ""
    run = content.last_run
    run_text = (f"last complete run #{run['run_id']} finished {when(run['finished'])}, "
                f"software {run['software_version']}" if run else "no complete run in the store")
    span = f"{when(content.span[0])} to {when(content.span[1])}"
    return (
        "<!DOCTYPE html><html lang='en'><head><meta charset='utf-8'>"
        f"<meta name='viewport' content='width=device-width, initial-scale=1'><title>{escape(title)}</title>"
        f"<style>{_CSS}</style></head><body>"
        f"<h1>{escape(title)}</h1><div class='sub'>{escape(site)}production day {escape(content.day.isoformat())} "
        f"({escape(content.tz)}; {escape(span)}) · {escape(run_text)}</div>"
        f"{_verdicts(content)}{_summary_table(content)}"
        + "".join(_unit_section(u, content) for u in content.units)
        + f"<footer>Every number on this page is read from the results store; its row is named in the "
          f"number's tooltip. Generated {escape(when(content.generated))}.</footer></body></html>"
    )

