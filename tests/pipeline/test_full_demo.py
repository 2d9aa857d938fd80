"""The 90-day demo scenario end to end: rate-law fit across the temperature step, the flowmeter
bias, and the forecast of the first day below target. Truth: kinetrace.simulator's ground truth
and scenario facts (sample_historian/scenario.toml)."""

import json
from pathlib import Path

import pandas as pd
import pytest

from kinetrace.pipeline import run_check
from kinetrace.simulator import generate_sample_historian
from tests.pipeline.demo import demo_config

ROOT = Path(__file__).resolve().parents[2]


@pytest.fixture(scope="module")
def demo90(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("demo90")
    paths = generate_sample_historian(ROOT / "config" / "demo_plant.toml", tmp / "hist", write_sql=True)
    facts = json.loads(Path(paths["facts"]).read_text())
    return tmp, demo_config(tmp, paths["sqlite"]), facts


@pytest.mark.slow
def test_full_history(demo90):
    tmp, cfg, facts = demo90
    results, _ = run_check(cfg, store=None)
    r210 = {r.model.id: r for r in results}["R-210"]
    p = r210.kinetic_parameters.set_index("name")
    # config/demo_plant.toml (= simulator truth): Ea = 58 kJ/mol, K_MA = 5e-4 m3/mol
    assert p.loc["activation_energy:addition", "ci_low"] <= 58e3 <= p.loc["activation_energy:addition", "ci_high"]
    assert p.loc["K_MA:addition", "ci_low"] <= 5e-4 <= p.loc["K_MA:addition", "ci_high"]
    assert r210.rate_law_comparison.best == "saturating"
    # the scenario's +5 % bias on R210-FT-101 from 2026-10-26T00:00Z
    bias = next(f for f in facts["faults"] if f["kind"] == "bias")
    onset = pd.Timestamp(bias["window_start"])
    found = [f for f in r210.faults if f.role == "feed_flow"]
    assert len(found) == 1 and abs(found[0].onset - onset) <= pd.Timedelta("3h")
    assert found[0].relative == pytest.approx(bias["relative"], rel=0.2)
    assert [f for f in r210.faults if not f.ambiguous] == found
    # one alarm count: the open sensor fault is counted with the open drift alarms
    drift_open = sum(1 for a in r210.assessment.alarms if r210.assessment.as_of - a.detected < r210.assessment.open_for)
    assert r210.summary["open_alarms"] == drift_open + 1


@pytest.mark.slow
def test_forecast_contains_the_first_day_below_target(demo90):
    tmp, cfg, facts = demo90
    # look from day 50: the simulator's first day below target is 2026-11-10 (scenario facts)
    results, _ = run_check(cfg, until="2026-10-21T00:00Z", store=None)
    a = {r.model.id: r for r in results}["R-210"].assessment
    first = pd.Timestamp(facts["units"]["R-210"]["first_day_below_target"], tz="UTC")
    f = a.forecast
    assert f.status == "crossing", f.text
    assert f.earliest.normalize() <= first <= f.latest.normalize() + pd.Timedelta("1D"), f.text
