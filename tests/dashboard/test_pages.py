"""Every page under streamlit.testing.v1.AppTest: renders, widgets change what is shown, and the
numbers shown equal the store's (read back here through kinetrace.store's own API)."""

import pandas as pd
import pyarrow as pa
import pytest
from streamlit.testing.v1 import AppTest

from kinedash.arrhenius import steady_points
from kinetrace.store import open_store

from .conftest import APP, END

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
    before = [c.value for c in at.caption if c.value.startswith("Mean adjustment")]
    at.multiselect(key="bal_tags").set_value(["outlet_flow"]).run()
    after = [c.value for c in at.caption if c.value.startswith("Mean adjustment")]
    assert before != after and "feed_flow" not in after[0] and "outlet_flow" in after[0]
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
    ea = store.parameters("R-210").set_index("name").loc["activation_energy:addition", "value"]
    assert metric(at, "Ea of the stored fit") == f"{ea / 1000:.1f}"
    end = END - pd.Timedelta(hours=1) + pd.Timedelta("1us")
    n90 = len(steady_points(store, "R-210", "k_apparent:addition", end - pd.Timedelta(days=90), end))
    assert metric(at, "Steady periods plotted") == str(n90)
    at.radio(key="kin_range").set_value("last 7 days").run()
    n7 = len(steady_points(store, "R-210", "k_apparent:addition", end - pd.Timedelta(days=7), end))
    assert metric(at, "Steady periods plotted") == str(n7) and n7 != n90
    assert len(at.dataframe) >= 2                               # parameter table and rate-law table


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
    assert gaps.loc["R210-AT-105", "missing_intervals"] == 5


def test_whatif_cautions_limits_and_lever(monkeypatch, hourly_url):
    store = open_store(hourly_url, create=False)
    w = store.whatif("R-210").set_index("lever")
    at = app(monkeypatch, hourly_url, "whatif")
    text = " ".join(x.value for x in at.warning)
    for phrase in ("Estimates only", "safe operating envelope", "relief and runaway studies",
                   "management-of-change", "local codes and licensed engineering practice"):
        assert phrase in text
    at.radio(key="wi_lever").set_value("temperature").run()
    t = w.loc["temperature"]
    assert metric(at, "Setting that restores the target") == f"{t['proposed_value'] - 273.15:.4g}"
    assert metric(at, "Current temperature") == f"{t['current_value'] - 273.15:.4g}"
    assert metric(at, "Safe limits") == f"{t['safe_low'] - 273.15:.4g} to {t['safe_high'] - 273.15:.4g}"
    at.radio(key="wi_lever").set_value("feed_flow").run()
    assert metric(at, "Setting that restores the target") == "none within limits"


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
