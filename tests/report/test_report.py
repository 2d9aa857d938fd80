"""The daily report: renders from the store, its numbers equal the store's, it is self-contained.

Reference for every number: the store itself, read through ``Store`` reads (and pandas
sums for the 7-day totals), independent of the report code; numbers are parsed back from
the HTML (``html.parser``, standard library) and the XLSX (openpyxl).
"""

import math
import re
from html.parser import HTMLParser

import numpy as np
import openpyxl
import pint
import pandas as pd
import pytest

from kinetrace.report import CAUTIONS, SHEETS, attention_reasons, build_report, collect
from kinetrace.report.workbook import COLUMNS
from kinetrace.store import GAP_PARTS, open_store

from .conftest import DAY


class _Numbers(HTMLParser):
    """Collects (data-src, data-value, shown text) of every number span, and all tags and attributes."""

    def __init__(self):
        super().__init__()
        self.numbers, self.tags, self._open, self.units = [], [], None, {}

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        self.tags.append((tag, a))
        if tag == "span" and "data-src" in a:
            self._open = [a["data-src"], a["data-value"], ""]
            if "data-unit" in a:     # shown in an engineering unit: (stored SI unit, shown unit)
                self.units[a["data-src"]] = (a["data-si-unit"], a["data-unit"])

    def handle_data(self, data):
        if self._open is not None:
            self._open[2] += data

    def handle_endtag(self, tag):
        if tag == "span" and self._open is not None:
            self.numbers.append(tuple(self._open))
            self._open = None


@pytest.fixture(scope="module")
def report(filled_store, tmp_path_factory):
    out = tmp_path_factory.mktemp("out")
    files = build_report(filled_store, out, DAY, tz="Europe/London", site="Calder Bank works (demo)")
    parser = _Numbers()
    parser.feed(files.html.read_text(encoding="utf-8"))
    return files, parser


def _ts(text):
    return pd.Timestamp(text)


def store_value(store, src: str) -> float:
    """The stored value a data-src names, looked up independently of the report code."""
    parts = src.split("|")
    table, unit = parts[0], parts[1]
    if table == "daily_production":
        daily = store.daily(unit)
        if parts[-1] == "sum":
            first, last = parts[2].split("..")
            sel = daily.loc[(daily["day"] >= pd.Timestamp(first).date()) & (daily["day"] <= pd.Timestamp(last).date())]
            return float(sel[parts[3]].sum(min_count=1))     # no rows stored: unknown, not zero
        row = daily.loc[daily["day"] == pd.Timestamp(parts[2]).date()]
        assert len(row) == 1, src
        return float(row[parts[3]].iloc[0])
    if table == "alarms":
        al = store.alarms(unit)
        row = al.loc[(al["kind"] == parts[2]) & (al["variable"] == parts[3]) & (al["detected"] == _ts(parts[4]))]
        assert len(row) == 1, src
        return float(row[parts[5]].iloc[0])
    if table == "parameters":
        p = store.parameters(unit, latest=False)
        row = p.loc[(p["as_of"] == _ts(parts[2])) & (p["name"] == parts[3])]
        return float(row[parts[4]].iloc[0])
    if table == "forecasts":
        f = store.forecasts(unit, latest=False)
        return float(f.loc[f["as_of"] == _ts(parts[2]), parts[3]].iloc[0])
    if table == "whatif":
        w = store.whatif(unit, latest=False)
        row = w.loc[(w["as_of"] == _ts(parts[2])) & (w["lever"] == parts[3])]
        return float(row[parts[4]].iloc[0])
    if table == "data_quality":
        q = store.quality(unit)
        row = q.loc[(q["tag"] == parts[2]) & (q["period_start"] == _ts(parts[3])) & (q["measure"] == parts[4])]
        assert len(row) == 1, src
        return float(row[parts[5]].iloc[0])
    raise AssertionError(f"unknown source table in {src}")


def test_report_renders_for_every_unit(report):
    files, parser = report
    html = files.html.read_text(encoding="utf-8")
    for unit in ("R-210", "R-340", "R-455"):
        assert f"id='unit-{unit}'" in html
    statuses = {u.unit: u.status for u in files.content.units}
    # R-210 made 23,358 kg against 24,000 kg (synthetic); R-340 rewritten to 24,500 kg; R-455 has no rows
    assert statuses == {"R-210": "below target", "R-340": "on target", "R-455": "no data"}
    assert html.count("<svg") == 4              # a production and an activity chart for
    assert "Sudden step on R455-FT-201" in html and "feed flow fell by 0.35 m3/h in one step" in html


def test_every_html_number_equals_the_store(report, filled_store):
    files, parser = report
    assert len(parser.numbers) > 60
    for src, value, shown in parser.numbers:
        want = store_value(filled_store, src)
        got = float(value)
        if math.isnan(want):
            assert math.isnan(got) and shown.strip() == "—", src
            continue
        assert got == want, src                   # stored value carried exactly
        # the shown text is the value rounded for display: parse it back
        text = re.sub(r"[^0-9eE.+\-−]", "", shown.split(" ")[0].replace(",", ""))
        if src in parser.units:
            # shown in an engineering unit: the stored SI value converted by pint (independent reference)
            si, unit = parser.units[src]
            want = pint.UnitRegistry().Quantity(want, si.replace("m3", "m**3")).to(unit.replace(" h", "*h")).magnitude
        assert float(text) == pytest.approx(want, rel=5e-3, abs=0.5), (src, shown)


def test_week_totals_are_sums_of_store_rows(report, filled_store):
    files, _ = report
    daily = filled_store.daily("R-210", "2026-11-24", "2026-11-30")
    assert len(daily) == 7
    u = next(u for u in files.content.units if u.unit == "R-210")
    for c in ("production_kg", "target_kg", "gap_kg", *GAP_PARTS):
        assert u.week[c].value == pytest.approx(daily[c].sum(), rel=1e-12)     # pandas sum as reference
    # the four parts of the day's gap add up to the gap (checked by the store on write)
    assert sum(u.day[c].value for c in GAP_PARTS) == pytest.approx(u.day["gap_kg"].value, rel=1e-9)


def test_html_is_self_contained(report):
    files, parser = report
    html = files.html.read_text(encoding="utf-8")
    assert not re.search(r"https?:|//[a-z0-9]|url\(|@import", html, flags=re.I)
    for tag, attrs in parser.tags:
        assert tag not in ("script", "link", "img", "iframe", "object", "embed"), tag
        assert not ({"src", "href"} & set(attrs)), (tag, attrs)


def test_whatif_carries_the_cautions(report):
    files, parser = report
    html = files.html.read_text(encoding="utf-8")
    from html import escape
    assert html.count(escape(CAUTIONS)) == 2          # once per unit with what-if rows
    wb = openpyxl.load_workbook(files.xlsx)
    assert wb["What-if"]["A2"].value == CAUTIONS


def _sheet(wb, name):
    """A sheet as a frame keyed by the workbook's column keys (header row, units row, then data)."""
    ws = wb[name]
    rows = list(ws.iter_rows(values_only=True))
    start = 3 if name == "What-if" else 0
    key = {head: k for k, head, _ in COLUMNS[name]}
    head = [key[h] for h in rows[start] if h is not None]
    body = [r[:len(head)] for r in rows[start + 2:] if any(v is not None for v in r)]
    return pd.DataFrame(body, columns=head)


# openpyxl writes floats as "%.16g" (openpyxl.compat.strings.safe_string), so a number read
# back from the XLSX equals the stored double to 16 significant digits: relative 1e-15.
XLSX_RTOL = 1e-15


def test_xlsx_numbers_equal_the_store(report, filled_store):
    files, _ = report
    wb = openpyxl.load_workbook(files.xlsx)
    assert wb.sheetnames == list(SHEETS)
    # daily production: the week's rows of every unit, as stored
    sheet = _sheet(wb, "Daily production")
    store_rows = filled_store.daily(first_day="2026-11-24", last_day="2026-11-30")
    assert len(sheet) == len(store_rows) == 14
    for c in ("production_kg", "target_kg", "gap_kg", *GAP_PARTS, "hours_with_data", "run_id"):
        np.testing.assert_allclose(sheet[c].to_numpy(dtype=float), store_rows[c].to_numpy(dtype=float),
                                   rtol=XLSX_RTOL, atol=0, err_msg=c)
    assert [d.date() for d in sheet["day"]] == list(store_rows["day"])
    # summary: the day's figures and the week totals
    summ = _sheet(wb, "Summary").set_index("unit")
    day = filled_store.daily(first_day=DAY, last_day=DAY).set_index("unit_id")
    for unit in day.index:
        for c in ("production_kg", "target_kg", "gap_kg", *GAP_PARTS):
            assert summ.loc[unit, c] == pytest.approx(day.loc[unit, c], rel=XLSX_RTOL, abs=0)
        week = store_rows.loc[store_rows["unit_id"] == unit, "production_kg"].sum()
        assert summ.loc[unit, "week_production_kg"] == pytest.approx(week, rel=1e-12)
    assert summ.loc["R-455", "state"] == "no data" and summ.loc["R-455", "open_alarms"] == 1
    # parameters: newest set per unit
    par = _sheet(wb, "Parameters")
    ref = filled_store.parameters(as_of=pd.Timestamp("2026-12-01T00:00Z"))
    assert len(par) == len(ref) == 4
    for c in ("value", "std_error", "ci_low", "ci_high"):
        np.testing.assert_allclose(par[c].to_numpy(dtype=float), ref[c].to_numpy(), rtol=XLSX_RTOL, atol=0)
    assert [pd.Timestamp(t, tz="UTC") for t in par["as_of"]] == list(ref["as_of"])   # site time: UTC here
    # alarms: every row is a stored alarm with the same magnitude and times
    al = _sheet(wb, "Alarms")
    stored = filled_store.alarms()
    for _, r in al.iterrows():
        hit = stored.loc[(stored["unit_id"] == r["unit_id"]) & (stored["kind"] == r["kind"])
                         & (stored["variable"] == r["variable"])
                         & (stored["detected"] == pd.Timestamp(r["detected"], tz="UTC"))]
        assert len(hit) == 1
        assert hit["magnitude"].iloc[0] == pytest.approx(r["magnitude"], rel=XLSX_RTOL, abs=0)
        assert hit["state"].iloc[0] == r["state"]
    open_now = stored.loc[stored["state"] == "open"]
    assert set(open_now["unit_id"] + open_now["detected"].astype(str)) <= \
        set(al["unit_id"] + al["detected"].map(lambda t: str(pd.Timestamp(t, tz="UTC"))))


def test_quality_counts_in_html_and_xlsx(report, filled_store):
    files, parser = report
    srcs = [n[0] for n in parser.numbers if n[0].startswith("data_quality|")]
    assert srcs and all(s.endswith("|count") for s in srcs)     # values checked in the test above
    q = filled_store.quality(start="2026-11-30T00:00Z", end="2026-12-01T00:00Z")
    sheet = _sheet(openpyxl.load_workbook(files.xlsx), "Data quality")
    assert len(sheet) == len(q) == 18                           # 2 units x 3 tags x 3 counts (synthetic)
    assert sheet["count"].tolist() == q["count"].tolist()
    assert sheet["measure"].tolist() == q["measure"].tolist()


def test_attention_reasons_name_units_below_target_or_with_open_alarms(report):
    files, _ = report
    reasons = attention_reasons(files.content)
    # the synthetic R-210 is below target on each of the eight stored days
    assert "unit R-210: below target for 8 days (since 23 Nov)" in reasons
    # each open alarm is named, not counted
    assert "unit R-455: no data on 30 Nov" in reasons
    assert "unit R-455: open alarm: sudden step in R455-FT-201 since 30 Nov" in reasons
    assert not any(r.startswith("unit R-340: on target") for r in reasons)


def test_report_without_whatif_has_no_suggestion(tmp_path):
    store = open_store(f"sqlite:///{tmp_path / 'r.sqlite'}")
    a = pd.Timestamp("2026-11-30T00:00Z")
    from tests.store.synth import FP, daily_frame
    with store.write_run((a, a + pd.Timedelta("1D")), config_fingerprint=FP) as run:
        run.write_daily("R-210", daily_frame([DAY]))
    files = build_report(store, tmp_path / "out")
    html = files.html.read_text(encoding="utf-8")
    assert "What-if" not in html and files.content.day == DAY
    assert collect(store).units[0].week_days == 1


@pytest.mark.postgres
def test_report_is_the_same_from_postgresql_and_sqlite(tmp_path, pg_db_url):
    """Every number of the page and every cell of the workbook agree between the two back ends."""
    from .conftest import fill

    pages, books = [], []
    for name, url in (("lite", f"sqlite:///{tmp_path / 'r.sqlite'}"), ("pg", pg_db_url)):
        store = fill(open_store(url))
        files = build_report(store, tmp_path / name, DAY)
        p = _Numbers()
        p.feed(files.html.read_text(encoding="utf-8"))
        pages.append(p.numbers)
        wb = openpyxl.load_workbook(files.xlsx)
        books.append({ws.title: [r for r in ws.iter_rows(values_only=True)] for ws in wb.worksheets})
        store.close()
    assert pages[0] == pages[1] and len(pages[0]) > 40
    assert books[0] == books[1]


def test_alert_reasons_from_the_store(filled_store):
    from kinetrace.report import alert_reasons

    assert alert_reasons(filled_store, DAY, tz="Europe/London") == attention_reasons(
        collect(filled_store, DAY, tz="Europe/London"))


def test_workbook_for_operations(report):
    """Verdict sheet first; readable headers over a units row, both frozen; state colours; native
    charts of production against target and of activity; one table per sheet."""
    from kinetrace.report.workbook import STATE_FILL

    files, _ = report
    wb = openpyxl.load_workbook(files.xlsx)
    assert wb.sheetnames[0] == "Verdict"
    for ws in wb.worksheets:
        first = 4 if ws.title == "What-if" else 1
        heads = [c.value for c in ws[first] if c.value is not None]
        assert heads and not any("_" in h for h in heads), (ws.title, heads)   # readable, not snake_case
        assert ws.freeze_panes == f"B{first + 2}", ws.title
    v = _sheet(wb, "Verdict").set_index("unit")
    assert v.loc["R-210", "sentence"] == next(u.verdict.sentence for u in files.content.units if u.unit == "R-210")
    ws = wb["Verdict"]
    for row in ws.iter_rows(min_row=3):
        state = row[1].value
        assert row[1].fill.fgColor.rgb.endswith(STATE_FILL[state]), state
    assert wb["Daily production"]["C2"].value == "kg"                     # the units row
    assert len(wb["Daily production"]._charts) == 2                       # have daily rows
    assert len(wb["Activity"]._charts) >= 1


def test_amounts_in_the_sites_production_unit(filled_store, tmp_path):
    """site.production_unit = "t/d": the page gives the day's amounts in t; each number keeps its
    stored kg and is checked against pint's conversion."""
    files = build_report(filled_store, tmp_path, DAY, production_unit="t/d")
    p = _Numbers()
    p.feed(files.html.read_text(encoding="utf-8"))
    shown = {src: text for src, _, text in p.numbers}
    src = "daily_production|R-210|2026-11-30|production_kg"
    want = pint.UnitRegistry().Quantity(filled_store.daily("R-210", DAY, DAY)["production_kg"].iloc[0], "kg").to("t")
    assert p.units[src] == ("kg", "t") and shown[src] == f"{want.magnitude:,.2f} t"
    assert "Short by" in files.html.read_text(encoding="utf-8") and " t:" in files.html.read_text(encoding="utf-8")
