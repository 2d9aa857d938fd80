"""Checks of kinetrace.kinetics.balances: steady and dynamic rate back-calculation."""

import numpy as np
import pandas as pd
import pytest
from scipy.integrate import solve_ivp

from kinetrace.errors import DataQualityError, KinetraceError
from kinetrace.kinetics.balances import (
    consumption_rate_dynamic,
    consumption_rate_steady,
    rates_from_extents,
    sample_interval_of,
    savgol_derivative,
)

LITRE, MIN = 1e-3, 60.0


def test_levenspiel_example_5_1_steady_rates():
    # Levenspiel (1999), Chemical Reaction Engineering 3rd ed., Example 5.1 [memory]:
    # 1 L/min of liquid with C_A0 = 0.10, C_B0 = 0.01 mol/L through a 1-L mixed reactor;
    # outlet C_A = 0.02, C_B = 0.03, C_C = 0.04 mol/L. Rates: -r_A = 0.08,
    # -r_B = -0.02 (B formed), -r_C = -0.04 mol/(L min).
    c_in = pd.DataFrame({"A": [100.0], "B": [10.0], "C": [0.0]})  # mol/m^3
    c_out = pd.DataFrame({"A": [20.0], "B": [30.0], "C": [40.0]})
    r = consumption_rate_steady(c_in, c_out, 1 * LITRE, 1 * LITRE / MIN)
    per_l_min = r.iloc[0] * MIN / 1e3  # mol/(L min)
    assert per_l_min.to_dict() == pytest.approx({"A": 0.08, "B": -0.02, "C": -0.04}, rel=1e-12)


def _simulate(q_in, q_out, k=2e-3, c_feed=1000.0, v0=2.0, t_end=4000.0, dt=5.0):
    """First-order A -> P in a stirred tank, solved with scipy solve_ivp (reference)."""
    def rhs(t, y):
        n_a, v = y  # moles of A [mol], holdup [m^3]
        c = n_a / v
        return [q_in(t) * c_feed - q_out(t) * c - k * c * v, q_in(t) - q_out(t)]

    tau0 = v0 / q_out(0.0)
    c0 = c_feed / (1.0 + k * tau0)
    t = np.arange(0.0, t_end + dt / 2, dt)
    sol = solve_ivp(rhs, (0.0, t_end), [c0 * v0, v0], t_eval=t, rtol=1e-10, atol=1e-8, max_step=dt)
    n_a, v = sol.y
    return t, n_a / v, v


def test_dynamic_balance_recovers_rate_during_feed_step_where_steady_form_fails():
    # feed step 2e-3 -> 4e-3 m^3/s at t = 1000 s (tau 1000 s -> 500 s), k = 2e-3 1/s
    def q(t):
        return 2e-3 if t < 1000.0 else 4e-3

    t, c_true, v = _simulate(q, q)
    rng = np.random.default_rng(11)
    c_meas = c_true + 0.3 * rng.normal(size=t.size)  # analyser noise 0.3 mol/m^3 (~0.1 %)
    q_meas = np.array([q(ti) for ti in t])
    idx = pd.date_range("2026-09-14 06:00", periods=t.size, freq="5s", tz="UTC")
    c_series = pd.Series(c_meas, index=idx)
    true_rate = 2e-3 * c_true
    dyn = consumption_rate_dynamic(1000.0, c_series, 2.0, q_meas, window=21)
    stat = consumption_rate_steady(1000.0, c_series, 2.0, q_meas)
    assert isinstance(dyn, pd.Series) and dyn.index.equals(idx)
    after = (t > 1000.0 + 21 * 5) & (t < 2500.0)  # beyond one window from the step
    rel_dyn = np.abs(dyn.to_numpy()[after] / true_rate[after] - 1)
    rel_ss = np.abs(stat.to_numpy()[after] / true_rate[after] - 1)
    assert np.median(rel_dyn) < 0.01 and rel_dyn.max() < 0.05
    assert rel_ss.max() > 0.3  # steady-state form is wrong during the transient
    late = t > 3800.0  # both agree once steady again (15 time constants later)
    assert np.median(np.abs(stat.to_numpy()[late] / true_rate[late] - 1)) < 0.01


def test_dynamic_balance_with_level_change():
    # filling tank: Q_in 3e-3, Q_out 2e-3 m^3/s, dV/dt = 1e-3 m^3/s
    t, c_true, v = _simulate(lambda t: 3e-3, lambda t: 2e-3, t_end=1500.0)
    dyn = consumption_rate_dynamic(1000.0, c_true, v, 3e-3, 2e-3, sample_interval=5.0, window=11)
    # noise-free data: the only error is the polynomial truncation of the 11-point
    # quadratic fit on a curved response, below 0.1 %
    assert dyn[5:-5] == pytest.approx(2e-3 * c_true[5:-5], rel=1e-3)
    # ignoring dV/dt (constant V passed) biases the rate
    biased = consumption_rate_dynamic(1000.0, c_true, float(v.mean()), 3e-3, 2e-3, sample_interval=5.0)
    assert np.max(np.abs(biased[5:-5] / (2e-3 * c_true[5:-5]) - 1)) > 0.05


def test_window_trades_noise_against_bias():
    # Savitzky & Golay (1964): a longer window lowers derivative noise and raises
    # smoothing bias near fast changes (common practice, no source for the figures)
    def q(t):
        return 2e-3 if t < 1000.0 else 4e-3

    t, c_true, _ = _simulate(q, q)
    c_meas = c_true + 0.3 * np.random.default_rng(4).normal(size=t.size)
    q_meas = np.array([q(ti) for ti in t])
    true_rate = 2e-3 * c_true
    err = {}
    for w in (7, 61):
        dyn = consumption_rate_dynamic(1000.0, c_meas, 2.0, q_meas, sample_interval=5.0, window=w)
        e = dyn / true_rate - 1
        err[w] = (np.std(e[(t > 400) & (t < 800)]), np.max(np.abs(e[(t > 1000) & (t < 1100)])))
    assert err[61][0] < err[7][0] / 5  # noise
    assert err[61][1] > err[7][1]  # bias right after the step


def test_savgol_derivative_exact_for_quadratic():
    # Savitzky & Golay (1964): a polynomial of degree <= polyorder is differentiated exactly
    t = np.arange(50) * 2.0
    x = 1.0 + 0.3 * t - 0.01 * t**2
    assert savgol_derivative(x, 2.0, window=9) == pytest.approx(0.3 - 0.02 * t, abs=1e-10)


def test_rates_from_extents():
    # r_j = xi_j / V (Aris 1965)
    xi = pd.DataFrame({"r1": [5.0, 6.0], "r2": [1.0, np.nan]})
    r = rates_from_extents(xi, np.array([2.0, 3.0]))
    assert isinstance(r, pd.DataFrame)
    assert r["r1"].tolist() == [2.5, 2.0] and np.isnan(r["r2"].iloc[1])
    assert np.isnan(rates_from_extents(np.array([[1.0]]), 0.0)).all()


def test_errors():
    uneven = pd.DatetimeIndex(["2026-01-01 00:00", "2026-01-01 00:01", "2026-01-01 00:03"], tz="UTC")
    with pytest.raises(DataQualityError, match="not evenly spaced"):
        sample_interval_of(uneven)
    with pytest.raises(KinetraceError, match="odd"):
        savgol_derivative(np.ones(20), 1.0, window=10)
    with pytest.raises(DataQualityError, match="longer than the record"):
        savgol_derivative(np.ones(5), 1.0, window=11)
    with pytest.raises(KinetraceError, match="sample_interval"):
        consumption_rate_dynamic(1.0, np.ones(20), 1.0, 1.0)
