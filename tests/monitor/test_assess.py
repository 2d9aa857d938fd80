"""The monitoring stage on a synthetic back-calculated series of an invented unit."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from kinetrace.errors import KinetraceError
from kinetrace.monitor.assess import assess_unit
from kinetrace.monitor.whatif import production_at

from .conftest import make_unit


def _series(days=40, poison_day=None, seed=0):
    unit = make_unit(target=0.70)
    idx = pd.date_range("2027-01-01", periods=24 * days, freq="h", tz="UTC")
    d = np.arange(idx.size) / 24.0
    a_true = 0.98 * np.exp(-0.007 * d)
    if poison_day is not None:
        a_true = np.where(d >= poison_day, a_true - 0.12, a_true)
    rng = np.random.default_rng(seed)
    q = np.full(idx.size, 1e-3)
    q[(d >= 10) & (d < 10.25)] = 0.0  # 6 h feed trip on day 11 (invented event)
    temp = np.full(idx.size, 350.0)
    prod = np.where(q > 0, production_at(unit, activity=a_true, feed_flow=np.where(q > 0, q, 1e-3),
                                         temperature=temp, volume=0.4), 0.0)
    frame = pd.DataFrame({"activity": a_true + rng.normal(0, 0.01, idx.size), "steady": q > 0,
                          "production": prod, "feed_flow": q, "temperature": temp, "volume": 0.4}, index=idx)
    frame.loc[q == 0, "activity"] = np.nan
    return unit, frame


def test_stage_gives_store_ready_rows():
    unit, s = _series()
    res = assess_unit(s, unit, volume_limits=(0.2, 0.6))
    assert res.problems == []
    daily = res.daily_rows()
    parts = daily[["gap_feed_kg", "gap_conversion_kg", "gap_downtime_kg", "gap_data_kg"]].sum(axis=1)
    np.testing.assert_allclose(parts, daily["gap_kg"], rtol=0, atol=1e-9 * daily["target_kg"].max())
    # the feed trip day: downtime is 6 h of target (0.70 mol/s x 0.1 kg/mol)
    assert daily.loc[pd.Timestamp("2027-01-11").date(), "gap_downtime_kg"] == pytest.approx(6 * 3600 * 0.07)
    fc = res.forecast_row()
    assert fc["miss_earliest"] <= fc["miss_expected"] <= fc["miss_latest"]
    assert "falls below its target around" in fc["statement"]
    wi = res.whatif_rows()
    assert set(wi["lever"]) == {"temperature", "feed_flow", "residence_time"}
    ok = wi["proposed_value"].notna()
    assert ((wi.loc[ok, "proposed_value"] >= wi.loc[ok, "safe_low"])
            & (wi.loc[ok, "proposed_value"] <= wi.loc[ok, "safe_high"])).all()
    # the cautions are shown once, next to the proposals, by every output; not repeated in each note
    assert not wi["note"].str.contains("management of change").any()
    par = res.parameter_rows()
    assert {"decay_a0", "decay_residual_sd"} <= set(par["name"])


def test_stage_flags_a_poisoning_drop():
    unit, s = _series(poison_day=30)
    res = assess_unit(s, unit)
    rows = res.alarm_rows()
    drops = rows.loc[rows["kind"] == "step_down"]
    assert len(drops) == 1
    assert abs(drops["onset"].iloc[0] - pd.Timestamp("2027-01-31", tz="UTC")) <= pd.Timedelta("2h")
    assert drops["magnitude"].iloc[0] == pytest.approx(-0.12, abs=0.02)
    assert drops["state"].iloc[0] == "closed"  # detected 10 days before the end; open for 3 days


def test_stage_reports_what_it_could_not_do():
    unit, s = _series(days=3)
    s["activity"] = np.nan
    res = assess_unit(s, unit)
    assert res.trend is None and res.forecast_row() is None
    assert any("activity trend" in p for p in res.problems)
    assert len(res.daily_rows()) == 3


def test_stage_uses_a_planned_operating_point():
    # first order at a fixed target: a planned higher feed needs a lower conversion, hence less activity
    # (X = P / (Q C_A0), a = X / ((1 - X) k tau); Fogler 2016 ch. 5), and the miss date moves later
    unit, s = _series()
    now = assess_unit(s, unit)
    planned = assess_unit(s, unit, operating_point={"feed_flow": 1.2e-3})
    assert planned.operating_point["feed_flow"] == 1.2e-3
    x = 0.70 / (1.2e-3 * 1000.0)
    assert planned.forecast.required_activity == pytest.approx(x / ((1 - x) * 0.01 * 0.4 / 1.2e-3), rel=1e-9)
    assert planned.forecast.required_activity < now.forecast.required_activity
    assert planned.forecast.central > now.forecast.central
    with pytest.raises(KinetraceError, match="operating_point keys"):
        assess_unit(s, unit, operating_point={"pressure": 2e5})
