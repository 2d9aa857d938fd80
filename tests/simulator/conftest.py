"""A 3-day version of the shipped scenario with every event and fault moved inside the window."""

import tomllib
from datetime import timedelta
from pathlib import Path

import pytest

from kinetrace.config import load_config, unit_model
from kinetrace.simulator import scenario_from_dict

ROOT = Path(__file__).resolve().parents[2]
CONFIG = ROOT / "config" / "demo_plant.toml"
SCENARIO = ROOT / "sample_historian" / "scenario.toml"


def short_raw(days=3.0):
    raw = tomllib.loads(SCENARIO.read_text(encoding="utf-8"))
    t0 = raw["run"]["start"]
    h = lambda hours: t0 + timedelta(hours=hours)   # noqa: E731
    raw["run"]["days"] = days
    r210, r220 = raw["units"]
    for entry, at in zip(r210["schedule"][1:], (8, 20, 50)):
        entry["at"] = h(at)
    r210["shutdown"].update(start=h(30), end=h(40), recovery="2 h")
    for entry, at in zip(r220["schedule"][1:], (6, 26, 60)):
        entry["at"] = h(at)
    f = raw["faults"]
    f["bias"][0]["start"] = h(36)
    f["frozen"][0].update(start=h(12), duration="5 h")
    f["dropout"][0].update(start=h(15), duration="3 h")
    f["dropout"][1].update(start=h(50), duration="2 h")
    f["bad_stretch"][0].update(start=h(44), duration="2 h")
    f["bad_stretch"][1].update(start=h(20), duration="1 h")
    f["validation"][0].update(start=h(9), every="1 d")
    return raw


@pytest.fixture(scope="session")
def short_scenario():
    return scenario_from_dict(short_raw(), source="short scenario")


@pytest.fixture(scope="session")
def models():
    return {u.id: unit_model(u) for u in load_config(CONFIG).units}


@pytest.fixture(scope="session")
def short_output(tmp_path_factory, short_scenario):
    from kinetrace.simulator import generate_sample_historian

    out = tmp_path_factory.mktemp("short")
    return generate_sample_historian(CONFIG, out, scenario=short_scenario)
