"""End to end on the simulator: from the noisy sample historian to conversion, k_ref and production.

The simulator (kinetrace.simulator) integrates the dynamic CSTR balances with scipy's solve_ivp and
writes the historian with noise, dropouts, bad rows, a frozen transmitter and lab samples; its ground
truth is the reference here. The run is 24 days, before the scenario's flowmeter bias on R210-FT-101
starts (day 55): that bias spoils the feed flow, hence conversion, until reconciliation corrects it.
"""

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from kinetrace.kinetics.steady import steady_windows
from kinetrace.pipeline import run_check
from kinetrace.simulator import generate_sample_historian

ROOT = Path(__file__).resolve().parents[2]
DAYS = 24


@pytest.fixture(scope="module")
def demo_run(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("e2e")
    paths = generate_sample_historian(ROOT / "config" / "demo_plant.toml", tmp / "hist", days=DAYS, seed=11)
    text = (ROOT / "config" / "demo_plant.toml").read_text()
    text = text.replace('path = "../sample_historian/generated/calder_bank.sqlite"', f'path = "{paths["sqlite"]}"')
    text = text.replace('output_dir = "../out"', f'output_dir = "{tmp / "out"}"')
    cfg = tmp / "plant.toml"
    cfg.write_text(text)
    results, out = run_check(cfg)
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
    return s, ok, [s.iloc[a:b] for a, b in zip(w.start_pos, w.stop_pos)]


@pytest.mark.parametrize("unit, rxn", [("R-210", "addition"), ("R-220", "hydrolysis")])
def test_conversion_k_ref_and_production_in_steady_stretches(demo_run, unit, rxn):
    results, truths, facts, _ = demo_run
    s, ok, windows = _windows(results[unit], truths[unit])
    assert ok.sum() > 0.3 * len(s), "too few steady hours found"
    assert len(windows) >= 10
    # hourly conversion within 0.01 (absolute) of the truth in steady stretches
    dx = (s.loc[ok, "conversion"] - s.loc[ok, "conversion_true"]).abs()
    assert dx.max() < 0.01, dx.sort_values().tail()
    k_err = np.array([w[f"k_ref:{rxn}"].mean() / w[f"k_ref_{rxn}_true"].mean() - 1 for w in windows])
    p_err = np.array([w["production"].mean() / w["product_rate_true"].mean() - 1 for w in windows])
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


def test_activity_tracks_the_decay(demo_run):
    results, truths, facts, _ = demo_run
    for unit, res in results.items():
        s, ok, _ = _windows(res, truths[unit])
        a = s.loc[ok, "activity"]
        # the fresh baseline is the first 3 days' steady median: activity ratio within 3 %
        ratio = a / (s.loc[ok, "activity_true"] / s.loc[ok & (s.index < s.index[0] + pd.Timedelta("3D")), "activity_true"].mean())
        assert ratio.median() == pytest.approx(1.0, abs=0.01)
        assert res.series.attrs["fresh_basis"][res.model.reaction_ids[0]].startswith("median of")


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

