"""Checks of kinetrace.kinetics.ratelaws: definitions, round trips, input types."""

import math
import warnings

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from kinetrace.errors import KinetraceError
from kinetrace.kinetics.arrhenius import R_GAS
from kinetrace.kinetics.ratelaws import (
    apparent_rate_constant,
    driving_force,
    equilibrium_constant_at,
    list_methods,
    rate,
)

REV = dict(
    orders={"A": 1, "B": 1},
    reverse_orders={"C": 1},
    equilibrium_constant=0.05,  # m^3/mol
    reaction_enthalpy=-40e3,
    reference_temperature=330.0,
)


def test_list_and_unknown_method():
    assert list_methods() == ["power_law", "reversible", "saturating"]
    with pytest.raises(ValueError, match="allowed: power_law, reversible, saturating"):
        rate("first_order", {"A": 1.0}, 1.0)
    with pytest.raises(KinetraceError, match="unknown parameter"):
        rate("power_law", {"A": 1.0}, 1.0, orders={"A": 1}, order=2)
    with pytest.raises(KinetraceError, match="missing parameter"):
        rate("saturating", {"A": 1.0}, 1.0, orders={"A": 1})
    with pytest.raises(KinetraceError, match="needs the concentration of 'B'"):
        rate("power_law", {"A": 1.0}, 1.0, orders={"A": 1, "B": 1})
    with pytest.raises(KinetraceError, match="needs temperature"):
        rate("reversible", {"A": 1.0, "B": 1.0, "C": 1.0}, 1.0, **REV)


def test_power_law_definition():
    # definition r = k C_A^a C_B^b (Fogler 2016, eq. 3-6 form); hand arithmetic
    r = rate("power_law", {"A": 200.0, "B": 50.0}, 2e-6, orders={"A": 1, "B": 2})
    assert r == pytest.approx(2e-6 * 200.0 * 2500.0, rel=1e-14)


def test_saturating_definition():
    # Hougen-Watson form k C_A C_B / (1 + K_A C_A + K_B C_B)^2; hand arithmetic
    r = rate(
        "saturating",
        {"A": 100.0, "B": 20.0},
        1e-3,
        orders={"A": 1, "B": 1},
        adsorption={"A": 0.01, "B": 0.05},
        denominator_exponent=2,
    )
    assert r == pytest.approx(1e-3 * 2000.0 / 3.0**2, rel=1e-14)


def test_reversible_equilibrium_and_van_t_hoff():
    # at equilibrium C_C / (C_A C_B) = K_eq(T) the net rate vanishes
    t = 350.0
    k_eq = equilibrium_constant_at(0.05, t, -40e3, 330.0)
    # van 't Hoff, integrated with constant dH (Levenspiel 1999, eq. 2.34, from memory)
    assert k_eq == pytest.approx(0.05 * math.exp(40e3 / R_GAS * (1 / t - 1 / 330.0)), rel=1e-14)
    conc = {"A": 10.0, "B": 20.0, "C": k_eq * 200.0}
    assert rate("reversible", conc, 1e-3, temperature=t, **REV) == pytest.approx(0.0, abs=1e-15)
    # driving force zero -> k undefined -> NaN, with no warning
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        exact = dict(REV, equilibrium_constant=0.5, reaction_enthalpy=0.0)
        conc0 = {"A": 1.0, "B": 1.0, "C": 0.5}  # 1 - 0.5/0.5 == 0 exactly
        assert math.isnan(
            apparent_rate_constant("reversible", 0.0, conc0, temperature=t, **exact)
        )


def test_negative_concentration_gives_nan_silently():
    c = np.array([1.0, -1e-3, 0.0, np.nan])
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        r = rate("power_law", {"A": c}, 1.0, orders={"A": 0.5})
        k = apparent_rate_constant("power_law", np.ones(4), {"A": c}, orders={"A": 0.5})
        g = driving_force("saturating", {"A": c}, orders={"A": 1}, adsorption={"A": 1.0})
    assert r[0] == 1.0 and np.isnan(r[1]) and r[2] == 0.0 and np.isnan(r[3])
    assert k[0] == 1.0 and np.isnan(k[1:]).all()  # zero conc -> zero driving force -> NaN
    assert np.isnan(g[1]) and g[2] == 0.0


def test_series_index_kept():
    idx = pd.date_range("2026-03-01", periods=3, freq="min", tz="UTC")
    ca = pd.Series([100.0, 90.0, 80.0], index=idx)
    t = pd.Series([340.0, 341.0, 342.0], index=idx)
    r = rate("reversible", {"A": ca, "B": 50.0, "C": 1.0}, 1e-4, temperature=t, **REV)
    assert isinstance(r, pd.Series) and r.index.equals(idx)
    k = apparent_rate_constant("reversible", r, {"A": ca, "B": 50.0, "C": 1.0}, temperature=t, **REV)
    assert isinstance(k, pd.Series) and np.allclose(k.to_numpy(), 1e-4, rtol=1e-12)


conc_st = st.floats(1e-3, 1e4)
k_st = st.floats(1e-9, 1e2)


@settings(max_examples=80, deadline=None)
@given(ca=conc_st, cb=conc_st, cc=conc_st, k=k_st, t=st.floats(280.0, 450.0),
       a=st.floats(0.0, 3.0), b=st.floats(0.0, 2.0), ka=st.floats(0.0, 1.0),
       m=st.sampled_from([1, 2]))
def test_inversion_round_trip(ca, cb, cc, k, t, a, b, ka, m):
    conc = {"A": ca, "B": cb, "C": cc}
    cases = [
        ("power_law", dict(orders={"A": a, "B": b})),
        ("saturating", dict(orders={"A": a}, adsorption={"A": ka, "C": 0.1},
                            denominator_exponent=m)),
        ("reversible", REV),
    ]
    for method, params in cases:
        temperature = t if method == "reversible" else None
        r = rate(method, conc, k, temperature=temperature, **params)
        g = driving_force(method, conc, temperature=temperature, **params)
        if g == 0.0 or not np.isfinite(r) or abs(g) < 1e-300:
            continue
        k_back = apparent_rate_constant(method, r, conc, temperature=temperature, **params)
        assert k_back == pytest.approx(k, rel=1e-9)
