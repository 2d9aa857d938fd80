"""An analyzer drifting against the lab, end to end on a plant of the tests' own (K-41 with an outlet-P
analyzer checked by the lab every 12 h; tests/pipeline/analyzer_plant.py): `kinetrace check` names it
drifting within four days of the onset with its rate, corrects its readings until it is recalibrated,
and a step is still reported as a step within 12 h."""

import numpy as np
import pandas as pd
import pytest
from typer.testing import CliRunner

from kinetrace.cli import app
from kinetrace.config import load_config, store_url
from kinetrace.pipeline import run_check
from kinetrace.store import open_store
from tests.pipeline import analyzer_plant as ap
from tests.pipeline import plants

DAY = pd.Timedelta(days=1)


def _setup(folder, **kw):
    truth, readings, bias = ap.readings(1, **kw)
    folder.mkdir(parents=True, exist_ok=True)
    csv = plants.write_export(readings, folder / "export.csv")
    return truth, readings, bias, ap.config(folder, csv, days=kw["days"])


def test_check_names_a_drifting_analyzer_within_four_days(tmp_path):
    # +0.5 %/d from day 8; the data end 96 h after the onset
    truth, readings, bias, cfg = _setup(tmp_path, days=12.0, onset_day=8.0, drift=0.005)
    res = CliRunner().invoke(app, ["check", "--config", str(cfg)])
    assert res.exit_code == 1, res.stdout            # needs attention
    onset = plants.START + 8 * DAY
    store = open_store(store_url(load_config(cfg), cfg))
    alarms = store.alarms()
    store.close()
    drift = alarms[(alarms["kind"] == "sensor_drift") & (alarms["variable"] == ap.ANALYZER)]
    assert len(drift) == 1
    row = drift.iloc[0]
    assert row["detected"] <= onset + 4 * DAY
    assert row["rate"] == pytest.approx(0.5, rel=0.3)            # % a day
    assert row["state"] == "open" and row["last_check"] >= onset + 3 * DAY
    # the words of the check name the analyzer, its size, its growth, its onset and the last lab check
    assert f"analyzer {ap.ANALYZER} reads about +" in res.stdout
    assert "% a day since" in res.stdout and "last lab check" in res.stdout
    # no other sensor is blamed for it
    others = alarms[alarms["kind"].isin(["sensor_bias", "sensor_drift"]) & (alarms["variable"] != ap.ANALYZER)]
    assert others.empty, others[["kind", "variable", "evidence"]].to_string()


def test_drifting_analyzer_corrected_until_recalibrated(tmp_path):
    truth, readings, bias, cfg = _setup(tmp_path, days=20.0, onset_day=6.0, drift=0.005, recal_day=13.0)
    (unit,), _ = run_check(cfg, store=None)
    s = unit.series
    day = (s.index - plants.START) / DAY
    flag = s[f"analyzer_corrected:{ap.ANALYZER}"].to_numpy() > 0.5
    assert flag[(day > 9.5) & (day < 12.5)].all()
    assert not flag[day > 14.5].any()
    (f,) = [f for f in unit.faults if f.source == "lab"]
    assert f.kind == "drift" and f.end < plants.START + 13.5 * DAY
    # while corrected, the outlet P used by the balances is the truth within about 1 %, where the raw
    # analyzer read up to 3.5 % high
    c_p = unit.roles["outlet_conc:P"].to_numpy()
    true_p = truth.frame["c_p"].reindex(s.index).to_numpy()
    inside = (day > 9.5) & (day < 12.5)
    assert np.median(np.abs(c_p[inside] / true_p[inside] - 1)) < 0.01
    assert np.median(readings[ap.ANALYZER].to_numpy()[:len(day)][inside] * 1000 / true_p[inside] - 1) > 0.02


def test_step_still_reported_as_a_step_within_12_h(tmp_path):
    truth, readings, bias, cfg = _setup(tmp_path, days=10.5, onset_day=10.0, step=0.03)
    (unit,), _ = run_check(cfg, store=None)
    onset = plants.START + 10 * DAY
    lab = [f for f in unit.faults if f.source == "lab"]
    assert len(lab) == 1 and lab[0].kind == "step" and lab[0].tags == (ap.ANALYZER,)
    assert lab[0].alarm <= onset + pd.Timedelta("12h")
    assert lab[0].relative == pytest.approx(0.03, abs=0.006)
    assert all(f.kind == "step" for f in unit.faults)


def test_daily_incremental_runs_find_the_drift_too(tmp_path):
    """Run day by day (each incremental run re-reads 3 days of readings): the lab comparisons of the
    earlier runs come back from the store, and the drift is named within four days all the same."""
    truth, readings, bias, cfg = _setup(tmp_path, days=12.0, onset_day=8.0, drift=0.005)
    run_check(cfg, until=str(plants.START + 8 * DAY))
    for d in (9, 10, 11, 12):
        run_check(cfg, until=str(plants.START + d * DAY), incremental=True)
    store = open_store(store_url(load_config(cfg), cfg))
    alarms = store.alarms()
    series = store.series("K-41")
    store.close()
    assert np.isfinite(series[f"analyzer_lab_diff:{ap.ANALYZER}"]).sum() >= 20
    drift = alarms[(alarms["kind"] == "sensor_drift") & (alarms["variable"] == ap.ANALYZER)]
    assert len(drift) >= 1
    assert drift["detected"].min() <= plants.START + 12 * DAY
    assert drift.iloc[-1]["rate"] == pytest.approx(0.5, rel=0.3)


@pytest.mark.parametrize("fault", ["drift", "step"])
def test_balances_alone_tell_a_drift_from_a_step(tmp_path, fault):
    """No lab tag: the balance residuals alone (the persistent-bias CUSUM, then the GLR of a step and
    a ramp on the analyzer's hourly difference from what the other measurements give) report a
    +1 %/d drift as a drift with its rate, and a +3 % step as a step."""
    from tests.pipeline.test_self_calibration import TRUE

    kw = dict(drift=0.01) if fault == "drift" else dict(step=0.03)
    truth, readings, bias = ap.readings(1, days=20.0, onset_day=8.0, **kw)
    readings = readings.drop(columns=[ap.LAB])
    noise = np.random.default_rng(5).standard_normal(len(readings))
    readings[ap.ANALYZER] = truth.frame["c_p"].to_numpy() / 1000 * (1 + bias) * (1 + 0.004 * noise)
    csv = plants.write_export(readings, tmp_path / "export.csv")
    target, _ = plants.target_for_crossing("saturating", truth, 30.0, 0.1)
    cfg = plants.write_config("saturating", tmp_path, csv, start=TRUE["saturating"],
                              target=f"{target / 1000:.6f} t/d", change_day=20.0)
    (unit,), _ = run_check(cfg, store=None)
    (f,) = [f for f in unit.faults if f.role == "outlet_conc:P"]
    assert f.source == "balances" and f.kind == fault
    onset = plants.START + 8 * DAY
    assert abs(f.onset - onset) <= pd.Timedelta("12h")
    if fault == "drift":
        assert f.rate == pytest.approx(0.01, rel=0.3)
        assert f.alarm <= onset + 4 * DAY
    else:
        assert f.alarm <= onset + pd.Timedelta("12h")
