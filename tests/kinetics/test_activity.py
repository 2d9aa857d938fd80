"""Checks of kinetrace.kinetics.activity: k_ref(t), fresh baseline, activity."""

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from kinetrace.errors import DataQualityError, KinetraceError
from kinetrace.kinetics.activity import (
    Baseline,
    activity,
    apparent_reference_rate_constant,
    fresh_baseline,
    list_baseline_methods,
)
from kinetrace.kinetics.arrhenius import at_temperature
from kinetrace.kinetics.balances import consumption_rate_steady
from kinetrace.kinetics.cstr import solve_cstr

DAY = 86400.0


def _decaying_unit(n_days=60, kd_per_day=0.01):
    """First-order CSTR with exponentially decaying activity and a wandering temperature."""
    idx = pd.date_range("2026-02-01", periods=n_days, freq="D", tz="UTC")
    t_days = np.arange(n_days, dtype=float)
    temp = 345.0 + 4.0 * np.sin(t_days / 7.0)  # K
    k_ref_true = 3e-3 * np.exp(-kd_per_day * t_days)  # 1/s at 345 K
    k = at_temperature(k_ref_true, temp, 70e3, 345.0)
    tau, c0 = 900.0, 1200.0
    sol = solve_cstr("power_law", tau, {"A": c0}, k, key="A", stoichiometry={"A": -1}, orders={"A": 1})
    c = sol.concentrations["A"]
    return idx, temp, c, tau, c0, k_ref_true


def test_activity_recovers_exponential_decay_levenspiel_ch21():
    # Levenspiel (1999) ch. 21 [memory]: first-order CSTR with exponential decay,
    # ln(C_A0/C_A - 1) = ln(k tau) - k_d t. At constant T the slope of that line is
    # -k_d; here T varies, so kinetrace first moves k to T_ref, and the decay rate
    # of the fitted baseline must equal the k_d used in the simulation.
    idx, temp, c, tau, c0, k_ref_true = _decaying_unit()
    rate = consumption_rate_steady(c0, pd.Series(c, index=idx), 1.0, 1.0 / tau)
    k_ref = apparent_reference_rate_constant(
        "power_law", rate, {"A": pd.Series(c, index=idx)}, temp,
        activation_energy=70e3, reference_temperature=345.0, orders={"A": 1},
    )
    assert isinstance(k_ref, pd.Series) and k_ref.index.equals(idx)
    assert k_ref.to_numpy() == pytest.approx(k_ref_true, rel=1e-10)
    base = fresh_baseline(k_ref, method="fitted")
    assert base.decay_rate * DAY == pytest.approx(0.01, rel=1e-8)
    assert base.value == pytest.approx(3e-3, rel=1e-8)
    a = activity(k_ref, base)
    assert a.to_numpy() == pytest.approx(np.exp(-0.01 * np.arange(60)), rel=1e-8)
    # the Levenspiel line itself, at constant temperature
    k_const = 3e-3 * np.exp(-0.01 * np.arange(60))
    c_const = c0 / (1 + k_const * tau)
    reg = stats.linregress(np.arange(60.0), np.log(c0 / c_const - 1))
    assert -reg.slope == pytest.approx(0.01, rel=1e-10)
    assert reg.intercept == pytest.approx(np.log(3e-3 * tau), rel=1e-10)


def test_period_baseline_and_standard_error():
    idx = pd.date_range("2026-02-01", periods=60, freq="D", tz="UTC")
    rng = np.random.default_rng(8)
    k = pd.Series(2e-3 * (1 + 0.05 * rng.normal(size=len(idx))), index=idx)
    k.iloc[3] = np.nan
    k.iloc[4] = -1e-4
    base = fresh_baseline(k, period=(idx[0], idx[19]), statistic="mean")
    used = k.iloc[:20].drop(idx[[3, 4]])
    assert base.n_used == 18 and base.n_excluded == 2
    assert base.value == pytest.approx(used.mean(), rel=1e-12)
    # standard error of a mean, s / sqrt(n) (any statistics text; common practice)
    assert base.standard_error == pytest.approx(used.std(ddof=1) / np.sqrt(18), rel=1e-12)
    med = fresh_baseline(k, period=(idx[0], idx[19]))
    assert med.value == pytest.approx(np.median(used), rel=1e-12)
    mask = np.zeros(len(k), dtype=bool)
    mask[:20] = True
    assert fresh_baseline(k, period=mask).value == med.value


def test_activity_types_and_errors():
    assert activity(np.array([0.01, np.nan]), 0.02)[0] == 0.5
    assert activity(0.01, Baseline(0.02, 0.0, 3, 0, "period")) == 0.5
    assert list_baseline_methods() == ["fitted", "period"]
    with pytest.raises(KinetraceError, match="finite and positive"):
        activity(0.01, 0.0)
    k = pd.Series([1.0, 2.0], index=pd.date_range("2026-01-01", periods=2, tz="UTC"))
    with pytest.raises(ValueError, match="allowed: fitted, period"):
        fresh_baseline(k, method="oldest")
    with pytest.raises(DataQualityError, match="need 3"):
        fresh_baseline(k, method="fitted")
    with pytest.raises(KinetraceError, match="Series"):
        fresh_baseline([1.0, 2.0])
