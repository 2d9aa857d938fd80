"""Activity needed for the target (steady-state CSTR) and the date the decay trend crosses it."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import optimize

from kinetrace.errors import KinetraceError
from kinetrace.monitor.decay import decay_activity
from kinetrace.monitor.forecast import forecast_crossing, required_activity
from kinetrace.monitor.trend import fit_activity_trend
from kinetrace.monitor.whatif import production_at

from .conftest import make_unit

# NIST SP 811 (2008) Appendix B, exact: ft^3, US gallon, lb (REFERENCES.md)
FT3, GAL, LBMOL = 0.028316846592, 3.785411784e-3, 453.59237


def _glycol_unit(volume_m3):
    """Fogler, Elements of Chemical Reaction Engineering, ethylene glycol CSTR example [found, REFERENCES.md]:
    first order, k = 0.311 1/min, C_A0 = 0.5 lbmol/ft^3, v0 = 15.34 ft^3/min."""
    c_a0 = 0.5 * LBMOL / FT3
    return make_unit(k_ref=0.311 / 60.0, t_ref=328.0, c_a0=c_a0, volume=volume_m3,
                     target=0.8 * c_a0 * 15.34 * FT3 / 60.0), c_a0, 15.34 * FT3 / 60.0


def test_fogler_glycol_cstr_volume_and_conversion():
    unit, c_a0, q = _glycol_unit(1480 * GAL)
    x = production_at(unit, activity=1.0, feed_flow=q, temperature=328.0, volume=1480 * GAL) / (q * c_a0)
    assert x == pytest.approx(0.80, abs=5e-3)  # printed "X = 0.8" for "about 1480 gal" (3 s.f.)
    # activity needed for X = 0.8 in 197.3 ft^3 (1476 gal) [computed]: exactly the fresh catalyst
    assert required_activity(unit, feed_flow=q, temperature=328.0, volume=197.3 * FT3) == pytest.approx(1.0,
                                                                                                         rel=5e-4)
    # two 800-gal CSTRs in parallel (each half the flow): X = 0.81 [found]
    x_par = production_at(unit, activity=1.0, feed_flow=q / 2, temperature=328.0, volume=800 * GAL) / (q / 2 * c_a0)
    assert x_par == pytest.approx(0.81, abs=5e-3)
    # in series: X = 0.90 [found]; second reactor fed with the first one's outlet
    p1 = production_at(unit, activity=1.0, feed_flow=q, temperature=328.0, volume=800 * GAL)
    c_a1 = c_a0 - p1 / q
    p2 = production_at(unit, activity=1.0, feed_flow=q, temperature=328.0, volume=800 * GAL,
                       feed_conc={"A": c_a1, "P": p1 / q})
    assert p2 / (q * c_a0) == pytest.approx(0.90, abs=5e-3)


def test_required_activity_round_trip_second_order_against_brentq():
    # second order in A: tau k a C_A^2 = C_A0 - C_A; checked with scipy.optimize.brentq (reference library)
    unit = make_unit(k_ref=2e-6, orders={"A": 2.0}, target=0.6, volume=0.5)
    q, temp = 1e-3, 345.0
    a = required_activity(unit, feed_flow=q, temperature=temp, volume=0.5)
    k = a * 2e-6 * np.exp(-60e3 / 8.314462618 * (1 / temp - 1 / 350.0))
    tau = 0.5 / q
    c_a = optimize.brentq(lambda c: tau * k * c * c - (1000.0 - c), 0.0, 1000.0, xtol=1e-12)
    assert q * (1000.0 - c_a) == pytest.approx(0.6, rel=1e-9)
    assert production_at(unit, activity=a, feed_flow=q, temperature=temp, volume=0.5) == pytest.approx(0.6,
                                                                                                          rel=1e-9)


def test_required_activity_saturating_law_round_trip():
    unit = make_unit(method="saturating", params={"adsorption": {"A": 2e-3}, "denominator_exponent": 1.0},
                     k_ref=0.02, target=0.5)
    a = required_activity(unit, feed_flow=1e-3, temperature=352.0, volume=0.4)
    assert production_at(unit, activity=a, feed_flow=1e-3, temperature=352.0, volume=0.4) == pytest.approx(
        0.5, rel=1e-9)


def test_required_activity_limits_and_arrays():
    unit = make_unit()
    # the target needs more key reactant than is fed: no activity can meet it
    assert required_activity(unit, feed_flow=5e-4, temperature=350.0, volume=0.4) == np.inf
    # feed so large that... a zero target needs no activity
    assert required_activity(unit, feed_flow=1e-3, temperature=350.0, volume=0.4, target_rate=0.0) == 0.0
    a = required_activity(unit, feed_flow=np.array([1e-3, 1.2e-3, np.nan]), temperature=350.0, volume=0.4)
    assert a.shape == (3,) and np.isnan(a[2])
    # first order: a = X / ((1 - X) k tau) with X = target / (Q C_A0) (Fogler ch. 5, CSTR first order)
    x = 0.8 / (1.2e-3 * 1000.0)
    assert a[1] == pytest.approx(x / ((1 - x) * 0.01 * 0.4 / 1.2e-3), rel=1e-12)


def _synthetic_trend(seed, kd_per_day=0.007, noise=0.01, days=40):
    idx = pd.date_range("2027-01-05", periods=24 * days, freq="h", tz="UTC")
    tos = (idx - idx[0]).total_seconds().to_numpy()
    true = dict(a0=0.98, kd=kd_per_day / 86400.0)
    rng = np.random.default_rng(seed)
    obs = pd.Series(decay_activity("exponential", tos, **true) + rng.normal(0, noise, idx.size), index=idx)
    return obs, true, idx[0]


def test_forecast_interval_contains_true_crossing_date():
    # invented unit R-210, first order; the activity needed comes from the CSTR model, the true crossing
    # from the generating decay law (kd = 0.007 1/day), where production really meets the target
    unit = make_unit(target=0.70)
    q, temp, vol = 1e-3, 350.0, 0.4
    a_req = required_activity(unit, feed_flow=q, temperature=temp, volume=vol)
    hits = 0
    for seed in range(12):
        obs, true, start = _synthetic_trend(seed)
        t_cross = start + pd.Timedelta(seconds=np.log(true["a0"] / a_req) / true["kd"])
        p_cross = production_at(unit, activity=a_req, feed_flow=q, temperature=temp, volume=vol)
        assert p_cross == pytest.approx(0.70, rel=1e-9)
        trend = fit_activity_trend(obs, detect_changes=False)
        fc = forecast_crossing(trend, a_req, unit="R-210", level=0.95)
        assert fc.status == "crossing"
        hits += fc.earliest <= t_cross <= fc.latest
        assert "At the present decline, unit R-210 falls below its target around" in fc.text
    # 95 % band, 12 synthetic charges: all or all but one contain the true date (binomial)
    assert hits >= 11


def test_forecast_states_other_cases_plainly():
    obs, _, _ = _synthetic_trend(1)
    trend = fit_activity_trend(obs, method="exponential", detect_changes=False)
    now_fit = float(trend.predict([trend.last_observation])["activity"].iloc[0])
    below = forecast_crossing(trend, now_fit + 0.1, unit="R-210")
    assert below.status == "below_now" and "already below" in below.text
    far = forecast_crossing(trend, 0.01, unit="R-210", horizon_days=30)
    assert far.status == "beyond_horizon" and far.central is None and "until at least" in far.text
    with pytest.raises(KinetraceError, match="activity needed is not known"):
        forecast_crossing(trend, float("nan"), unit="R-210")
    none = forecast_crossing(trend, np.inf, unit="R-210")
    assert none.status == "unreachable" and "No catalyst activity" in none.text
    flat = pd.Series(0.9 + np.random.default_rng(0).normal(0, 0.005, 500),
                     index=pd.date_range("2027-01-01", periods=500, freq="h", tz="UTC"))
    flat_fc = forecast_crossing(fit_activity_trend(flat, method="linear", detect_changes=False), 0.5)
    assert flat_fc.status in ("not_declining", "beyond_horizon")


def test_input_types_of_the_cstr_helpers():
    # scalar -> float, ndarray -> ndarray, Series -> Series (same index), NaN -> NaN (STYLE.md habit 8)
    unit = make_unit()
    assert isinstance(production_at(unit, activity=1.0, feed_flow=1e-3, temperature=350.0, volume=0.4), float)
    arr = production_at(unit, activity=np.array([1.0, 0.5]), feed_flow=1e-3, temperature=350.0, volume=0.4)
    assert isinstance(arr, np.ndarray) and arr.shape == (2,)
    idx = pd.date_range("2027-01-01", periods=3, freq="h", tz="UTC")
    q = pd.Series([1e-3, np.nan, 1.1e-3], index=idx)
    p = production_at(unit, activity=0.9, feed_flow=q, temperature=350.0, volume=0.4)
    assert isinstance(p, pd.Series) and p.index.equals(idx) and np.isnan(p.iloc[1])
    a = required_activity(unit, feed_flow=q, temperature=350.0, volume=0.4)
    assert isinstance(a, pd.Series) and np.isnan(a.iloc[1]) and a.iloc[0] == pytest.approx(1.0)
