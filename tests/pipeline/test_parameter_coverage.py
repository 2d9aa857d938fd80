"""Coverage of the fitted rate-law intervals over a batch of simulator seeds.

The simulator (kinetrace.simulator, scipy solve_ivp) runs R-210 for 12 days with temperature steps
(64, 68, 72, 76 degC, inside the safe limits of config/demo_plant.toml); the daily check fits k_ref, Ea
and K over the steady stretches. The 95 % intervals should hold the true Ea (58 kJ/mol) and K
(5e-4 m3/mol) in about 95 % of seeds; with 8 seeds, at least 6 are asked of each (a binomial(8, 0.95)
gives 6 or more with probability 0.994).
"""

import tomllib
from datetime import datetime, timedelta, timezone
from pathlib import Path

import pytest

from kinetrace.pipeline import run_check
from kinetrace.simulator import generate_sample_historian, scenario_from_dict
from tests.pipeline.demo import demo_config

ROOT = Path(__file__).resolve().parents[2]
SEEDS = range(101, 109)


def _scenario():
    raw = tomllib.loads((ROOT / "sample_historian" / "scenario.toml").read_text())
    start = datetime(2026, 9, 1, tzinfo=timezone.utc)
    r210 = next(u for u in raw["units"] if u["id"] == "R-210")
    r210["schedule"] = [{"at": start, "feed_flow": "4.6 m3/h", "temperature": "64 degC", "level": 60.0}] + [
        {"at": start + timedelta(days=3 * i), "temperature": f"{64 + 4 * i} degC"} for i in (1, 2, 3)]
    r210.pop("shutdown", None)
    for kind in list(raw.get("faults", {})):
        if kind != "scattered_bad":
            raw["faults"].pop(kind)
    return scenario_from_dict(raw)


@pytest.mark.slow
def test_intervals_hold_the_true_values_in_most_seeds(tmp_path):
    scen = _scenario()
    hits = {"activation_energy:addition": 0, "K_MA:addition": 0}
    truth = {"activation_energy:addition": 58e3, "K_MA:addition": 5e-4}
    for seed in SEEDS:
        d = tmp_path / f"s{seed}"
        paths = generate_sample_historian(ROOT / "config" / "demo_plant.toml", d, scenario=scen, days=12,
                                          seed=seed, write_sql=True)
        results, _ = run_check(demo_config(d, paths["sqlite"]), store=None)
        p = next(r for r in results if r.model.id == "R-210").kinetic_parameters.set_index("name")
        for name, true in truth.items():
            hits[name] += int(p.loc[name, "ci_low"] <= true <= p.loc[name, "ci_high"])
    assert all(h >= 6 for h in hits.values()), hits
