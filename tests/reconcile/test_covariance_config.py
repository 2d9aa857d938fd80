"""Correlated measurement errors stated in the plant configuration ([[units.correlations]]) and
used by the unit's reconciliation in the daily check."""

import copy
import tomllib
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from kinetrace.config import unit_model, validate_config
from kinetrace.errors import ConfigError
from kinetrace.pipeline.derivatives import smoothed_derivative
from kinetrace.pipeline.reconciliation import packed_correlations, reconcile_unit
from kinetrace.pipeline.roles import role_frame
from kinetrace.reconcile import reconcile_cstr

DEMO = Path(__file__).resolve().parents[2] / "config" / "demo_plant.toml"
FEED, PROD, AA, ACOH = "CB2~R220~FEED~GPM", "CB2~R220~PROD~GPM", "CB2~R220~AA~AN", "CB2~R220~ACOH~AN"


@pytest.fixture()
def raw():
    return tomllib.loads(DEMO.read_text())


def test_pairs_and_matrix_reach_the_unit_model(raw):
    raw["units"][1]["correlations"] = [
        {"tags": [FEED, PROD], "coefficient": 0.3},
        {"tags": [AA, ACOH, "CB2~R220~FEED~GPM"], "matrix": [[1.0, 0.5, 0.0], [0.5, 1.0, 0.0], [0.0, 0.0, 1.0]]},
    ]
    model = unit_model(validate_config(raw).units[1])
    assert set(model.correlations) == {(FEED, PROD, 0.3), (AA, ACOH, 0.5)}
    assert packed_correlations(model) == {("q_in", "q_out"): 0.3, ("c_out[AA]", "c_out[AcOH]"): 0.5}


def test_bad_correlations_reported_with_key_path_and_tags(raw):
    bad = copy.deepcopy(raw)
    bad["units"][0]["correlations"] = [
        {"tags": ["R210-FT-101", "R210-XX-999"], "coefficient": 0.3},       # unknown tag
        {"tags": ["R210-FT-101", "R210-FT-102", "R210-AT-105"], "coefficient": 0.3},  # three tags, one number
        {"tags": ["R210-FT-101", "R210-FT-102"], "matrix": [[1.0, 0.5]]},   # not square
        {"tags": ["R210-TT-103", "R210-FT-101"], "coefficient": 0.1},       # temperature is not reconciled
        {"tags": ["R210-AT-104", "R210-FT-101"], "coefficient": 0.1},       # MA also read by the lab
    ]
    with pytest.raises(ConfigError) as e:
        validate_config(bad)
    by = {p.where: p.message for p in e.value.problems}
    assert "'R210-XX-999'" in by["units[0].correlations[0].tags"]
    assert "units[0].correlations[1].coefficient" in by
    assert "units[0].correlations[2].matrix" in by
    assert "only flows and concentrations" in by["units[0].correlations[3].tags"]
    assert "only tag of its role" in by["units[0].correlations[4].tags"]


def test_not_positive_definite_is_refused_naming_the_tags(raw):
    bad = copy.deepcopy(raw)
    # 0.9, 0.9 and -0.9 among three tags cannot hold together (smallest eigenvalue < 0)
    bad["units"][1]["correlations"] = [
        {"tags": [FEED, PROD], "coefficient": 0.9},
        {"tags": [PROD, AA], "coefficient": 0.9},
        {"tags": [FEED, AA], "coefficient": -0.9},
    ]
    with pytest.raises(ConfigError) as e:
        validate_config(bad)
    (p,) = [p for p in e.value.problems if p.where == "units[1].correlations"]
    assert "not positive definite" in p.message
    assert all(t in p.message for t in (FEED, PROD, AA)) and ACOH not in p.message
    bad["units"][1]["correlations"] = [{"tags": [AA, ACOH], "matrix": [[1.0, 0.5], [0.4, 1.0]]}]
    with pytest.raises(ConfigError, match="symmetric"):
        validate_config(bad)


def test_reconcile_unit_uses_the_configured_correlation(raw):
    # R-220 (demo plant, invented): AA + W -> 2 AcOH; the two outlet concentrations come from one
    # analyzer with errors correlated 0.7 (invented). The unit's reconciliation must equal
    # reconcile_cstr given that correlation directly, and differ from the uncorrelated one.
    raw["units"][1]["correlations"] = [{"tags": [AA, ACOH], "coefficient": 0.7}]
    model = unit_model(validate_config(raw).units[1])
    rng = np.random.default_rng(5)
    T = 48
    idx = pd.date_range("2026-01-01", periods=T, freq="h", tz="UTC")
    q = 2e-4
    c_in = np.array([model.feed.get(s, 0.0) for s in model.species])
    xi = 0.4 * q * c_in[model.index("AA")]
    c_out = c_in + model.nu[:, 0] * xi / q
    vals = {FEED: q * (1 + 0.01 * rng.standard_normal(T)), PROD: q * (1 + 0.01 * rng.standard_normal(T)),
            "CB2~R220~TEMP~F": np.full(T, 333.15),
            AA: c_out[model.index("AA")] * (1 + 0.02 * rng.standard_normal(T)),
            ACOH: c_out[model.index("AcOH")] * (1 + 0.02 * rng.standard_normal(T))}
    values = pd.DataFrame(vals, index=idx)
    roles = role_frame(values, values.notna(), pd.Series(model.fixed_volume, index=idx), model)
    out = reconcile_unit(roles, model, sigma="config").frame
    args = dict(q_in=roles["feed_flow"].to_numpy(), q_out=roles["outlet_flow"].to_numpy())
    c_in_r = np.column_stack([roles[f"feed_conc:{s}"] if f"feed_conc:{s}" in roles else np.full(T, np.nan)
                              for s in model.species])
    c_out_r = np.column_stack([roles[f"outlet_conc:{s}"] if f"outlet_conc:{s}" in roles else np.full(T, np.nan)
                               for s in model.species])
    s_in = np.nan_to_num(np.column_stack([roles[f"sigma:feed_conc:{s}"] if f"sigma:feed_conc:{s}" in roles
                                          else np.full(T, np.nan) for s in model.species]))
    s_out = np.nan_to_num(np.column_stack([roles[f"sigma:outlet_conc:{s}"] if f"sigma:outlet_conc:{s}" in roles
                                           else np.full(T, np.nan) for s in model.species]))
    # the hold-up terms as the unit's reconciliation forms them (default window of 5 steps)
    acc = np.nan_to_num(smoothed_derivative(roles["volume"].to_numpy()[:, None] * c_out_r, 3600.0, 5))
    kw = dict(sigma_q_in=roles["sigma:feed_flow"].to_numpy(), sigma_q_out=roles["sigma:outlet_flow"].to_numpy(),
              sigma_c_in=s_in, sigma_c_out=s_out, species=model.species, accumulation=acc)
    direct = reconcile_cstr(args["q_in"], args["q_out"], c_in_r, c_out_r, model.nu,
                            correlation={("c_out[AA]", "c_out[AcOH]"): 0.7}, **kw)
    plain = reconcile_cstr(args["q_in"], args["q_out"], c_in_r, c_out_r, model.nu, **kw)
    assert out["global_test"].to_numpy() == pytest.approx(direct.objective, rel=1e-9, abs=1e-12)
    assert np.max(np.abs(direct.objective - plain.objective)) > 0.05 * np.max(plain.objective)
