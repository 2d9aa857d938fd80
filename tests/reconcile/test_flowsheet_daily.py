"""The flowsheet around a unit stated in the configuration ([units.flowsheet]) and reconciled in
the daily check (kinetrace.pipeline.network_step)."""

import copy
import tomllib
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from kinetrace.config import unit_model, validate_config
from kinetrace.errors import ConfigError
from kinetrace.pipeline.network_step import flowsheet_columns
from kinetrace.pipeline.roles import role_frame

from .network_cases import simulate_network

DEMO = Path(__file__).resolve().parents[2] / "config" / "demo_plant.toml"
FEED, PROD, AA, ACOH = "CB2~R220~FEED~GPM", "CB2~R220~PROD~GPM", "CB2~R220~AA~AN", "CB2~R220~ACOH~AN"
# invented meters of the loop around R-220: fresh feed, separator product and recycle
EXTRA = [("F220-FT-300", "stream_flow", None), ("S220-FT-301", "stream_flow", None),
         ("S220-FT-302", "stream_flow", None), ("S220-AT-301", "stream_conc", "AA"),
         ("S220-AT-302", "stream_conc", "AcOH"), ("S220-AT-303", "stream_conc", "AA"),
         ("S220-AT-304", "stream_conc", "AcOH")]


def loop_config(raw):
    u = raw["units"][1]
    for tag, role, sp in EXTRA:
        t = {"tag": tag, "role": role, "unit": "m3/s" if role == "stream_flow" else "mol/m3", "sigma": "1 %"}
        if sp:
            t["species"] = sp
        u["tags"].append(t)
    u["flowsheet"] = {
        "nodes": [{"id": "M", "kind": "mixer"}, {"id": "R", "kind": "reactor"}, {"id": "S", "kind": "separator"}],
        "streams": [
            {"id": "fresh", "target": "M", "flow_tag": "F220-FT-300",
             "known": {"AA": "1.5 mol/L", "W": "6.0 mol/L", "AcOH": "0 mol/L"}},
            {"id": "mix", "source": "M", "target": "R", "flow_tag": FEED},
            {"id": "eff", "source": "R", "target": "S", "flow_tag": PROD, "conc_tags": {"AA": AA, "AcOH": ACOH}},
            {"id": "prod", "source": "S", "flow_tag": "S220-FT-301",
             "conc_tags": {"AA": "S220-AT-301", "AcOH": "S220-AT-302"}},
            {"id": "rec", "source": "S", "target": "M", "flow_tag": "S220-FT-302",
             "conc_tags": {"AA": "S220-AT-303", "AcOH": "S220-AT-304"}},
        ]}
    return raw


@pytest.fixture()
def raw():
    return tomllib.loads(DEMO.read_text())


def simulated_readings(model, T, rng, bias):
    """Steady loop (linear solve of the balances with split fractions) with 1 % meter noise."""
    fs = model.flowsheet
    nodes = [(n.id, n.kind) for n in fs.nodes]
    streams = [(s.id, s.source, s.target) for s in fs.streams]
    feeds = {"fresh": (2e-4, np.array([1500.0, 6000.0, 0.0, 2000.0]))}
    phi = {"M": {"mix": 1.0}, "R": {"eff": 1.0}, "S": {"prod": 0.7, "rec": 0.3}}
    psi = {"M": {"mix": np.ones(4)}, "R": {"eff": np.ones(4)},
           "S": {"prod": np.array([0.4, 0.7, 0.9, 0.7]), "rec": np.array([0.6, 0.3, 0.1, 0.3])}}
    x = simulate_network(nodes, streams, list(model.species), model.nu, feeds, phi, psi, {"R": np.array([0.15])})
    S, ns = len(streams), len(model.species)
    col = {}
    for j, st in enumerate(fs.streams):
        if st.flow_tag:
            col[st.flow_tag] = x[j]
        for sp, tg in st.conc_tags.items():
            col[tg] = x[S + j * ns + model.species.index(sp)]
    idx = pd.date_range("2026-02-01", periods=T, freq="h", tz="UTC")
    vals = {tg: v * (1 + 0.01 * rng.standard_normal(T)) for tg, v in col.items()}
    vals[PROD] = vals[PROD] + bias * col[PROD]
    vals["CB2~R220~TEMP~F"] = np.full(T, 333.15)
    return pd.DataFrame(vals, index=idx)


def test_biased_reactor_outlet_meter_flagged_by_the_daily_flowsheet(raw):
    model = unit_model(validate_config(loop_config(raw)).units[1])
    rng = np.random.default_rng(3)
    values = simulated_readings(model, 120, rng, bias=0.06)
    out = flowsheet_columns(values, values.notna(), model)
    assert out["flowsheet_global_test_alarm"].mean() > 0.9
    assert out[f"flowsheet_suspect:{PROD}"].mean() > 0.9
    others = [c for c in out if c.startswith("flowsheet_suspect:") and c != f"flowsheet_suspect:{PROD}"]
    assert out[others].to_numpy().mean() < 0.1
    clean = flowsheet_columns(*(lambda v: (v, v.notna()))(simulated_readings(model, 120, rng, 0.0)), model)
    assert clean["flowsheet_global_test_alarm"].mean() < 0.15
    # the extent at the reactor node: 0.15 mol/s simulated, within 3 % (1 % meters)
    assert clean["flowsheet_extent:hydrolysis"].median() == pytest.approx(0.15, rel=0.03)
    # separator meters are kept out of the reactor's own roles
    roles = role_frame(values, values.notna(), pd.Series(model.fixed_volume, index=values.index), model)
    assert not any(c.startswith("stream_") for c in roles.columns)


def test_no_flowsheet_no_columns(raw):
    model = unit_model(validate_config(raw).units[1])
    v = pd.DataFrame({FEED: [1.0]}, index=pd.date_range("2026-01-01", periods=1, tz="UTC"))
    assert flowsheet_columns(v, v.notna(), model).shape == (1, 0)


def test_bad_flowsheets_reported_with_key_paths(raw):
    bad = loop_config(copy.deepcopy(raw))
    fs = bad["units"][1]["flowsheet"]
    fs["streams"][2]["flow_tag"] = "CB2~R220~TEMP~F"                 # a temperature tag
    fs["streams"][3]["conc_tags"]["XX"] = "S220-AT-301"              # undeclared species
    bad["units"][1]["tags"][-1].pop("sigma")                         # a meter without sigma
    bad["units"][1]["tags"].append({"tag": "S220-FT-399", "role": "stream_flow", "unit": "m3/s", "sigma": "1 %"})
    with pytest.raises(ConfigError) as e:
        validate_config(bad)
    by = {p.where: p.message for p in e.value.problems}
    assert "role 'temperature'" in by["units[1].flowsheet.streams[2].flow_tag"]
    assert "'XX' is not declared" in by["units[1].flowsheet.streams[3]"]
    assert "needs a sigma" in by["units[1].flowsheet.streams[4].conc_tags.AcOH"]
    assert "'S220-FT-399'" in by["units[1].tags"]
    # without the separator analysers the extent cannot be found: refused at load
    bad = loop_config(copy.deepcopy(raw))
    for st in bad["units"][1]["flowsheet"]["streams"][2:]:
        st["conc_tags"] = {}
    bad["units"][1]["tags"] = [t for t in bad["units"][1]["tags"] if t["role"] != "stream_conc"]
    bad["units"][1]["tags"] = [t for t in bad["units"][1]["tags"] if t.get("role") != "outlet_conc"]
    with pytest.raises(ConfigError, match=r"extent\[R,hydrolysis\]"):
        validate_config(bad)
    bad = loop_config(copy.deepcopy(raw))
    bad["units"][1]["flowsheet"]["nodes"][0]["kind"] = "reactor"
    with pytest.raises(ConfigError, match="exactly one node of kind 'reactor'"):
        validate_config(bad)
