"""Tag unit conversion to SI, checked against NIST SP 811 (2008) Appendix B factors and an independent pint registry.

NIST SP 811 (Thompson & Taylor 2008, Appendix B.8/B.9), exact by definition:
US gallon = 3.785411784e-3 m^3; ft^3 = 2.8316846592e-2 m^3; barrel (42 US gal) =
1.58987294928e-1 m^3; pound = 0.45359237 kg (so lbmol = 453.59237 mol);
t/degF -> T/K = (t + 459.67)/1.8. Tolerance 1e-12 relative: the factors are exact
and both sides are double-precision products of them.
"""

import re

import numpy as np
import pint
import pytest

from kinetrace.config.schema import Tag
from kinetrace.errors import ConfigError
from kinetrace.ingest import tag_scale, unit_scales
from kinetrace.units import UnitError

from .synth import config

GAL = 3.785411784e-3     # m^3, NIST SP 811 App. B (exact)
FT3 = 2.8316846592e-2    # m^3, NIST SP 811 App. B (exact)
BBL = 1.58987294928e-1   # m^3, NIST SP 811 App. B (exact)
LB = 0.45359237          # kg, NIST SP 811 App. B (exact)

REF = pint.UnitRegistry()   # an independent registry, not the project's


def _si(unit, role="feed_flow", species=None, **kw):
    return tag_scale(Tag(tag="T", role=role, unit=unit, species=species), **kw)


@pytest.mark.parametrize("unit, factor, pint_unit", [
    ("m3/h", 1 / 3600, "m**3/hour"),
    ("L/min", 1e-3 / 60, "liter/minute"),
    ("gpm", GAL / 60, "gallon/minute"),
    ("bbl/d", BBL / 86400, "oil_barrel/day"),
    ("ft3/min", FT3 / 60, "ft**3/minute"),
])
def test_volumetric_flows(unit, factor, pint_unit):
    s = _si(unit)
    assert s.factor == pytest.approx(factor, rel=1e-12)
    assert s.factor == pytest.approx(REF.Quantity(1.0, pint_unit).to("m**3/s").magnitude, rel=1e-12)
    assert s.offset == 0.0


@pytest.mark.parametrize("unit, kg_per_s", [("kg/h", 1 / 3600), ("lb/h", LB / 3600), ("t/d", 1000 / 86400)])
def test_mass_flows_need_a_density(unit, kg_per_s):
    rho = 870.0   # kg/m^3, an invented feed density
    s = _si(unit, density=rho)
    assert s.measure == "mass_flow"
    assert s.factor == pytest.approx(kg_per_s / rho, rel=1e-12)
    with pytest.raises(UnitError, match="is a mass flow; give a density"):
        _si(unit)


@pytest.mark.parametrize("unit, factor, pint_unit", [
    ("mol/L", 1000.0, "mol/liter"),
    ("kmol/m3", 1000.0, "kmol/m**3"),
    ("lbmol/ft3", 453.59237 / FT3, None),          # 16018.46337... mol/m^3
    ("mmol/L", 1.0, "mmol/liter"),
])
def test_molar_concentrations(unit, factor, pint_unit):
    s = _si(unit, role="outlet_conc", species="AA")
    assert s.factor == pytest.approx(factor, rel=1e-12)
    if pint_unit:
        assert s.factor == pytest.approx(REF.Quantity(1.0, pint_unit).to("mol/m**3").magnitude, rel=1e-12)
    else:
        ref = REF.Quantity(LB * 1000, "mol").magnitude / REF.Quantity(1.0, "ft**3").to("m**3").magnitude
        assert s.factor == pytest.approx(ref, rel=1e-12)


def test_lbmol_per_ft3_against_the_printed_factor():
    # NIST SP 811 App. B: lb/ft^3 = 16.01846 kg/m^3 (printed to 7 s.f.), so lbmol/ft^3 = 16018.46 mol/m^3
    assert _si("lbmol/ft3", role="outlet_conc", species="AA").factor == pytest.approx(16018.46, rel=5e-7)


@pytest.mark.parametrize("unit", ["wt%", "wt %", "wtpct", "kg/kg"])
def test_mass_fraction_with_molar_mass_and_density(unit):
    rho, mm = 1030.0, 0.10209   # kg/m^3, kg/mol (acetic anhydride C4H6O3; invented liquid density)
    s = _si(unit, role="outlet_conc", species="AA", density=rho, molar_mass=mm)
    w = 5.0 if "%" in unit or "pct" in unit else 0.05
    # C = w rho / M (definition of mass fraction, common practice, no source)
    assert float(s.to_si(w)) == pytest.approx(0.05 * rho / mm, rel=1e-12)
    with pytest.raises(UnitError, match="mass fraction"):
        _si(unit, role="outlet_conc", species="AA", molar_mass=mm)


def test_mass_concentration_with_molar_mass():
    s = _si("g/L", role="outlet_conc", species="AcOH", molar_mass=0.060052)
    assert float(s.to_si(6.0052)) == pytest.approx(100.0, rel=1e-12)   # 6.0052 g/L / 60.052 g/mol = 0.1 mol/L


@pytest.mark.parametrize("unit, values, kelvin", [
    ("degF", [32.0, 212.0, -40.0], [273.15, 373.15, 233.15]),
    ("degC", [0.0, 100.0, -40.0], [273.15, 373.15, 233.15]),
    ("K", [300.0], [300.0]),
])
def test_temperatures(unit, values, kelvin):
    got = _si(unit, role="temperature").to_si(values)
    np.testing.assert_allclose(got, kelvin, rtol=1e-12)
    # NIST SP 811 B.9: T/K = (t/degF + 459.67)/1.8
    if unit == "degF":
        np.testing.assert_allclose(got, (np.array(values) + 459.67) / 1.8, rtol=1e-12)
    np.testing.assert_allclose(got, REF.Quantity(np.array(values), unit).to("K").magnitude, rtol=1e-12)


def test_level_percent_is_a_fraction_and_round_trips():
    s = _si("%", role="level")
    assert float(s.to_si(42.0)) == pytest.approx(0.42, rel=1e-15)
    t = _si("degF", role="temperature")
    np.testing.assert_allclose(t.from_si(t.to_si([100.0, 150.0])), [100.0, 150.0], rtol=1e-14)


@pytest.mark.parametrize("role, unit, message", [
    ("feed_flow", "furlong/fortnight", "is not a volume per time (e.g. m3/h, L/min, gpm) or a mass per time"),
    ("feed_flow", "mol/L", "is an amount of substance per volume, not a volume per time"),
    ("feed_flow", "M3/H", "did you mean 'm3/h'? (unit symbols are case-sensitive)"),
    ("feed_flow", "USGPM", "unknown unit 'USGPM': expected a volume per time (e.g. m3/h, L/min, gpm) or a mass per time (e.g. kg/h, lb/h); did you mean 'gpm'?"),
    ("feed_flow", "blorbs/h", "unknown unit"),
    ("outlet_conc", "%", "ambiguous: write 'wt%'"),
    ("temperature", "kPa", "is a pressure, not a temperature (e.g. degC, degF, K)"),
    ("level", "kg", "a level is read in '%' of span or in a length unit (e.g. m, mm, ft), not 'kg' (a mass)"),
])
def test_bad_units(role, unit, message):
    with pytest.raises(UnitError, match=re.escape(message)):
        _si(unit, role=role, species="AA" if role.endswith("conc") else None)


def test_a_bad_unit_is_a_config_error_naming_the_tag():
    def tweak(raw):
        raw["units"][1]["tags"][2]["unit"] = "kPa"
    with pytest.raises(ConfigError) as info:
        config({"kind": "csv", "path": "x.csv"}, tweak=tweak)
    p = [p for p in info.value.problems if p.where == "units[1].tags[2].unit"]
    assert p and "'CB2~R220~TEMP~F'" in p[0].message


def test_unit_scales_collects_every_bad_tag():
    cfg = config({"kind": "csv", "path": "x.csv"})
    unit = cfg.units[1]
    tags = [t.model_copy(update={"unit": "kg/h"}) if t.role.endswith("flow") else t for t in unit.tags]
    bad = unit.model_copy(update={"tags": tags})
    with pytest.raises(ConfigError) as info:
        unit_scales(bad, {"AA": 0.102}, where="units[1]", source="plant.toml")
    where = [p.where for p in info.value.problems]
    assert where == ["units[1].tags[0].unit", "units[1].tags[1].unit"]
    assert "'CB2~R220~FEED~GPM'" in info.value.problems[0].message


def test_psi_against_nist_sp811():
    # NIST SP 811 (2008) App. B.9: 1 psi (lbf/in^2) = 6.894 757 E+03 Pa (printed to 7 s.f.); exactly,
    # lbf = 0.45359237 kg x 9.80665 m/s^2 (B.8, standard gravity) over (0.0254 m)^2 (inch, exact)
    from kinetrace.units import from_si, to_si

    exact = LB * 9.80665 / 0.0254**2
    assert to_si(1.0, "psi", "pressure") == pytest.approx(6894.757, rel=1e-7)
    assert to_si(1.0, "psi", "pressure") == pytest.approx(exact, rel=1e-12)
    assert to_si(1.0, "psi", "pressure") == pytest.approx(REF.Quantity(1.0, "psi").to("Pa").magnitude, rel=1e-12)
    assert from_si(6894.757293168361, "psi", "pressure") == pytest.approx(1.0, rel=1e-12)
