"""An analyzer's bias tracked against the lab (kinetrace.reconcile.analyzer_bias) on simulated data of
the tests' own: a wandering outlet concentration, an analyzer whose hourly means carry 1.5 % / sqrt(6)
(a reading every 10 min with 1.5 % noise) and a lab result every 12 h with 0.2 % noise (common
practice, no source), reported 4 h after sampling."""

import numpy as np
import pandas as pd
import pytest

from kinetrace.reconcile.analyzer_bias import lab_comparisons, track_bias

AN, LAB = 0.015 / np.sqrt(6.0), 0.002
DELAY = 4 * 3600.0


def _plant(seed, days, *, onset=None, drift=0.0, step=0.0, recal=None):
    rng = np.random.default_rng(seed)
    idx = pd.date_range("2027-01-01", periods=int(days * 24), freq="h", tz="UTC")
    mid = np.arange(idx.size) / 24.0 + 1 / 48.0                 # hour midpoints [d]
    wander = np.cumsum(rng.standard_normal(idx.size)) * 0.002
    wander -= np.convolve(wander, np.ones(241) / 241, mode="same")   # a wander without a long trend
    c = 800.0 * (1 + 0.08 * np.sin(2 * np.pi * mid / 6.1) + wander)
    bias = np.zeros(idx.size)
    if onset is not None:
        bias = np.where(mid >= onset, drift * (mid - onset) + step, 0.0)
        if recal is not None:
            bias = np.where(mid >= recal, 0.0, bias)
    analyzer = pd.Series(c * (1 + bias) * (1 + AN * rng.standard_normal(idx.size)), idx)
    rows = np.arange(6, idx.size, 12)
    lab_times = idx[rows] + pd.Timedelta("30min")
    lab = c[rows] * (1 + LAB * rng.standard_normal(rows.size))
    comp = lab_comparisons(analyzer, lab_times, lab, analyzer_sigma=0.015, lab_sigma=LAB)
    return track_bias(comp, result_delay=DELAY, analysis_delay=6 * 3600.0), idx, bias


def test_clean_year_has_at_most_one_false_alarm_a_month():
    """A year of hourly data without a fault: at most 12 step or drift segments (the GLR's in-control
    ARL is about 2600 lab samples, 3.5 years at two a day, so about 0.3 are expected)."""
    track, _, _ = _plant(11, 365)
    assert len(track.samples) > 700
    assert len(track.faults) <= 12


def test_step_reported_as_a_step_with_its_size():
    track, idx, _ = _plant(5, 20, onset=10.0, step=0.03)
    (f,) = track.faults
    assert f.kind == "step"
    assert f.bias == pytest.approx(0.03, abs=0.004)
    assert abs((f.onset - idx[0]) / pd.Timedelta(days=1) - 10.0) <= 0.5
    # known once reported: 4 h after sampling, 6 h of analyzer readings after it
    assert (f.alarm - idx[0]) / pd.Timedelta(days=1) <= 10.0 + 1.0


def test_drift_then_recalibration():
    track, idx, bias = _plant(2, 30, onset=8.0, drift=0.005, recal=18.0)
    kinds = [s.kind for s in track.segments]
    assert kinds[0] == "in control" and kinds[-1] == "in control"
    drift = [s for s in track.faults if s.kind == "drift"]
    assert drift and drift[0].rate == pytest.approx(0.005, rel=0.3)
    assert (drift[0].alarm - idx[0]) / pd.Timedelta(days=1) <= 8.0 + 4.0
    grid = track.on_grid(idx)
    day = (idx - idx[0]) / pd.Timedelta(days=1)
    corrected = grid["corrected"].to_numpy() > 0
    assert corrected[(day > 11) & (day < 17.5)].all()       # corrected while drifting
    assert not corrected[day > 19.5].any()                   # and no longer once recalibrated
    inside = (day > 11) & (day < 17.5)
    # the tracked bias follows the truth within about three of its standard errors
    err = np.abs(grid["bias"].to_numpy()[inside] - bias[inside])
    assert np.all(err < 3 * grid["bias_sd"].to_numpy()[inside] + 0.002)


def test_filter_uses_only_results_reported_so_far():
    """The filtered state at a sample depends on earlier samples only (the lab result is known once
    reported); the smoothed one on all. Cutting the data after sample k leaves the filtered states up
    to k unchanged, and the last smoothed state equals the last filtered one (Durbin & Koopman 2012,
    Sec. 4.4)."""
    full, _, _ = _plant(4, 12)
    s = full.samples
    cut = track_bias(s[["lab", "analyzer", "z", "z_sd", "n_readings"]].iloc[:15], result_delay=DELAY)
    cols = ["filtered_bias", "filtered_rate"]
    np.testing.assert_allclose(cut.samples[cols].to_numpy(), s[cols].iloc[:15].to_numpy(), atol=1e-12)
    assert s["smoothed_bias"].iloc[-1] == pytest.approx(s["filtered_bias"].iloc[-1], abs=1e-12)
    # known once reported (4 h) and once the 6 h of analyzer readings after sampling are in
    assert (s["reported"] - s.index == pd.Timedelta(hours=6)).all()
    # a run at some time sees only the results reported by then
    as_of = s["reported"].iloc[9] + pd.Timedelta("1h")
    early = track_bias(s[["lab", "analyzer", "z", "z_sd", "n_readings"]], result_delay=DELAY,
                       analysis_delay=6 * 3600.0, as_of=as_of)
    assert len(early.samples) == 10 and (early.samples["reported"] <= as_of).all()
