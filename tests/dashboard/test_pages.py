"""Every page under streamlit.testing.v1.AppTest: renders, widgets change what is shown, and the
numbers shown equal the store's (read back here through kinetrace.store's own API)."""

import pandas as pd
import pyarrow as pa
import pytest
from streamlit.testing.v1 import AppTest

from kinedash.arrhenius import steady_points
from kinetrace.store import open_store

from .conftest import APP, END, ROOT

PAGES = ["overview", "unit", "balances", "kinetics", "quality", "whatif"]


def app(monkeypatch, url, page=None) -> AppTest:
    monkeypatch.setenv("KINETRACE_STORE_URL", url)
    at = AppTest.from_file(str(APP), default_timeout=60).run()
    if page and page != "overview":
        at.switch_page(f"views/{page}.py").run()
    assert not at.exception, [e.message for e in at.exception]
    return at


def chart_rows(chart) -> int:
    """Rows of data one chart ships to the browser (all its Arrow datasets)."""
    p = chart.proto
    n = sum(pa.ipc.open_stream(d.data.data).read_all().num_rows for d in p.datasets)
    return n + (pa.ipc.open_stream(p.data.data).read_all().num_rows if p.data.data else 0)


def metric(at, label_part: str) -> str:
    got = [m.value for m in at.metric if label_part in m.label]
    assert len(got) == 1, (label_part, [m.label for m in at.metric])
    return got[0]


@pytest.mark.parametrize("page", PAGES)
def test_page_renders_without_error(monkeypatch, hourly_url, page):
    at = app(monkeypatch, hourly_url, page)
    assert not at.error
    assert len(at.title) == 1


def test_overview_numbers_and_period(monkeypatch, hourly_url):
    store = open_store(hourly_url, create=False)
    daily = store.daily("R-210")
    at = app(monkeypatch, hourly_url)
    assert metric(at, "R-210 produced") == f"{daily['production_kg'].iloc[-1] / 1000:.2f}"
    at.radio(key="glance_period").set_value("last 7 days").run()
    assert metric(at, "R-210 produced") == f"{daily['production_kg'].iloc[-7:].mean() / 1000:.2f}"
    shown = [m.value for m in at.markdown] + [c.value for c in at.caption]
    n_open = len(store.alarms("R-210", state="open"))
    assert any(f"**Open alarms ({n_open}):**" in t and "R210-FT-101" in t for t in shown)
    fc = store.forecasts("R-210").iloc[-1]          # the activity the forecast starts from, as stored
    assert any(t.startswith(f"Catalyst activity {fc['activity_now']:.3f} against {fc['activity_needed']:.3f} needed")
               for t in shown)


def test_unit_page_range_and_unit_change_numbers(monkeypatch, hourly_url):
    store = open_store(hourly_url, create=False)
    at = app(monkeypatch, hourly_url, "unit")
    for unit, rng, days in (("R-210", "last 30 days", 30), ("R-210", "last 7 days", 7), ("R-220", "last 7 days", 7)):
        at.selectbox(key="kt_unit").set_value(unit).run()
        at.radio(key="kt_range").set_value(rng).run()
        assert not at.exception
        f = store.series(unit, ["conversion", "activity", "steady"], END - pd.Timedelta(hours=1)
                         - pd.Timedelta(days=days) + pd.Timedelta("1us"), END)
        assert metric(at, "Mean conversion") == f"{f['conversion'].mean():.4f}", (unit, rng)
        steady_mean = f.loc[f["steady"] == 1, "activity"].mean()
        assert metric(at, "Mean catalyst activity") == f"{steady_mean:.4f}"          # steady rows only
        at.toggle(key="trend_steady_only").set_value(False).run()
        assert metric(at, "Mean catalyst activity") == f"{f['activity'].mean():.4f}"  # every row
        assert f["activity"].mean() != steady_mean
        at.toggle(key="trend_steady_only").set_value(True).run()
    charts = at.get("vega_lite_chart")                   # 4 result panels and 3 of operating context
    assert len(charts) == 7 and all(0 < chart_rows(c) <= 5000 for c in charts)


def test_unit_page_bucketed_range_equals_store(monkeypatch, minute_url):
    store = open_store(minute_url, create=False)
    at = app(monkeypatch, minute_url, "unit")
    at.radio(key="kt_range").set_value("everything").run()
    conv = store.series("R-210", ["conversion"])["conversion"]
    assert metric(at, "Mean conversion") == f"{conv.mean():.4f}"
    assert any("buckets of the range" in c.value for c in at.caption)
    charts = at.get("vega_lite_chart")                    # 21,600 rows per series, at most ~5,000 shipped
    rows = [chart_rows(c) for c in charts]
    assert len(charts) == 7 and all(500 <= n <= 5000 for n in rows), rows


def test_balances_numbers_and_tag_picker(monkeypatch, hourly_url):
    store = open_store(hourly_url, create=False)
    at = app(monkeypatch, hourly_url, "balances")
    gt = store.series("R-210", ["global_test"], END - pd.Timedelta(days=7) - pd.Timedelta(hours=1)
                      + pd.Timedelta("1us"), END)["global_test"]
    assert metric(at, "Largest global-test") == f"{gt.max():.3g}"
    assert metric(at, "Open sensor alarms") == "1"
    # default: the flagged sensor's measurement first (open bias alarm on R210-FT-101, the feed flow
    # meter of the demo configuration), then others with values in the range; readable names
    assert at.multiselect(key="bal_tags").value[0] == "feed_flow"
    assert any("feed flow (R210-FT-101) - flagged" == o for o in at.multiselect(key="bal_tags").options)
    before = [c.value for c in at.caption if c.value.startswith("Mean adjustment")]
    at.multiselect(key="bal_tags").set_value(["outlet_flow"]).run()
    after = [c.value for c in at.caption if c.value.startswith("Mean adjustment")]
    assert before != after and "feed flow" not in after[0] and "outlet flow" in after[0]
    rejected = store.series("R-210", ["global_test_alarm"], END - pd.Timedelta(days=7) - pd.Timedelta(hours=1)
                            + pd.Timedelta("1us"), END)["global_test_alarm"].sum()
    assert metric(at, "Intervals rejected") == f"{rejected:.0f}"
    # limit drawn at the chi-square 95 % quantile of 3 dof: 7.815 (Abramowitz & Stegun 1964, table 26.8)
    assert "limit 7.81" in [m for m in at.metric if "Largest global-test" in m.label][0].delta
    at.selectbox(key="kt_unit").set_value("R-220").run()                # the other accepted names
    assert metric(at, "Open sensor alarms") == "1" and not at.exception


def test_kinetics_numbers_and_range(monkeypatch, hourly_url):
    store = open_store(hourly_url, create=False)
    at = app(monkeypatch, hourly_url, "kinetics")
    ea = store.parameters("R-210").set_index("name").loc["activation_energy:addition"]
    assert metric(at, "Ea of the joint fit") == f"{ea['value'] / 1000:.1f}"
    assert metric(at, "Its 95 % interval") == f"{ea['ci_low'] / 1000:.1f} to {ea['ci_high'] / 1000:.1f}"
    end = END - pd.Timedelta(hours=1) + pd.Timedelta("1us")
    n90 = len(steady_points(store, "R-210", "k_apparent:addition", end - pd.Timedelta(days=90), end))
    assert metric(at, "Steady periods in range") == str(n90)
    charts = at.get("vega_lite_chart")
    assert len(charts) == 2               # Arrhenius plot (the invented temperatures span > 3 K) and the weights
    at.radio(key="kin_range").set_value("last 7 days").run()
    n7 = len(steady_points(store, "R-210", "k_apparent:addition", end - pd.Timedelta(days=7), end))
    assert metric(at, "Steady periods in range") == str(n7) and n7 != n90
    # the rate-law table: AICc differences and Akaike weights (Burnham & Anderson 2002), best first
    laws = [d.value for d in at.dataframe if "Akaike weight" in d.value.columns][0]
    assert laws["AICc difference to the best"].tolist() == [0.0, 13.6] and laws["Akaike weight"].iloc[0] == 0.999
    at.radio(key="kin_range").set_value("last 24 h").run()             # too few steady periods: no plot, said
    assert any("No Arrhenius plot" in i.value or "No steady window" in i.value for i in at.info)


def test_kinetics_narrow_span_is_refused(monkeypatch, tmp_path):
    """A 2 K span (the joint fit's threshold is 3 K): the page says so and draws no Arrhenius plot."""
    from tests.dashboard import fill

    make = fill.unit_series

    def narrow(*a, **kw):                      # the invented temperatures squeezed into 1 K
        f = make(*a, **kw)
        t = f["temperature"]
        f["temperature"] = 343.15 + (t - t.mean()) / (t.max() - t.min())
        return f

    monkeypatch.setattr(fill, "unit_series", narrow)
    url = f"sqlite:///{tmp_path / 'narrow.sqlite'}"
    fill.fill_store(url, start="2026-11-01T00:00Z", end="2026-12-01T00:00Z", units=("R-210",)).close()
    at = app(monkeypatch, url, "kinetics")
    text = " ".join(i.value for i in at.info)
    assert "No Arrhenius plot" in text and "K only (the joint fit needs 3 K" in text
    assert not any("Arrhenius" in str(c.proto.spec) for c in at.get("vega_lite_chart"))


def test_quality_numbers_and_period(monkeypatch, hourly_url):
    store = open_store(hourly_url, create=False)
    q = store.quality("R-210")
    at = app(monkeypatch, hourly_url, "quality")
    rules = ~q["measure"].isin(["rows_read", "good", "intervals", "missing_intervals"])
    newest = q[(q["period_start"] == q["period_start"].max())]
    assert metric(at, "Readings flagged") == str(newest.loc[rules, "count"].sum())
    assert metric(at, "Readings screened") == str(newest.loc[newest["measure"] == "rows_read", "count"].sum())
    older = q[(q["period_start"] == q["period_start"].min())]
    at.selectbox(key="dq_period").set_value(q["period_start"].min().strftime("%Y-%m-%d %H:%M")).run()
    assert metric(at, "Readings flagged") == str(older.loc[rules, "count"].sum())
    gaps = [d.value for d in at.dataframe][-1]
    # readable names: the tag with what it measures (demo configuration), the rule in words, worst first
    assert gaps.index[0] == "R210-AT-105, outlet concentration of MMP (online NIR, product)"
    assert gaps.iloc[0]["without a value"] == 5
    table = [d.value for d in at.dataframe][0]
    assert table["flagged"].is_monotonic_decreasing and "quality not good" in table.columns
    assert not any("_" in c for c in table.columns)


def _library_prediction(store, unit, setting):
    """The prediction of kinetrace.monitor.whatif for the unit as the check stored it, built here from the
    configuration and the store without the dashboard's code."""
    from kinetrace.config import load_config
    from kinetrace.config.model import unit_model
    from kinetrace.monitor.whatif import model_from_parameters, predict_setting, production_at, volume_limits_from_level

    cfg = load_config(ROOT / "config" / "demo_plant.toml")
    u = next(x for x in cfg.units if x.id == unit)
    model = model_from_parameters(unit_model(u), store.parameters(unit))
    activity = float(store.forecasts(unit)["activity_now"].iloc[-1])
    vol = volume_limits_from_level(model, u.limits.level)
    p = predict_setting(model, activity=activity, volume_limits=vol, **setting)
    # the same production as the check's own function (production_at), at V = tau Q
    direct = production_at(model, activity=activity, feed_flow=setting["feed_flow"],
                           temperature=setting["temperature"], volume=setting["residence_time"] * setting["feed_flow"])
    assert p.production == pytest.approx(direct, rel=1e-12)
    return p


def test_whatif_numbers_equal_the_library_for_three_settings(monkeypatch, hourly_url):
    monkeypatch.setenv("KINETRACE_CONFIG", str(ROOT / "config" / "demo_plant.toml"))
    store = open_store(hourly_url, create=False)
    at = app(monkeypatch, hourly_url, "whatif")
    text = " ".join(x.value for x in at.warning)
    for phrase in ("Estimates only", "safe operating envelope", "relief and runaway studies",
                   "management-of-change", "local codes and licensed engineering practice"):
        assert phrase in text
    assert len(at.warning) == 1                                    # the caution once
    t, q, tau = at.slider(key="wi_temperature"), at.slider(key="wi_feed_flow"), at.slider(key="wi_residence_time")
    # the inputs offer the configured safe range only (demo plant: 45-85 degC, 1.5-7.0 m3/h)
    assert (t.min, t.max) == (45.0, 85.0) and (q.min, q.max) == (1.5, 7.0)
    for temp_c, flow_h, tau_h in ((70.0, 4.0, 2.5), (80.5, 6.2, 1.5), (45.0, 1.5, 9.0)):
        at.slider(key="wi_temperature").set_value(temp_c).run()
        at.slider(key="wi_feed_flow").set_value(flow_h).run()
        hi = at.slider(key="wi_residence_time").max           # the hold-up range at this feed flow
        lo = at.slider(key="wi_residence_time").min
        tau_h = min(max(tau_h, lo), hi)
        at.slider(key="wi_residence_time").set_value(tau_h).run()
        assert not at.exception
        p = _library_prediction(store, "R-210", {"temperature": temp_c + 273.15, "feed_flow": flow_h / 3600,
                                                 "residence_time": tau_h * 3600})
        assert metric(at, "Predicted conversion") == f"{p.conversion:.4f}"
        assert metric(at, "Predicted production") == f"{p.production_mass * 86.4:.2f}"        # kg/s -> t/d
        margins = [d.value for d in at.dataframe if "margin to the low limit" in d.value.columns][0]
        assert margins.iloc[0]["margin to the low limit"] == f"{p.margins['temperature'][0]:.3g} degC"
        assert margins.iloc[1]["margin to the high limit"] == f"{p.margins['feed_flow'][1] * 3600:.3g} m3/h"
    # the 5.1-14.1 m3 hold-up (level 30-90 % on the level-volume table) bounds the residence time at 1.5 m3/h
    assert (lo, hi) == (pytest.approx(5.1 / 1.5, abs=0.01), pytest.approx(14.1 / 1.5, abs=0.01))
    at.button(key="wi_reset").click().run()                          # back to the present operation
    w = store.whatif("R-210").set_index("lever")
    # on the input's 0.1 K grid: what the slider shows is what is evaluated
    assert at.slider(key="wi_temperature").value == pytest.approx(w.loc["temperature", "current_value"] - 273.15, abs=0.05)
    at.selectbox(key="kt_unit").set_value("R-220").run()             # the other unit, fixed hold-up: no tau input
    assert not at.exception and metric(at, "Residence time")


def test_whatif_refuses_a_setting_outside_the_limits():
    import numpy as np

    from kinetrace.config.model import RateLawModel, UnitModel
    from kinetrace.errors import KinetraceError
    from kinetrace.monitor.whatif import predict_setting

    law = RateLawModel("power_law", 0.01, 60e3, 350.0, {"orders": {"A": 1.0}})
    m = UnitModel("R-1", ("A", "P"), np.array([0.1, 0.1]), ("r1",), np.array([[-1.0], [1.0]]), {"r1": law}, "A", "P",
                  0.5, 0.4, None, {"A": 1000.0}, (), (330.0, 370.0), (1e-4, 2e-3))
    # first order in a CSTR: X = k tau / (1 + k tau) (Fogler 2016, eq. 5-15 form); k tau = 4 -> 0.8
    ok = predict_setting(m, activity=1.0, temperature=350.0, feed_flow=1e-3, residence_time=400.0,
                         volume_limits=(0.2, 0.6))
    assert ok.conversion == pytest.approx(0.8, rel=1e-12)
    for bad in ({"temperature": 371.0}, {"feed_flow": 2.1e-3}, {"residence_time": 700.0}):
        kw = {"temperature": 350.0, "feed_flow": 1e-3, "residence_time": 400.0, **bad}
        with pytest.raises(KinetraceError, match="outside the safe range"):
            predict_setting(m, activity=1.0, volume_limits=(0.2, 0.6), **kw)


@pytest.mark.parametrize("page", PAGES)
def test_empty_store_state(monkeypatch, empty_url, page):
    at = app(monkeypatch, empty_url, page)
    assert not at.error
    assert any("not available yet" in i.value or "No results yet" in i.value for i in at.info)


@pytest.mark.parametrize("page", PAGES)
def test_unreachable_store_state(monkeypatch, tmp_path, page):
    at = app(monkeypatch, f"sqlite:///{tmp_path / 'not_there.sqlite'}", page)
    assert any("Results store unavailable" in e.value for e in at.error)
    assert not (tmp_path / "not_there.sqlite").exists()


def test_missing_variables_and_no_steady_window(monkeypatch, bare_url):
    at = app(monkeypatch, bare_url, "balances")
    infos = " ".join(i.value for i in at.info)
    assert "Balance closure: not available yet" in infos and "Global-test statistic: not available yet" in infos
    at = app(monkeypatch, bare_url, "unit")
    at.selectbox(key="kt_unit").set_value("R-220").run()
    assert any("No steady window of R-220" in i.value for i in at.info)
    at.switch_page("views/kinetics.py").run()
    assert any("No steady window of R-220" in i.value for i in at.info)
    assert any("Fitted parameters: not available yet" in i.value for i in at.info)


def test_range_from_address_and_kept_across_pages(monkeypatch, hourly_url):
    store = open_store(hourly_url, create=False)
    monkeypatch.setenv("KINETRACE_STORE_URL", hourly_url)
    at = AppTest.from_file(str(APP), default_timeout=60)
    at.query_params["range"] = "7d"
    at.run()
    at.switch_page("views/unit.py").run()
    end = END - pd.Timedelta(hours=1) + pd.Timedelta("1us")
    week = store.series("R-210", ["conversion"], end - pd.Timedelta(days=7), end)["conversion"].mean()
    assert at.radio(key="kt_range").value == "last 7 days"
    assert metric(at, "Mean conversion") == f"{week:.4f}"
    at.radio(key="kt_range").set_value("last 24 h").run()
    at.switch_page("views/overview.py").run()
    at.switch_page("views/unit.py").run()
    assert at.radio(key="kt_range").value == "last 24 h"


def test_overview_opens_with_the_verdict(monkeypatch, hourly_url):
    """The first page opens with each unit's verdict: the same sentence the report builds from the
    same store (kinetrace.report.collect)."""
    from kinetrace.report import collect

    store = open_store(hourly_url, create=False)
    want = [u.verdict.sentence for u in collect(store).units if u.verdict is not None]
    at = app(monkeypatch, hourly_url)
    shown = [m.value for m in at.markdown]
    assert want and all(any(w in s for s in shown) for w in want), (want, shown)
