"""Back-calculation of one unit against steady states solved independently with scipy.brentq."""

from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from scipy.optimize import brentq

from kinetrace.config import load_config, unit_model
from kinetrace.kinetics.arrhenius import R_GAS
from kinetrace.pipeline import back_calculate

DEMO = Path(__file__).resolve().parents[2] / "config" / "demo_plant.toml"


@pytest.fixture(scope="module")
def models():
    cfg = load_config(DEMO)
    return {u.id: unit_model(u) for u in cfg.units}


def _k(law, temp, activity=1.0):
    return activity * law.k_ref * np.exp(-law.activation_energy / R_GAS * (1 / temp - 1 / law.reference_temperature))


def _r210_steady_state(model, q, temp, activity, c_feed):
    """Steady state of R-210 (saturating main + second-order dimerisation) by brentq on the MA balance."""
    v = 12.0
    main, side = model.rate_laws["addition"], model.rate_laws["dimerisation"]
    k1, k2 = _k(main, temp, activity), _k(side, temp, activity)
    K = main.params["adsorption"]["MA"]

    def balance(ca):  # 0 = q (C_A0 - C_A) / V - r1 - 2 r2
        return q * (c_feed - ca) / v - k1 * ca / (1 + K * ca) - 2 * k2 * ca**2

    ca = brentq(balance, 0.0, c_feed, xtol=1e-13, rtol=1e-15)
    r1, r2 = k1 * ca / (1 + K * ca), k2 * ca**2
    return v, ca, r1 * v / q, r2 * v / q, r1, r2


def test_r210_recovers_rates_k_ref_and_activity(models):
    # common practice, no source: at an exact steady state the back-calculation must give back the
    # rate constants used to make it, at any temperature, once Arrhenius-normalised.
    m = models["R-210"]
    idx = pd.date_range("2026-09-01", periods=6, freq="h", tz="UTC")
    temps = np.array([333.15, 338.15, 343.15, 348.15, 340.0, 336.0])
    acts = np.array([1.0, 1.0, 0.9, 0.8, 0.7, 0.6])
    q = 4.0 / 3600
    rows = []
    for t, a in zip(temps, acts):
        v, ca, c_mmp, c_dim, r1, r2 = _r210_steady_state(m, q, t, a, 2000.0)
        rows.append(dict(feed_flow=q, outlet_flow=q, temperature=t, volume=v, **{
            "feed_conc:MA": 2000.0, "feed_conc:MMP": 0.0, "feed_conc:DIM": 0.0, "feed_conc:MeOH": 19500.0,
            "outlet_conc:MA": ca, "outlet_conc:MMP": c_mmp, "outlet_conc:DIM": c_dim, "_r1": r1, "_r2": r2}))
    roles = pd.DataFrame(rows, index=idx)
    out = back_calculate(roles.drop(columns=["_r1", "_r2"]), m, steady=pd.Series(True, index=idx))
    np.testing.assert_allclose(out["rate:addition"], roles["_r1"], rtol=1e-9)
    np.testing.assert_allclose(out["rate:dimerisation"], roles["_r2"], rtol=1e-9)
    law = m.rate_laws["addition"]
    np.testing.assert_allclose(out["k_ref:addition"], acts * law.k_ref, rtol=1e-9)
    np.testing.assert_allclose(out["k_ref:dimerisation"], acts * m.rate_laws["dimerisation"].k_ref, rtol=1e-9)
    # no fresh period in these rows -> the configured k_ref is the fresh baseline
    assert out.attrs["fresh_basis"]["addition"] == "configured k_ref of the rate law"
    np.testing.assert_allclose(out["activity"], acts, rtol=1e-9)
    assert (out["rate_basis"] == "extents").all()
    # conversion by definition, and -r_A = F_A0 X / V equals r1 + 2 r2
    x = 1 - roles["outlet_conc:MA"] / 2000.0
    np.testing.assert_allclose(out["conversion"], x, rtol=1e-12)
    np.testing.assert_allclose(out["key_rate"], roles["_r1"] + 2 * roles["_r2"], rtol=1e-9)
    # production of MMP (C5H10O3, 118.13 g/mol) as mass rate
    np.testing.assert_allclose(out["production_mass"], q * roles["outlet_conc:MMP"] * m.molar_masses[2], rtol=1e-12)


def test_r220_power_law_in_two_species_rebuilds_water_from_extents(models):
    # r = k C_AA C_W; water is not analysed, so C_W must be rebuilt from the extent:
    # C_W = C_W0 - (C_AA0 - C_AA) (stoichiometry AA + W -> 2 AcOH). Steady state by brentq.
    m = models["R-220"]
    law = m.rate_laws["hydrolysis"]
    idx = pd.date_range("2026-10-01", periods=4, freq="h", tz="UTC")
    q, v = 20 * 3.785411784e-3 / 60, m.fixed_volume
    rows = []
    for t, a in zip([323.15, 328.15, 333.15, 330.0], [1.0, 0.95, 0.9, 0.85]):
        k = _k(law, t, a)
        ca = brentq(lambda c: q * (1500 - c) / v - k * c * (6000 - (1500 - c)), 0.0, 1500.0, xtol=1e-12)
        rows.append({"feed_flow": q, "outlet_flow": q, "temperature": t, "volume": v,
                     "feed_conc:AA": 1500.0, "feed_conc:W": 6000.0, "feed_conc:AcOH": 0.0,
                     "outlet_conc:AA": ca, "_a": a})
    roles = pd.DataFrame(rows, index=idx)
    out = back_calculate(roles.drop(columns="_a"), m, steady=pd.Series(True, index=idx))
    np.testing.assert_allclose(out["k_ref:hydrolysis"], roles["_a"] * law.k_ref, rtol=1e-8)
    # AcOH not analysed: production from the extent, 2 mol per mol AA converted
    np.testing.assert_allclose(out["production"], 2 * q * (1500 - roles["outlet_conc:AA"]), rtol=1e-10)


def test_reversible_isomerisation_unit_by_config_alone():
    # A reactor with other chemistry, written as configuration only: A <=> B in an inert solvent S,
    # reversible rate law r = k (C_A - C_B / K_eq(T)), van 't Hoff K_eq. Steady state by brentq on the
    # A balance (independent of the back-calculation); the back-calculation must give k_ref back.
    import copy
    import tomllib

    from kinetrace.config import validate_config

    raw = tomllib.loads(DEMO.read_text())
    u = copy.deepcopy(raw["units"][1])
    u.update(id="R-900", key_reactant="A")
    u["species"] = [{"name": "A", "molar_mass": "0.1 kg/mol"}, {"name": "B", "molar_mass": "0.1 kg/mol"},
                    {"name": "S", "molar_mass": "0.09 kg/mol"}]
    u["reactions"] = [{"id": "isom", "equation": "A <=> B", "rate_law": {
        "method": "reversible", "k_ref": "2e-4 1/s", "activation_energy": "70 kJ/mol",
        "reference_temperature": "60 degC", "orders": {"A": 1}, "reverse_orders": {"B": 1},
        "equilibrium_constant": 4.0, "reaction_enthalpy": "-20 kJ/mol"}}]
    u["feed"] = {"A": "2.0 mol/L", "B": "0 mol/L"}
    u["tags"] = [t for t in u["tags"] if t["role"] in ("feed_flow", "outlet_flow", "temperature")] + [
        {"tag": "R900-AT-1", "role": "outlet_conc", "species": "A", "unit": "mol/L", "sigma": "1 %",
         "sampling": "analyzer", "max_age": "30 min"}]
    u["target"] = {"species": "B", "rate": "5 t/d"}
    raw["units"] = [u]
    m = unit_model(validate_config(raw).units[0])
    law = m.rate_laws["isom"]
    idx = pd.date_range("2026-10-01", periods=3, freq="h", tz="UTC")
    q, v = 1e-3, m.fixed_volume
    rows = []
    for t, a in zip([323.15, 333.15, 343.15], [1.0, 0.9, 0.8]):
        k = _k(law, t, a)
        keq = 4.0 * np.exp(20e3 / R_GAS * (1 / t - 1 / law.reference_temperature))   # van 't Hoff, dH = -20 kJ/mol
        ca = brentq(lambda c: q * (2000 - c) / v - k * (c - (2000 - c) / keq), 0.0, 2000.0, xtol=1e-12)
        rows.append({"feed_flow": q, "outlet_flow": q, "temperature": t, "volume": v, "feed_conc:A": 2000.0,
                     "feed_conc:B": 0.0, "outlet_conc:A": ca, "_a": a})
    roles = pd.DataFrame(rows, index=idx)
    out = back_calculate(roles.drop(columns="_a"), m, steady=pd.Series(True, index=idx))
    np.testing.assert_allclose(out["k_ref:isom"], roles["_a"] * law.k_ref, rtol=1e-8)
