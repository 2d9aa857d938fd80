"""Correlated measurement errors stated in the plant configuration ([[units.correlations]])."""

import copy
import tomllib
from pathlib import Path

import pytest

from kinetrace.config import unit_model, validate_config
from kinetrace.errors import ConfigError

DEMO = Path(__file__).resolve().parents[2] / "config" / "demo_plant.toml"


@pytest.fixture()
def raw():
    return tomllib.loads(DEMO.read_text())


def test_pairs_and_matrix_reach_the_unit_model(raw):
    u = raw["units"][0]
    u["correlations"] = [
        {"tags": ["R210-FT-101", "R210-FT-102"], "coefficient": 0.3},
        {"tags": ["R210-AT-104", "R210-AT-105", "R210-LAB-DIM"],
         "matrix": [[1.0, 0.5, 0.0], [0.5, 1.0, 0.2], [0.0, 0.2, 1.0]]},
    ]
    model = unit_model(validate_config(raw).units[0])
    assert set(model.correlations) == {("R210-FT-101", "R210-FT-102", 0.3), ("R210-AT-104", "R210-AT-105", 0.5),
                                       ("R210-AT-105", "R210-LAB-DIM", 0.2)}


def test_bad_correlations_reported_with_key_path_and_tags(raw):
    bad = copy.deepcopy(raw)
    bad["units"][0]["correlations"] = [
        {"tags": ["R210-FT-101", "R210-XX-999"], "coefficient": 0.3},       # unknown tag
        {"tags": ["R210-FT-101", "R210-FT-102", "R210-TT-103"], "coefficient": 0.3},  # three tags, one number
        {"tags": ["R210-AT-104", "R210-AT-105"], "matrix": [[1.0, 0.5]]},   # not square
    ]
    with pytest.raises(ConfigError) as e:
        validate_config(bad)
    where = [p.where for p in e.value.problems]
    assert "units[0].correlations[0].tags" in where
    assert "units[0].correlations[1].coefficient" in where
    assert "units[0].correlations[2].matrix" in where
    assert any("'R210-XX-999'" in p.message for p in e.value.problems)


def test_not_positive_definite_is_refused_naming_the_tags(raw):
    bad = copy.deepcopy(raw)
    # 0.9, 0.9 and -0.9 among three tags cannot hold together (smallest eigenvalue < 0)
    bad["units"][0]["correlations"] = [
        {"tags": ["R210-FT-101", "R210-FT-102"], "coefficient": 0.9},
        {"tags": ["R210-FT-102", "R210-LT-107"], "coefficient": 0.9},
        {"tags": ["R210-FT-101", "R210-LT-107"], "coefficient": -0.9},
    ]
    with pytest.raises(ConfigError) as e:
        validate_config(bad)
    (p,) = [p for p in e.value.problems if p.where == "units[0].correlations"]
    assert "not positive definite" in p.message
    assert all(t in p.message for t in ("R210-FT-101", "R210-FT-102", "R210-LT-107"))
    bad["units"][0]["correlations"] = [
        {"tags": ["R210-AT-104", "R210-AT-105"], "matrix": [[1.0, 0.5], [0.4, 1.0]]}]
    with pytest.raises(ConfigError, match="symmetric"):
        validate_config(bad)
