"""Alarms from the whole history: a re-run of a short window into a store with 90 days of results
keeps the open sensor alarm of the full run (same sensor, same sign, a size within its interval) and
opens no second, contradictory one.

Simulated plant of the tests' own (K-41, tests/pipeline/plants.py), hourly, with the feed flowmeter
reading 5 % high from day 40 on. The balances alone cannot tell that from the outlet flowmeter reading
about 5 % low; a window that opens after the bias began does not see the step that names the feed meter.
"""

import shutil

import pandas as pd
import pytest

from kinetrace.pipeline import run_check
from kinetrace.store import open_store
from tests.pipeline import plants

TRUE = dict(k_ref="4.2e-4 1/s", ea="65 kJ/mol", k_ads="0.8 L/mol")
DAYS, BIAS_DAY, BIAS = 90.0, 40.0, 0.05
FAULTS = ("sensor_bias", "balance_mismatch")


def _open_sensor_alarms(url):
    db = open_store(url)
    try:
        a = db.alarms(state="open")
    finally:
        db.close()
    return a[a["kind"].isin(FAULTS)].reset_index(drop=True)


@pytest.fixture(scope="module")
def full(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("history")
    truth, readings = plants.saturating_plant(2, days=DAYS, change_day=62.0)
    r = readings.copy()
    r.loc[r.index >= plants.START + pd.Timedelta(days=BIAS_DAY), "K41_FEED_LPM"] *= 1 + BIAS
    csv = plants.write_export(r, tmp / "export.csv")
    target, _ = plants.target_for_crossing("saturating", truth, 30.0, 0.1)
    cfg = plants.write_config("saturating", tmp, csv, start=TRUE, target=f"{target / 1000:.6f} t/d",
                              change_day=truth.change_day)
    store = tmp / "full.sqlite"
    result = run_check(cfg, store=f"sqlite:///{store}")[0][0]
    return cfg, store, result, r.index[-1] + pd.Timedelta("1h")


def test_full_run_names_the_feed_meter(full):
    _, store, result, _ = full
    alarms = _open_sensor_alarms(f"sqlite:///{store}")
    assert alarms["variable"].tolist() == ["K41_FEED_LPM"], alarms
    f = next(f for f in result.faults if f.tags == ("K41_FEED_LPM",) and f.relative > 0.02)
    # the simulated bias lies inside the reported 95 % interval
    half = 1.96 * abs(f.magnitude_sd / f.magnitude * f.relative)
    assert abs(f.relative - BIAS) <= half, (f.relative, half)


@pytest.mark.parametrize("days", [1, 3, 10])
def test_short_window_rerun_keeps_the_open_alarm(full, tmp_path, days):
    cfg, store, result, end = full
    before = _open_sensor_alarms(f"sqlite:///{store}")
    copy = tmp_path / "rerun.sqlite"
    shutil.copy(store, copy)
    url = f"sqlite:///{copy}"
    rerun = run_check(cfg, since=end - pd.Timedelta(days=days), store=url, out_dir=tmp_path / "out")[0][0]
    after = _open_sensor_alarms(url)
    # one open sensor alarm, the full run's: same sensor, same sign, same onset and detection time
    assert len(after) == 1, after[["kind", "variable", "detected", "magnitude"]]
    a, b = after.iloc[0], before.iloc[0]
    assert (a["kind"], a["variable"], a["onset"], a["detected"]) == (b["kind"], b["variable"], b["onset"], b["detected"])
    assert a["magnitude"] > 0
    # its size within the full run's 95 % interval
    f = next(f for f in result.faults if f.tags == ("K41_FEED_LPM",) and f.relative > 0.02)
    half = 196.0 * abs(f.magnitude_sd / f.magnitude * f.relative)
    assert abs(a["magnitude"] - b["magnitude"]) <= half, (a["magnitude"], b["magnitude"], half)
    # and the re-run's own result names the same meter (nothing set aside on the other one)
    assert {g.tags for g in rerun.faults} <= {("K41_FEED_LPM",)}, [g.evidence() for g in rerun.faults]
