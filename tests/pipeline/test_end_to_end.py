"""End to end on the simulator: from the noisy sample historian to conversion, k_ref and production.

The simulator (kinetrace.simulator) integrates the dynamic CSTR balances with scipy's solve_ivp and
writes the historian with noise, dropouts, bad rows, a frozen transmitter and lab samples; its ground
truth is the reference here. The run is 24 days, before the scenario's flowmeter bias on R210-FT-101
starts (day 55): that bias spoils the feed flow, hence conversion, until reconciliation corrects it.
"""

import dataclasses
import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from kinetrace.config import load_config, unit_model
from kinetrace.kinetics.steady import steady_windows
from kinetrace.pipeline.backcalc import back_calculate
from kinetrace.pipeline import run_check
from kinetrace.simulator import generate_sample_historian
from tests.pipeline.demo import demo_config

ROOT = Path(__file__).resolve().parents[2]
DAYS = 24


@pytest.fixture(scope="module")
def demo_run(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("e2e")
    paths = generate_sample_historian(ROOT / "config" / "demo_plant.toml", tmp / "hist", days=DAYS, seed=11)
    results, out = run_check(demo_config(tmp, paths["sqlite"]))
    facts = json.loads(Path(paths["facts"]).read_text())
    truths = {}
    for r in results:
        t = pd.read_parquet(paths[f"truth_{r.model.id}"]).set_index("timestamp")
        t.index = pd.to_datetime(t.index, utc=True)
        truths[r.model.id] = t.resample("1h").mean()   # hourly interval means, labelled at the start
    return {r.model.id: r for r in results}, truths, facts, out


def _windows(res, truth):
    s = res.series.join(truth.add_suffix("_true"), how="inner")
    ok = s["steady"] & (s["running_true"] > 0.999)
    w = steady_windows(ok, min_duration=3)
    # long steady windows are cut into stretches of at most 12 h, so that an average over days
    # cannot hide an error of a few hours
    pieces = []
    for a, b in zip(w.start_pos, w.stop_pos):
        pieces += [s.iloc[i:min(i + 12, b)] for i in range(a, b, 12) if min(i + 12, b) - i >= 3]
    return s, ok, pieces


@pytest.mark.parametrize("unit, rxn", [("R-210", "addition"), ("R-220", "hydrolysis")])
def test_back_calculation_from_the_raw_measurements(demo_run, unit, rxn):
    """The first back-calculation (design equation on hourly means, no reconciliation)."""
    results, truths, facts, _ = demo_run
    res = results[unit]
    # the back-calculation itself, at the configured rate law (the demo's configured values are the
    # simulator's): the check's own columns use the calibrated parameters, tested below
    configured = back_calculate(res.roles, unit_model(next(u for u in load_config(ROOT / "config" / "demo_plant.toml").units
                                                           if u.id == unit)), steady=res.series["steady"])
    res = dataclasses.replace(res, series=res.series.assign(**{f"k_ref:{rxn}_measured": configured[f"k_ref:{rxn}"]}))
    s, ok, windows = _windows(res, truths[unit])
    assert ok.sum() > 0.3 * len(s), "too few steady hours found"
    assert len(windows) >= 10
    # hourly conversion within 0.01 (absolute) of the truth in steady stretches
    dx = (s.loc[ok, "conversion_measured"] - s.loc[ok, "conversion_true"]).abs()
    assert dx.max() < 0.01, dx.sort_values().tail()
    k_err = np.array([w[f"k_ref:{rxn}_measured"].mean() / w[f"k_ref_{rxn}_true"].mean() - 1 for w in windows])
    p_err = np.array([w["production_measured"].mean() / w["product_rate_true"].mean() - 1 for w in windows])
    # production rate within 1 % over each steady stretch
    assert np.abs(p_err).max() < 0.01, p_err
    if unit == "R-210":
        # apparent k_ref within 3 % of the truth over each steady stretch
        assert np.abs(k_err).max() < 0.03, k_err
    else:
        # R-220's feed composition is not analysed: the configured specification stands in for a
        # feed that wanders by 1 % (scenario), which moves both the conversion and the rebuilt water
        # concentration; the resulting k_ref error is about 1.5 % (1 sigma). So 95 % of the
        # stretches within 3 %, every one within 5 %.
        assert np.mean(np.abs(k_err) < 0.03) >= 0.95, k_err
        assert np.abs(k_err).max() < 0.05, k_err


@pytest.mark.parametrize("unit, rxn", [("R-210", "addition"), ("R-220", "hydrolysis")])
def test_reconciled_results(demo_run, unit, rxn):
    """After reconciliation: at least as close to the truth as the raw back-calculation."""
    results, truths, facts, _ = demo_run
    s, ok, windows = _windows(results[unit], truths[unit])
    dx = (s.loc[ok, "conversion"] - s.loc[ok, "conversion_true"]).abs()
    dx_raw = (s.loc[ok, "conversion_measured"] - s.loc[ok, "conversion_true"]).abs()
    assert dx.max() < 0.01
    assert dx.median() <= dx_raw.median()
    k_err = np.array([w[f"k_ref:{rxn}"].mean() / w[f"k_ref_{rxn}_true"].mean() - 1 for w in windows])
    p_err = np.array([w["production"].mean() / w["product_rate_true"].mean() - 1 for w in windows])
    # k_ref(t) uses the parameters calibrated from these 24 days at one temperature, where the
    # adsorption constant is known to about +-20 % only: the true k_ref lies in the band (which
    # carries that uncertainty) and the stretch errors stay within 5 %
    assert np.median(np.abs(k_err)) < 0.03
    assert np.abs(k_err).max() < 0.05
    inside = [((w[f"k_ref_low:{rxn}"] <= w[f"k_ref_{rxn}_true"]) & (w[f"k_ref_{rxn}_true"] <= w[f"k_ref_high:{rxn}"])).mean()
              for w in windows]
    assert np.mean(inside) >= 0.9, inside
    # where the unanalysed feed departs from its specification, the balances move part of
    # that departure onto the product analyzer (weighted least squares by design), hence 1.5 %
    assert np.abs(p_err).max() < (0.01 if unit == "R-210" else 0.015), p_err
    # no bias in the scenario before day 55: no sensor may be set aside
    assert results[unit].series["sensor_excluded"].sum() == 0
    assert not [f for f in results[unit].faults if not f.ambiguous]


def test_activity_tracks_the_decay(demo_run):
    results, truths, facts, _ = demo_run
    for unit, res in results.items():
        s, ok, _ = _windows(res, truths[unit])
        a = s.loc[ok, "activity"]
        # activity is relative to the calibrated fresh k_ref (activity 1 at the start of the configured
        # fresh period, 6 h after the simulator's time 0): within 1 % of the simulator's activity
        ratio = a / s.loc[ok, "activity_true"]
        assert ratio.median() == pytest.approx(1.0, abs=0.01)
        assert res.series.attrs["fresh_basis"][res.model.reaction_ids[0]].startswith("fitted k_ref")


def test_outputs_written(demo_run):
    results, _, _, out = demo_run
    for unit in results:
        frame = pd.read_csv(out / f"{unit}.csv")
        assert "conversion [-]" in frame.columns and "production_mass [kg/s]" in frame.columns
        assert frame["timestamp"].iloc[0].endswith("Z")
        q = pd.read_csv(out / f"{unit}_quality.csv", index_col=0)
        # every reading read is accounted for (good or flagged by one rule)
        assert (q["rows_read"] > 0).all()
    summary = pd.read_csv(out / "summary.csv")
    assert set(summary["unit"]) == set(results)



@pytest.fixture(scope="module")
def biased_run(tmp_path_factory):
    """20 days with the scenario's +5 % feed-flowmeter bias moved to day 12."""
    import tomllib

    from kinetrace.simulator import scenario_from_dict

    tmp = tmp_path_factory.mktemp("bias")
    raw = tomllib.loads((ROOT / "sample_historian" / "scenario.toml").read_text())
    onset = pd.Timestamp("2026-09-12T05:00:00Z")
    for f in raw["faults"]["bias"]:
        f["start"] = onset.to_pydatetime()
    scen = scenario_from_dict(raw)
    paths = generate_sample_historian(ROOT / "config" / "demo_plant.toml", tmp / "hist", scenario=scen, days=20,
                                      seed=5)
    results, _ = run_check(demo_config(tmp, paths["sqlite"]))
    t = pd.read_parquet(paths["truth_R-210"]).set_index("timestamp")
    t.index = pd.to_datetime(t.index, utc=True)
    return {r.model.id: r for r in results}["R-210"], t.resample("1h").mean(), onset


def test_flowmeter_bias_found_and_corrected(biased_run):
    res, truth, onset = biased_run
    faults = [f for f in res.faults if "R210-FT-101" in f.tags or "feed_flow" in f.equivalent]
    assert len(faults) == 1, [f.evidence() for f in res.faults]
    f = faults[0]
    # onset within a few hours (issue statement); magnitude within 20 % of the true +5 %
    assert abs(f.onset - onset) <= pd.Timedelta("3h")
    rel = f.relative if f.role == "feed_flow" else f.alternatives["feed_flow (R210-FT-101)"]
    assert rel == pytest.approx(0.05, rel=0.2)
    assert f.role == "feed_flow" and not f.ambiguous
    # conversion after reconciliation is closer to the truth than before it, after the onset
    s = res.series.join(truth.add_suffix("_true"), how="inner")
    after = s[(s.index >= onset + pd.Timedelta("6h")) & s["steady"] & (s["running_true"] > 0.999)]
    err_rec = (after["conversion"] - after["conversion_true"]).abs().median()
    err_raw = (after["conversion_measured"] - after["conversion_true"]).abs().median()
    assert err_rec < 0.5 * err_raw
    assert err_rec < 0.005


def test_k_ref_band_and_fitted_rate_law(demo_run):
    """The k_ref band covers the truth; the rate law fitted to the history holds the true values."""
    results, truths, _, _ = demo_run
    res = results["R-210"]
    s, ok, _ = _windows(res, truths["R-210"])
    lo, hi = s.loc[ok, "k_ref_low:addition"], s.loc[ok, "k_ref_high:addition"]
    truth = s.loc[ok, "k_ref_addition_true"]
    assert (hi > lo).all()
    # a 95 % band; the truth also carries the fresh-baseline and model errors, so >= 80 % is asked
    assert ((truth >= lo) & (truth <= hi)).mean() >= 0.8
    p = res.kinetic_parameters.set_index("name")
    # the first 24 days run at one temperature (68 degC): Ea is not estimable and is held at its
    # configured value
    assert p.loc["activation_energy:addition", "method"].startswith("held at the configured value: the steady "
                                                                     "stretches span 0.0 K")
    assert p.loc["activation_energy:addition", "value"] == 58e3
    # nor is K: at one temperature the MA concentration moves only with the catalyst's decay (about
    # 15 % in 24 days), and the profile likelihood of K spans more than a factor of 100 (from about
    # 3e-6 to 5.5e-4 m3/mol); the configured x/3.9 is the better knowledge, so K is held and said so.
    # Simulator truth: K_MA = 0.5 L/mol = 5e-4 m3/mol, k_ref = 6e-4 1/s (configured = simulated)
    assert p.loc["K_MA:addition", "method"].startswith("held at the configured value: the data determine it no "
                                                       "better than the configured value (95 % half-width x/")
    assert p.loc["K_MA:addition", "ci_low"] <= 5e-4 <= p.loc["K_MA:addition", "ci_high"], p.loc["K_MA:addition"].to_dict()
    # k_ref is still estimated, with Ea's and K's configured uncertainty in its interval
    k = p.loc["k_ref_fitted:addition"]
    assert k["method"].startswith("estimated jointly with the activity history")
    assert k["ci_low"] <= 6e-4 <= k["ci_high"], k.to_dict()

