"""Self-calibration end to end on simulated plants of the tests' own (tests/pipeline/plants.py).

Two invented catalytic CSTRs (a saturating single reaction; a series network on one catalyst),
each with catalyst decay, a catalyst change and temperature steps, simulated with scipy's solve_ivp.
The check starts from rough values (k_ref 2x, Ea 15 kJ/mol low, adsorption constant 2x) and from the
true ones; the answers must agree with each other and with the simulator's truth.
"""

import pandas as pd
import pytest

from kinetrace.pipeline import run_check
from tests.pipeline import plants

ROUGH = {"saturating": dict(k_ref="8.4e-4 1/s", ea="50 kJ/mol", k_ads="1.6 L/mol"),
         "series": dict(k1="2.4e-7 m3/(mol s)", ea1="45 kJ/mol", k_ads="1.0 L/mol",
                        k2="5.0e-8 m3/(mol s)", ea2="60 kJ/mol")}
TRUE = {"saturating": dict(k_ref="4.2e-4 1/s", ea="65 kJ/mol", k_ads="0.8 L/mol"),
        "series": dict(k1="1.2e-7 m3/(mol s)", ea1="60 kJ/mol", k_ads="0.5 L/mol",
                       k2="2.5e-8 m3/(mol s)", ea2="75 kJ/mol")}
PRODUCT_MM = {"saturating": 0.1, "series": 0.11}   # kg/mol, as in the configs
MAIN = {"saturating": "conversion", "series": "coupling"}


def _run(kind, folder, start, seed=1, hook=None, **plant_kw):
    make = plants.saturating_plant if kind == "saturating" else plants.series_plant
    truth, readings = make(seed, **plant_kw)
    if hook is not None:
        readings = hook(readings, seed)
    target, crossing = plants.target_for_crossing(kind, truth, 30.0, PRODUCT_MM[kind])
    folder.mkdir(parents=True, exist_ok=True)
    csv = plants.write_export(readings, folder / "export.csv")
    cfg = plants.write_config(kind, folder, csv, start=start, target=f"{target / 1000:.6f} t/d",
                              change_day=truth.change_day)
    results, _ = run_check(cfg, store=None)
    return truth, crossing, results[0]


@pytest.fixture(scope="module", params=["saturating", "series"])
def runs(request, tmp_path_factory):
    kind = request.param
    tmp = tmp_path_factory.mktemp(kind)
    truth, crossing, rough = _run(kind, tmp / "rough", ROUGH[kind])
    _, _, exact = _run(kind, tmp / "true", TRUE[kind])
    return kind, truth, crossing, rough, exact


def _truth_values(kind, truth):
    out = {}
    for rid, k in truth.k_ref.items():
        out[f"k_ref_fitted:{rid}"] = k
        out[f"activation_energy:{rid}"] = truth.activation_energy[rid]
    out[f"K_A:{MAIN[kind]}"] = truth.adsorption
    out["calibration_kd"] = truth.kd
    return out


def test_rough_start_reports_the_data_parameters(runs):
    kind, truth, _, rough, _ = runs
    p = rough.kinetic_parameters.set_index("name")
    for name, v in _truth_values(kind, truth).items():
        assert p.loc[name, "ci_low"] <= v <= p.loc[name, "ci_high"], (name, v, p.loc[name].to_dict())
        assert p.loc[name, "method"].startswith("estimated"), p.loc[name, "method"]
    assert p.loc["parameter_set", "value"] == 1.0
    assert rough.summary["parameters"].startswith("rate-law parameters estimated from")
    # every reaction with a rate law is calibrated, and the model used downstream is the fitted one
    assert all(law.source == "fitted" for law in rough.model.rate_laws.values())


def test_per_interval_k_ref_and_activity_follow_the_truth(runs):
    kind, truth, _, rough, _ = runs
    s = rough.series.join(truth.frame[["k_ref_true", "activity"]].add_suffix("_sim"), how="inner")
    ok = s["steady"].astype(bool)
    err = (s.loc[ok, f"k_ref:{MAIN[kind]}"] / s.loc[ok, "k_ref_true_sim"] - 1).abs()
    # issue goal: median error of the per-interval k_ref in steady hours within 0.8 %
    assert err.median() <= 0.008, err.median()
    a_err = (s.loc[ok, "activity"] / s.loc[ok, "activity_sim"] - 1).abs()
    assert a_err.median() <= 0.008, a_err.median()


def test_forecast_date_within_three_days_of_the_truth(runs):
    _, _, crossing, rough, _ = runs
    f = rough.assessment.forecast
    assert f.status == "crossing", f.text
    assert abs(f.central - crossing) <= pd.Timedelta("3D"), (f.central, crossing)
    assert f.earliest <= crossing <= f.latest
    # the forecast's model used the analysed feed, and said so
    assert "analysed A" in rough.summary["feed_basis"]


def test_answer_does_not_depend_on_the_starting_point(runs):
    kind, truth, _, rough, exact = runs
    a = rough.kinetic_parameters.set_index("name")
    b = exact.kinetic_parameters.set_index("name")
    for name in _truth_values(kind, truth):
        assert a.loc[name, "value"] == pytest.approx(b.loc[name, "value"], rel=2e-3), name
    fa, fb = rough.assessment.forecast, exact.assessment.forecast
    assert abs(fa.central - fb.central) <= pd.Timedelta("6h")
    da, db = rough.assessment.daily_rows().sum(), exact.assessment.daily_rows().sum()
    for part in ("gap_feed_kg", "gap_conversion_kg"):
        # the attribution has the same sign and size from either start
        assert (da[part] > 0) == (db[part] > 0), part
        assert da[part] == pytest.approx(db[part], rel=0.02, abs=50.0), part


def test_narrow_temperature_span_holds_ea(tmp_path):
    """One temperature throughout: Ea cannot be determined; held at its configured value, and said."""
    _, _, res = _run("saturating", tmp_path, ROUGH["saturating"], temps=(348.0,))
    p = res.kinetic_parameters.set_index("name")
    row = p.loc["activation_energy:conversion"]
    assert row["value"] == 50e3
    assert row["method"].startswith("held at the configured value: the steady stretches span")
    assert "temperature range cannot determine Ea" in row["method"]
    assert any("activation_energy held" in m for m in res.calibration.problems)


@pytest.mark.slow
@pytest.mark.parametrize("kind", ["saturating", "series"])
def test_intervals_cover_the_truth_over_ten_seeds(kind, tmp_path):
    """Rough start, seeds 0-9 (the first ten, not chosen): every parameter's 95 % interval holds the
    simulator's value in at least 9 of the 10 (issue goal: >= 90 %).

    Not a proof of calibration: on 40 seeds (0-9, 20-49) the saturating unit's decay constant was
    covered in 36 (90 %), k_ref and Ea in 38, K in 39; the standardised errors had sd 1.19 for kd
    (about 1.2 standard errors of that sd above 1) and 0.9-1.0 for the others; the series unit 20/20
    on seeds 0-9 and 20-29 (our runs, recorded here as a regression reference).
    """
    hits, misses = {}, []
    for seed in range(10):
        truth, _, res = _run(kind, tmp_path / str(seed), ROUGH[kind], seed=seed)
        p = res.kinetic_parameters.set_index("name")
        for name, v in _truth_values(kind, truth).items():
            ok = bool(p.loc[name, "ci_low"] <= v <= p.loc[name, "ci_high"])
            hits[name] = hits.get(name, 0) + ok
            if not ok:
                misses.append((seed, name, v, p.loc[name, "ci_low"], p.loc[name, "ci_high"]))
    assert min(hits.values()) >= 9, (hits, misses)
