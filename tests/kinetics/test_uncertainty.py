"""Delta-method propagation checked against Monte Carlo (GUM and GUM Supplement 1)."""

from functools import partial

import numpy as np
import pytest

from kinetrace.errors import KinetraceError
from kinetrace.kinetics.arrhenius import R_GAS
from kinetrace.kinetics.uncertainty import delta_method, k_ref_from_steady_balance, monte_carlo

N_T = 40  # time steps
RNG = np.random.default_rng(42)
VALUES = {
    "c_in": np.full(N_T, 1200.0),  # mol/m^3
    "c_out": np.linspace(300.0, 900.0, N_T),  # conversion 75 % .. 25 %
    "flow": np.full(N_T, 1.5e-3),  # m^3/s
    "volume": np.full(N_T, 3.0),  # m^3
    "temperature": 345.0 + RNG.normal(0, 3, N_T),  # K
}
# common practice, no source: analyser 0.5 % of reading, flow meter 2 %, level 1 %, 0.3 K
SD = {
    "c_in": 6.0,
    "c_out": 0.005 * VALUES["c_out"],
    "flow": 3e-5,
    "volume": 0.03,
    "temperature": 0.3,
}


def _k_first_order(**x):
    return k_ref_from_steady_balance(
        x["c_in"], x["c_out"], x["flow"], x["volume"], x["temperature"], method="power_law", key="A",
        activation_energy=70e3, reference_temperature=345.0, orders={"A": 1},
    )


def _k_saturating_co_reactant(**x):
    return k_ref_from_steady_balance(
        x["c_in"], x["c_out"], x["flow"], x["volume"], x["temperature"], method="saturating", key="A",
        activation_energy=55e3, reference_temperature=345.0, other_conc={"B": 400.0},
        orders={"A": 1, "B": 1}, adsorption={"A": 0.002, "B": 0.001}, denominator_exponent=2,
    )


@pytest.mark.parametrize("func", [_k_first_order, _k_saturating_co_reactant], ids=["first", "saturating"])
def test_delta_method_agrees_with_monte_carlo(func):
    # JCGM 101:2008 (GUM Supplement 1) validates the GUM law of propagation by Monte
    # Carlo; the brief asks agreement within 10 %. With 4000 draws the MC standard
    # deviation itself is uncertain by about 1/sqrt(2*4000) = 1.1 %.
    value, sd_delta = delta_method(func, VALUES, SD)
    mean, sd_mc, n_ok = monte_carlo(func, VALUES, SD, n_draws=4000, seed=7)
    assert (n_ok == 4000).all()
    assert sd_delta == pytest.approx(sd_mc, rel=0.10)
    assert mean == pytest.approx(value, rel=0.02)


def test_delta_method_matches_analytic_first_order():
    # analytic partial derivatives of k = Q (C_in - C) / (V C) at T = T_ref
    # (first-order law; straightforward calculus, common practice):
    # dk/dC_in = Q/(V C), dk/dC = -Q C_in/(V C^2), dk/dQ = k/Q, dk/dV = -k/V,
    # dk/dT = k Ea/(R T^2)
    vals = {k: v[:5] for k, v in VALUES.items()}
    vals["temperature"] = np.full(5, 345.0)
    sd = {k: (v[:5] if np.ndim(v) else v) for k, v in SD.items()}
    _, s = delta_method(_k_first_order, vals, sd)
    q, v, cin, c = vals["flow"], vals["volume"], vals["c_in"], vals["c_out"]
    k = q * (cin - c) / (v * c)
    var = ((q / (v * c)) * sd["c_in"]) ** 2 + ((q * cin / (v * c**2)) * sd["c_out"]) ** 2
    var += (k / q * sd["flow"]) ** 2 + (k / v * sd["volume"]) ** 2
    var += (k * 70e3 / (R_GAS * 345.0**2) * sd["temperature"]) ** 2
    assert s == pytest.approx(np.sqrt(var), rel=1e-5)


def test_correlated_analyser_errors():
    # feed and reactor samples on the same analyser: a shared calibration error
    # (correlation 0.8) largely cancels in C_in - C; delta and MC must both see it
    names = list(VALUES)
    sd = np.array([6.0, 6.0, 3e-5, 0.03, 0.3])
    corr = np.eye(5)
    corr[0, 1] = corr[1, 0] = 0.8
    cov = corr * np.outer(sd, sd)
    func = partial(_k_first_order)
    _, s_corr = delta_method(func, VALUES, cov)
    _, s_ind = delta_method(func, VALUES, dict(zip(names, sd)))
    _, s_mc, _ = monte_carlo(func, VALUES, cov, n_draws=4000, seed=3)
    assert s_corr == pytest.approx(s_mc, rel=0.10)
    assert np.all(s_corr < s_ind)


def test_errors():
    with pytest.raises(KinetraceError, match="unknown input"):
        delta_method(lambda a: a, {"a": 1.0}, {"b": 0.1})
    with pytest.raises(KinetraceError, match="covariance must be"):
        delta_method(lambda a, b: a + b, {"a": 1.0, "b": 2.0}, np.eye(3))
