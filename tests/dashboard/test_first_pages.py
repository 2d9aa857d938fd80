"""The morning verdict and the reactor trends under AppTest, checked against the store (read back
through kinetrace.store's own API), hand-worked dates and pint for the unit conversions.

The test stores are filled by tests/dashboard/fill.py: the last result is 2026-11-30 23:00 UTC, the
forecast says the unit's activity crosses the need 38 days after 2026-12-01 (interval 30 to 47 days;
R-220 ten days later), an open bias alarm detected 5 days before the last result.
"""

import json
import shutil
import tomllib

import pandas as pd
import pint
import pyarrow as pa
import pytest
import sqlalchemy as sa
from streamlit.testing.v1 import AppTest

from kinetrace.report import collect
from kinetrace.report.verdict import alarm_words
from kinetrace.store import open_store

from .conftest import APP, END, ROOT

UREG = pint.UnitRegistry()


def app(monkeypatch, url, page=None, config=None) -> AppTest:
    monkeypatch.setenv("KINETRACE_STORE_URL", url)
    if config is not None:
        monkeypatch.setenv("KINETRACE_CONFIG", str(config))
    at = AppTest.from_file(str(APP), default_timeout=90).run()
    if page:
        at.switch_page(f"views/{page}.py").run()
    assert not at.exception, [e.message for e in at.exception]
    return at


def texts(at) -> list[str]:
    return [m.value for m in at.markdown] + [c.value for c in at.caption]


def datasets(chart) -> list[pd.DataFrame]:
    return [pa.ipc.open_stream(d.data.data).read_all().to_pandas() for d in chart.proto.datasets]


def spec(chart) -> dict:
    return json.loads(chart.proto.spec)


def x_domains(chart) -> set:
    out = set()
    for layer in spec(chart)["layer"]:
        dom = layer.get("encoding", {}).get("x", {}).get("scale", {}).get("domain")
        if dom:
            out.add(tuple(dom))
    return out


# ------------------------------------------------------------------------------------- first page
def test_verdict_page_says_which_unit_how_long_and_why(monkeypatch, hourly_url):
    store = open_store(hourly_url, create=False)
    at = app(monkeypatch, hourly_url)
    shown = texts(at)
    # the report's sentence, built from the same store in the demo site's time zone (Europe/London, t/d)
    for u in collect(store, tz="Europe/London", production_unit="t/d").units:
        assert any(u.verdict.sentence in t for t in shown), u.verdict.sentence
    # a status mark of shape and colour with its word, per unit
    badges = [t for t in shown if "<svg" in t]
    assert len(badges) == 2 and all("on target</span>" in b and "<path" in b for b in badges)
    # forecast with its interval, hand-worked: 2026-12-01 + 38 d = 8 Jan 2027, +30 d = 31 Dec, +47 d = 17 Jan
    assert any("expected 8 Jan 2027 (interval 31 Dec 2026 to 17 Jan 2027)" in t for t in shown)
    assert any("expected 18 Jan 2027 (interval 10 Jan 2027 to 27 Jan 2027)" in t for t in shown)
    # open alarms by name and how long open: detected 5 days before the last result
    for unit in ("R-210", "R-220"):
        a = store.alarms(unit, state="open").iloc[0]
        assert any(f"{alarm_words(a)}: open 5 d (detected 25 Nov 2026 23:00 GMT)" in t for t in shown), unit
    # which run: the only (complete) run; no raw UTC offsets anywhere
    assert any("Results of run 1, the last complete run" in t for t in shown)
    assert not any("+00:00" in t for t in shown)
    # two sparklines per unit, 30 daily points and 30 days of hourly activity
    charts = at.get("vega_lite_chart")
    assert len(charts) == 4
    prod = [d for c in charts for d in datasets(c) if "production" in d.columns and "state" in d.columns]
    assert len(prod) == 2 and all(len(d) == 30 for d in prod)


def test_verdict_page_period_control(monkeypatch, hourly_url):
    daily = open_store(hourly_url, create=False).daily("R-210")
    at = app(monkeypatch, hourly_url)
    label = "R-210 produced"
    get = lambda: [m.value for m in at.metric if label in m.label][0]  # noqa: E731
    assert get() == f"{daily['production_kg'].iloc[-1] / 1000:.2f}"
    at.radio(key="glance_period").set_value("last 7 days").run()
    assert get() == f"{daily['production_kg'].iloc[-7:].mean() / 1000:.2f}"


def test_verdict_page_reads_the_last_complete_run(monkeypatch, hourly_url, tmp_path):
    """A newer run killed mid-way (left 'running') and one marked abandoned: the page names the last
    complete run and says nothing of the others is shown."""
    path = tmp_path / "stale.sqlite"
    shutil.copy(hourly_url.removeprefix("sqlite:///"), path)
    eng = sa.create_engine(f"sqlite:///{path}")
    with eng.begin() as c:
        row = dict(c.execute(sa.text("SELECT * FROM runs WHERE run_id = 1")).mappings().one())
        for rid, status in ((2, "abandoned"), (3, "running")):
            c.execute(sa.text("INSERT INTO runs (run_id, started, finished, status, config_fingerprint, window_start, "
                              "window_end, software_version, message) VALUES (:i, :s, NULL, :st, :f, :ws, :we, :v, '')"),
                      {"i": rid, "s": row["started"] + rid * 3_600_000_000, "st": status, "f": row["config_fingerprint"],
                       "ws": row["window_start"], "we": row["window_end"], "v": row["software_version"]})
    eng.dispose()
    at = app(monkeypatch, f"sqlite:///{path}")
    run = [t for t in texts(at) if t.startswith("Results of run")]
    assert len(run) == 1 and run[0].startswith("Results of run 1, the last complete run"), run
    assert "Run 2 is abandoned" in run[0] and "Run 3 is still running or stopped without a word" in run[0]


def test_verdict_page_below_target_since(monkeypatch, tmp_path):
    """Every day below target: the page says since when instead of a forecast date."""
    from tests.dashboard import fill

    make = fill.daily_rows

    def short(unit, frame):                    # every day's target 25 % above what the day made
        d = make(unit, frame)
        d["target_kg"] = 1.25 * d["production_kg"]
        d["gap_kg"] = d["target_kg"] - d["production_kg"]
        for part, share in (("gap_feed_kg", 0.1), ("gap_conversion_kg", 0.7), ("gap_downtime_kg", 0.1),
                            ("gap_data_kg", 0.1)):
            d[part] = share * d["gap_kg"]
        return d

    monkeypatch.setattr(fill, "daily_rows", short)
    url = f"sqlite:///{tmp_path / 'below.sqlite'}"
    fill.fill_store(url, start="2026-11-01T00:00Z", end="2026-12-01T00:00Z", units=("R-210",)).close()
    at = app(monkeypatch, url)
    shown = texts(at)
    # hand-worked: the 30 complete days 1-30 Nov are all below target
    assert any("**First day below target:** below target since 1 Nov 2026 (30 days)" in t for t in shown)
    assert any("below target</span>" in t and "<svg" in t for t in shown)
    assert any("R-210 below target for 30 days (since 1 Nov)" in t for t in shown)


# ---------------------------------------------------------------------------------------- trends
def test_trends_panels_share_one_axis_and_show_context(monkeypatch, hourly_url):
    store = open_store(hourly_url, create=False)
    at = app(monkeypatch, hourly_url, "unit")
    at.radio(key="kt_range").set_value("last 30 days").run()
    charts = at.get("vega_lite_chart")
    assert len(charts) == 7                     # conversion, k_ref, activity, production, temperature, feed, volume
    domains = set().union(*(x_domains(c) for c in charts))
    assert len(domains) == 1                    # one time axis for every panel
    (lo, hi), = domains
    # the axis reaches the stored latest crossing (2026-12-01 + 47 d) beyond the last result, in site time
    fc = store.forecasts("R-210").iloc[-1]
    assert pd.Timestamp(hi) > fc["miss_latest"].tz_convert("Europe/London").tz_localize(None)
    # the forecast line of the activity panel ends at the activity needed on the expected crossing
    act = [d for d in datasets(charts[2]) if "series" in d.columns and (d["series"] == "forecast").any()][0]
    f = act[act["series"] == "forecast"]
    assert f["value"].iloc[-1] == pytest.approx(fc["activity_needed"], rel=1e-9)
    assert f["t"].iloc[-1] == fc["miss_expected"].tz_convert("Europe/London").tz_localize(None)
    # the unsteady stretches are shaded: one per gap between the store's steady windows in the range
    end = END - pd.Timedelta(hours=1) + pd.Timedelta("1us")
    steady = store.series("R-210", ["steady"], end - pd.Timedelta(days=30), end)["steady"]
    gaps = int(((steady == 0) & (steady.shift(fill_value=1) == 1)).sum())
    shaded = [d for d in datasets(charts[0]) if "what" in d.columns and (d["what"] == "not steady").any()]
    assert len(shaded) == 1 and len(shaded[0]) == gaps > 0
    # alarm onsets marked with the alarm's words (both R-210 alarms have their onset in the range)
    ev = [d for d in datasets(charts[0]) if "event" in d.columns and (d["event"] == "alarm onset").any()][0]
    alarms = store.alarms("R-210")
    assert sorted(ev["t"]) == sorted(alarms["onset"].dt.tz_convert("Europe/London").dt.tz_localize(None))
    assert all(any(alarm_words(a) in w for w in ev["what"]) for a in alarms.to_dict("records"))
    # k_ref in engineering units: 1/s -> 1/h by pint; whole axis title, ticks without long decimals
    k = store.series("R-210", ["k_ref:addition"], end - pd.Timedelta(days=30), end)["k_ref:addition"]
    per_h = UREG.Quantity(k[steady == 1].mean(), "1/s").to("1/h").magnitude     # steady rows only (the default)
    assert [m.value for m in at.metric if "Mean k_ref" in m.label] == [f"{per_h:.4g}"]
    y = [lay["encoding"]["y"] for lay in spec(charts[1])["layer"] if "y" in lay.get("encoding", {})
         and "axis" in lay["encoding"]["y"]]
    assert y and all(e["title"] == "k_ref [1/h]" and e["axis"]["format"] == ".3~g" for e in y)
    # production in the site's unit (t/d): kg/s -> t/d by pint
    p = [d for d in datasets(charts[3]) if "series" in d.columns and (d["series"] == "target").any()][0]
    target = p.loc[p["series"] == "target", "value"].iloc[0]
    assert target == pytest.approx(UREG.Quantity(17500.0 / 86400.0, "kg/s").to("t/d").magnitude, rel=1e-12)


def test_trends_controls(monkeypatch, hourly_url):
    at = app(monkeypatch, hourly_url, "unit")
    at.radio(key="kt_range").set_value("last 7 days").run()
    at.toggle(key="trend_reach").set_value(False).run()
    (lo, hi), = set().union(*(x_domains(c) for c in at.get("vega_lite_chart")))
    last = END - pd.Timedelta(hours=1) + pd.Timedelta("1us")          # the range is half-open after the last result
    assert pd.Timestamp(hi) == last.tz_convert("Europe/London").tz_localize(None)
    assert pd.Timestamp(lo) == (last - pd.Timedelta(days=7)).tz_convert("Europe/London").tz_localize(None)
    at.toggle(key="trend_reach").set_value(True).run()
    (_, hi2), = set().union(*(x_domains(c) for c in at.get("vega_lite_chart")))
    assert pd.Timestamp(hi2) > pd.Timestamp(hi)
    at.selectbox(key="kt_unit").set_value("R-220").run()
    assert not at.exception and len(at.get("vega_lite_chart")) == 7


def test_trends_catalyst_change_and_plan_from_the_configuration(monkeypatch, hourly_url, tmp_path):
    raw = (ROOT / "config" / "demo_plant.toml").read_text(encoding="utf-8")
    marker = 'catalysed = ["addition"]                 # the dimerisation'
    assert marker in raw
    cfg = tmp_path / "plant.toml"
    cfg.write_text(raw.replace(marker, 'catalyst_changes = [2026-11-20T08:00:00Z]\n' + marker), encoding="utf-8")
    value, unit = tomllib.loads(raw)["units"][0]["plan"]["feed_flow"].split(" ", 1)     # "4.9 m3/h"
    at = app(monkeypatch, hourly_url, "unit", config=cfg)
    at.radio(key="kt_range").set_value("last 30 days").run()
    charts = at.get("vega_lite_chart")
    ev = [d for d in datasets(charts[0]) if "event" in d.columns and (d["event"] == "catalyst change").any()]
    assert len(ev) == 1 and list(ev[0]["t"]) == [pd.Timestamp("2026-11-20T08:00:00")]   # GMT = UTC in November
    levels = [d for d in datasets(charts[5]) if "label" in d.columns and (d["label"] == "plan feed flow").any()]
    assert levels[0]["value"].iloc[0] == pytest.approx(UREG.Quantity(float(value), unit.replace("m3", "m**3")).to("m**3/h").magnitude, rel=1e-9)
