"""Plant configuration: the demo file loads; a file with many mistakes reports them all."""

import copy
import tomllib
from pathlib import Path

import pytest

from kinetrace.config import load_config, unit_model, validate_config
from kinetrace.errors import ConfigError

DEMO = Path(__file__).resolve().parents[1] / "config" / "demo_plant.toml"


@pytest.fixture()
def raw():
    return tomllib.loads(DEMO.read_text())


def test_demo_config_loads_in_si():
    cfg = load_config(DEMO)
    r210 = unit_model(cfg.units[0])
    assert r210.species == ("MA", "MeOH", "MMP", "DIM")
    assert r210.nu[:, 1].tolist() == [-2.0, 0.0, 0.0, 1.0]
    law = r210.rate_laws["addition"]
    # 70 degC = 343.15 K (NIST SP 811: T/K = t/degC + 273.15, exact)
    assert law.reference_temperature == pytest.approx(343.15, abs=1e-12)
    assert law.activation_energy == pytest.approx(58e3)
    # 0.5 L/mol = 5e-4 m3/mol (1 L = 1e-3 m3 exactly)
    assert law.params["adsorption"]["MA"] == pytest.approx(5e-4, rel=1e-12)
    r220 = unit_model(cfg.units[1])
    # 1500 US gal = 5.678117676 m3 (NIST SP 811: 1 gal = 3.785411784e-3 m3, exact)
    assert r220.fixed_volume == pytest.approx(1500 * 3.785411784e-3, rel=1e-12)
    # second-order rate constant: 1 L/(mol min) = 1e-3/60 m3/(mol s)
    assert r220.rate_laws["hydrolysis"].k_ref == pytest.approx(0.0090e-3 / 60, rel=1e-12)


def test_many_mistakes_reported_together_with_key_paths(raw):
    bad = copy.deepcopy(raw)
    u = bad["units"][0]
    u["reactions"][0]["equation"] = "MA + MeOH -> MMPX"              # undeclared species
    u["reactions"][1]["rate_law"]["k_ref"] = "2.4e-8 1/s"            # wrong dimension for order 2
    u["tags"][0]["unit"] = "kg/h"                                    # mass flow unit on a volumetric role
    u["tags"][4]["species"] = "XYZ"                                  # unknown species
    u["tags"][5]["sampling"] = "sometimes"                           # not an allowed value
    u["target"]["rate"] = "17.5 furlongs"                            # unknown unit
    u["limits"]["temperature"] = ["90 degC", "45 degC"]              # reversed
    u["volume"]["banana"] = 3                                        # unknown key
    bad["units"][1]["species"][3]["formula"] = "C4H8O2Zq"            # bad formula
    bad["units"][1]["reactions"][0]["equation"] = "AA + W -> AcOH"   # does not balance (C, H, O)
    del bad["units"][1]["key_reactant"]                              # missing key
    with pytest.raises(ConfigError) as info:
        validate_config(bad, source="broken.toml")
    err = info.value
    where = {p.where for p in err.problems}
    text = str(err)
    assert text.startswith("broken.toml: ")
    # structural problems (pydantic) ...
    assert "units[0].tags[5].sampling" in where
    assert "units[0].volume.banana" in where
    assert "units[1].key_reactant" in where
    # ... and the cross-checks of the unit that did validate, all in the same error
    assert "units[0].reactions[0].equation" in where
    assert "units[0].reactions[1].rate_law.k_ref" in where
    assert "units[0].tags[0].unit" in where
    assert "units[0].target.rate" in where or "units[0].target" in where
    assert "units[0].limits.temperature" in where
    assert "units[0].tags[4].species" in where
    assert len(err.problems) >= 8
    assert "'MMPX' is not declared" in text
    assert "'kg/h'" in text


def test_cross_checks_of_a_valid_structure(raw):
    bad = copy.deepcopy(raw)
    u = bad["units"][1]
    u["reactions"][0]["equation"] = "AA + W -> AcOH"
    u["tags"] = [t for t in u["tags"] if t["role"] != "temperature"]
    u["key_reactant"] = "DXN"
    u["activity"]["fresh_period"] = ["2026-09-04T00:00:00Z", "2026-09-01T00:00:00Z"]
    bad["site"]["timezone"] = "Europe/Atlantis"
    with pytest.raises(ConfigError) as info:
        validate_config(bad)
    msgs = [str(p) for p in info.value.problems]
    assert any(m.startswith("units[1].reactions[0].equation: reaction 'hydrolysis' (AA + W -> AcOH) does not balance: C is 4 on the left, 2 on the right (also H, O)")
               for m in msgs), msgs
    assert "units[1].tags: no tag has role 'temperature'; the design equation needs it" in msgs
    assert "units[1].key_reactant: species 'DXN' is consumed by no reaction" in msgs
    assert any(m.startswith("site.timezone: unknown IANA time zone 'Europe/Atlantis'") for m in msgs)
    assert "units[1].activity.fresh_period: start must be before end" in msgs


def test_toml_syntax_error_and_missing_file(tmp_path):
    p = tmp_path / "plant.toml"
    p.write_text("[site]\nname = 'x\n")
    with pytest.raises(ConfigError, match=r"plant.toml: 1 configuration problem:\n  - \(TOML syntax\)"):
        load_config(p)
    with pytest.raises(ConfigError, match="file not found"):
        load_config(tmp_path / "nope.toml")


def test_catalysed_reactions_default_and_checks(raw):
    # R-210 declares its thermal dimerisation as not catalysed; R-220 takes the default (every law)
    cfg = load_config(DEMO)
    assert unit_model(cfg.units[0]).catalysed_reactions == ("addition",)
    assert unit_model(cfg.units[1]).catalysed_reactions == ("hydrolysis",)
    bad = copy.deepcopy(raw)
    bad["units"][0]["activity"]["catalysed"] = ["dimerisation", "cracking"]
    with pytest.raises(ConfigError) as info:
        validate_config(bad)
    msgs = [str(p) for p in info.value.problems]
    assert ("units[0].activity.catalysed: reaction 'cracking' is not a reaction of the unit with a rate law "
            "(those are ['addition', 'dimerisation'])") in msgs
    assert ("units[0].activity.catalysed: the main reaction 'addition' must be catalysed: the catalyst "
            "activity is defined on it") in msgs
