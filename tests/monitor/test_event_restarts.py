"""Configured events restart what would otherwise run across them: the step windows, the EWMA and
CUSUM charts, the AR(1) chain, the steady-state test and a carried lab value; and the config's
``[[units.events]]`` section (kind, time, optional note) alongside ``catalyst_changes``.

Common practice, no source: a known, configured event (catalyst change, shutdown, restart, feed
change) is no evidence of a fault; the statistics start afresh after it."""

from __future__ import annotations

import copy
import tomllib
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from kinetrace.config import unit_model, validate_config
from kinetrace.errors import ConfigError
from kinetrace.ingest.align import sample_mean_carry
from kinetrace.kinetics.steady import detect_steady
from kinetrace.monitor.charts import ar1_innovations, cusum_alarms, ewma_alarms
from kinetrace.monitor.steps import detect_steps

DEMO = Path(__file__).resolve().parents[2] / "config" / "demo_plant.toml"
IDX = pd.date_range("2027-03-01", periods=480, freq="h", tz="UTC")
CHANGE = IDX[240]


def _activity(seed=0):
    """Activity 0.80 on the old charge, 1.00 on the fresh one from CHANGE, 1 % noise."""
    rng = np.random.default_rng(seed)
    a = np.where(IDX < CHANGE, 0.80, 1.00) + rng.normal(0.0, 0.01, IDX.size)
    return pd.Series(a, index=IDX)


def test_step_detector_does_not_report_a_configured_change():
    act = _activity()
    assert [s.direction for s in detect_steps(act, min_size=0.05)] == ["up"]     # seen without the event
    assert detect_steps(act, min_size=0.05, resets=[CHANGE]) == []
    # a real drop later in the fresh charge is still found
    act2 = act.copy()
    act2[IDX >= IDX[360]] -= 0.2
    found = detect_steps(act2, min_size=0.05, resets=[CHANGE])
    assert [(s.direction, s.onset) for s in found] == [("down", IDX[360])]


@pytest.mark.parametrize("chart", [cusum_alarms, ewma_alarms])
def test_charts_restart_at_a_configured_change(chart):
    rng = np.random.default_rng(3)
    x = pd.Series(rng.normal(0.0, 1.0, IDX.size) + np.where(IDX < CHANGE, 0.0, 3.0), index=IDX)
    # the fresh charge's own in-control level: standardise each charge on itself, as the trend
    # residuals are; the raw series charted across the change alarms
    assert chart(x, mean=0.0, sigma=1.0, arl0=2000.0).alarms
    resid = x - np.where(IDX < CHANGE, 0.0, 3.0)
    plain = chart(resid, mean=0.0, sigma=1.0, arl0=2000.0, restarts=[CHANGE])
    assert plain.alarms == []
    # a fresh start: the statistic right after the change is the first observation's own
    first = plain.statistic.loc[CHANGE]
    if chart is ewma_alarms:
        assert first["z"] == pytest.approx(0.1 * resid[CHANGE])
    else:
        assert first["upper"] == pytest.approx(max(0.0, resid[CHANGE] - 0.5))


def test_ar1_chain_is_cut_at_a_configured_change():
    act = _activity()
    inn, _ = ar1_innovations(act, restarts=[CHANGE])
    assert np.isnan(inn[CHANGE]) and np.isfinite(inn[IDX[241]]) and np.isfinite(inn[IDX[239]])
    inn_all, _ = ar1_innovations(act)
    assert abs(inn_all[CHANGE]) > 5       # the change itself, seen as one huge innovation without the cut


def test_steady_windows_restart_at_an_event():
    rng = np.random.default_rng(5)
    # flat feed flow and temperature with noise: steady throughout, by both methods
    frame = pd.DataFrame({"q": 1.0 + 0.003 * rng.standard_normal(IDX.size),
                          "t": 350.0 + 0.05 * rng.standard_normal(IDX.size)}, index=IDX)
    for method, kw in (("drift_variance", {"window": 6}), ("cao_rhinehart", {"critical_value": 1.73})):
        base = detect_steady(frame, method=method, max_gap=2, **kw)
        res = detect_steady(frame, method=method, max_gap=2, restarts=[240], **kw)
        assert base.mask.iloc[230:250].all() or method == "cao_rhinehart"
        # no window reaches across the restart, and the test's own warm-up follows it
        assert not (res.windows["start_pos"] < 240).__and__(res.windows["stop_pos"] > 240).any()
        warm = 5 if method == "drift_variance" else 30
        assert not res.mask.iloc[240:240 + warm].any()
        assert res.mask.iloc[:240].equals(base.mask.iloc[:240])


def test_carry_stops_at_every_event_kind():
    h = 3_600 * 10**9
    ts = np.array([0, 6]) * h                     # a lab result at 00:00 and 06:00, carried up to 6 h
    edges = np.arange(13) * h
    v, carried = sample_mean_carry(ts, np.array([1.0, 2.0]), edges, 6 * 3600)
    assert np.isfinite(v[:6]).all() and carried[1:6].all()
    v, carried = sample_mean_carry(ts, np.array([1.0, 2.0]), edges, 6 * 3600, resets=np.array([2 * h + 1]))
    # the interval holding the event and those after it get no carried value
    assert v[:2].tolist() == [1.0, 1.0] and np.isnan(v[2:6]).all() and v[6] == 2.0


def _raw():
    return tomllib.loads(DEMO.read_text())


def test_events_section_is_read_and_merged_with_catalyst_changes():
    raw = copy.deepcopy(_raw())
    unit = raw["units"][0]
    unit["events"] = [{"kind": "shutdown", "time": "2027-05-02T06:00:00Z", "note": "pump seal"},
                      {"kind": "restart", "time": "2027-05-03T18:00:00Z"},
                      {"kind": "catalyst_change", "time": "2027-05-03T12:00:00Z"},
                      {"kind": "feed_change", "time": "2027-04-01T00:00:00Z", "note": "new supplier"}]
    model = unit_model(validate_config(raw).units[0])
    assert [k for k, _, _ in model.events] == ["feed_change", "shutdown", "catalyst_change", "restart"]
    assert pd.Timestamp("2027-05-03T12:00:00Z") in [pd.Timestamp(t) for t in model.catalyst_changes]
    times = [pd.Timestamp(t) for t in model.event_times]
    assert times == sorted(times) and len(times) == 4 + len(unit.get("activity", {}).get("catalyst_changes", []))
    bad = copy.deepcopy(_raw())
    bad["units"][0]["events"] = [{"kind": "earthquake", "time": "2027-05-02T06:00:00Z"}]
    with pytest.raises(ConfigError, match=r"units\[0\]\.events\[0\]\.kind: Input should be .catalyst_change., .shutdown."):
        validate_config(bad, source="plant.toml")


def test_shutdown_and_restart_restart_the_steady_windows_of_the_check():
    from types import SimpleNamespace

    from kinetrace.pipeline.backcalc import steady_mask

    rng = np.random.default_rng(8)
    n = IDX.size
    roles = pd.DataFrame({"feed_flow": 2e-3 * (1 + 0.003 * rng.standard_normal(n)),
                          "temperature": 350.0 + 0.05 * rng.standard_normal(n), "volume": 14.0,
                          "outlet_conc:A": 800.0 * (1 + 0.002 * rng.standard_normal(n))}, index=IDX)
    rate = np.full(n, 0.1)            # mol/(m3 s), far above the accumulation of the noise
    shutdown, restart = IDX[200] + pd.Timedelta("20min"), IDX[260]
    model = SimpleNamespace(fixed_volume=14.0, key_reactant="A", event_times=())
    base = steady_mask(roles, model, rate)
    assert base.iloc[190:280].all()
    model = SimpleNamespace(fixed_volume=14.0, key_reactant="A",
                            event_times=(shutdown.to_pydatetime(), restart.to_pydatetime()))
    mask = steady_mask(roles, model, rate)
    # the interval holding each event starts a new stretch, which waits for the 6-interval window
    assert not mask.iloc[200:206].any() and not mask.iloc[260:266].any()
    # away from the events the test says what it said without them
    for part in (slice(0, 199), slice(210, 259), slice(270, None)):
        assert mask.iloc[part].equals(base.iloc[part])
