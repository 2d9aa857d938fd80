"""Units with a side reaction: steady state against an ODE integration, and the forecast on the simulator."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import integrate

from kinetrace.config.model import RateLawModel, UnitModel
from kinetrace.kinetics.arrhenius import at_temperature
from kinetrace.monitor.forecast import forecast_crossing, required_activity
from kinetrace.monitor.trend import fit_activity_trend
from kinetrace.monitor.whatif import production_at, what_if


def _two_reaction_unit():
    """Invented unit: A + B -> P on the catalyst (saturating in A), 2 A -> D thermal (second order)."""
    laws = {
        "main": RateLawModel("saturating", 6e-4, 58e3, 343.15, {"orders": {"A": 1.0}, "adsorption": {"A": 5e-4},
                                                                  "denominator_exponent": 1.0}),
        "side": RateLawModel("power_law", 2.4e-8, 85e3, 343.15, {"orders": {"A": 2.0}}),
    }
    nu = np.array([[-1.0, -2.0], [-1.0, 0.0], [1.0, 0.0], [0.0, 1.0]])
    return UnitModel("R-900", ("A", "B", "P", "D"), np.full(4, 0.1), ("main", "side"), nu, laws, "A", "P", 1.5,
                     10.0, None, {"A": 2000.0, "B": 19500.0}, (), (318.0, 358.0), (4e-4, 2e-3),
                     catalysed=("main",))


def _ode_steady_production(unit, activity, q, temp, vol):
    """Reference: integrate dC/dt = (C0 - C)/tau + nu r(C) with scipy.integrate.solve_ivp to steady state."""
    tau = vol / q
    c0 = np.array([unit.feed.get(s, 0.0) for s in unit.species])
    k1 = activity * at_temperature(6e-4, temp, 58e3, 343.15)
    k2 = at_temperature(2.4e-8, temp, 85e3, 343.15)

    def rhs(_, c):
        ca = max(c[0], 0.0)
        r = np.array([k1 * ca / (1 + 5e-4 * ca), k2 * ca * ca])
        return (c0 - c) / tau + unit.nu @ r

    sol = integrate.solve_ivp(rhs, (0.0, 60 * tau), c0, method="LSODA", rtol=1e-10, atol=1e-8)
    return q * sol.y[2, -1]


@pytest.mark.parametrize("activity, temp", [(1.0, 343.15), (0.4, 350.0), (0.05, 330.0)])
def test_two_reaction_steady_state_matches_ode_integration(activity, temp):
    unit = _two_reaction_unit()
    q, vol = 4.9 / 3600.0, 10.0
    ref = _ode_steady_production(unit, activity, q, temp, vol)
    got = production_at(unit, activity=activity, feed_flow=q, temperature=temp, volume=vol)
    # ODE integrated over 60 residence times to rtol 1e-10: agreement to 1e-6 relative
    assert got == pytest.approx(ref, rel=1e-6)


def test_two_reaction_required_activity_round_trip_and_what_if():
    unit = _two_reaction_unit()
    q, temp, vol = 4.9 / 3600.0, 343.15, 10.0
    a = required_activity(unit, feed_flow=q, temperature=temp, volume=vol)
    assert 0 < a < 1
    assert production_at(unit, activity=a, feed_flow=q, temperature=temp, volume=vol) == pytest.approx(1.5, rel=1e-8)
    # the side reaction costs product: a one-reaction model of the same unit needs less activity
    single = UnitModel(**{**unit.__dict__, "rate_laws": {"main": unit.rate_laws["main"]}})
    assert required_activity(single, feed_flow=q, temperature=temp, volume=vol) < a
    res = {r.lever: r for r in what_if(unit, activity=0.8 * a, feed_flow=q, temperature=temp, volume=vol)}
    for lever in ("temperature", "feed_flow"):
        r = res[lever]
        lo, hi = r.limits
        assert r.setting is None or lo <= r.setting <= hi
        if r.feasible:
            assert r.production >= 1.5 * (1 - 1e-9)


@pytest.mark.slow
def test_forecast_on_the_simulator_contains_the_first_day_below_target():
    """The project's simulator (an independent dynamic integration of the demo plant) runs R-210 for
    90 days; its ground truth says on which UTC day the production first falls below target. From
    the first 54 days of its true activity (plus 1 % noise, as a back-calculated activity would carry)
    and the operating point of the last two days, the forecast interval must contain that day."""
    import kinetrace.config as kc
    import kinetrace.simulator as sim
    from kinetrace.simulator.generate import unit_facts
    from kinetrace.simulator.plant import simulate_unit, truth_frame

    sc = sim.load_scenario(sim.generate.DEFAULT_SCENARIO)
    unit = kc.unit_model(kc.load_config(sim.generate.DEFAULT_CONFIG).units[0])
    plan = sc.plan(unit.id)
    run, feed = simulate_unit(unit, plan, 90 * 86400.0, seed=sc.seed, step=600.0)
    truth = truth_frame(unit, plan, run, feed, sc.start)
    first_below = pd.Timestamp(unit_facts(unit, plan, truth, sc)["first_day_below_target"], tz="UTC")
    hourly = truth.set_index("timestamp").resample("1h").mean(numeric_only=True)
    cut = hourly.index[0] + pd.Timedelta(days=54)
    seen = hourly.loc[hourly.index < cut]
    obs = seen["activity"] + np.random.default_rng(0).normal(0.0, 0.01, len(seen))
    trend = fit_activity_trend(obs, detect_changes=False)
    last = seen.iloc[-48:]
    a_req = required_activity(unit, feed_flow=last["feed_flow"].mean(), temperature=last["temperature"].mean(),
                              volume=last["volume"].mean())
    fc = forecast_crossing(trend, a_req, unit=unit.id)
    assert fc.status == "crossing"
    assert fc.earliest.floor("D") <= first_below <= fc.latest.floor("D")
    # the fitted trend follows the true activity at the forecast start (noise 0.01 on about 1300 points)
    a_fit = trend.predict([seen.index[-1]])["activity"].iloc[0]
    assert a_fit == pytest.approx(seen["activity"].iloc[-1], abs=0.005)


def _series_unit(catalysed):
    """Invented unit: A + B -> P, then P + B -> Q, both on one catalyst (second order each)."""
    laws = {
        "first": RateLawModel("power_law", 3e-6, 60e3, 340.0, {"orders": {"A": 1.0, "B": 1.0}}),
        "second": RateLawModel("power_law", 1e-6, 70e3, 340.0, {"orders": {"P": 1.0, "B": 1.0}}),
    }
    nu = np.array([[-1.0, 0.0], [-1.0, -1.0], [1.0, -1.0], [0.0, 1.0]])
    return UnitModel("R-901", ("A", "B", "P", "Q"), np.full(4, 0.1), ("first", "second"), nu, laws, "A", "P", 0.5,
                     6.0, None, {"A": 1500.0, "B": 3000.0}, (), (320.0, 360.0), (2e-4, 2e-3), catalysed=catalysed)


@pytest.mark.parametrize("activity", [1.0, 0.6, 0.2])
def test_activity_multiplies_every_catalysed_reaction(activity):
    """Reference: scipy's solve_ivp of dC/dt = (C0 - C)/tau + nu r(C) to steady state, with the catalyst
    activity on both reactions (the default) or on the first only (``catalysed=("first",)``)."""
    q, temp, vol = 1.2e-3, 345.0, 6.0
    tau = vol / q
    c0 = np.array([1500.0, 3000.0, 0.0, 0.0])
    for catalysed, a2 in ((None, activity), (("first",), 1.0)):
        unit = _series_unit(catalysed)
        k1 = activity * at_temperature(3e-6, temp, 60e3, 340.0)
        k2 = a2 * at_temperature(1e-6, temp, 70e3, 340.0)

        def rhs(_, c, k1=k1, k2=k2, unit=unit):
            c = np.maximum(c, 0.0)
            return (c0 - c) / tau + unit.nu @ np.array([k1 * c[0] * c[1], k2 * c[2] * c[1]])

        sol = integrate.solve_ivp(rhs, (0.0, 60 * tau), c0, method="LSODA", rtol=1e-10, atol=1e-8)
        got = production_at(unit, activity=activity, feed_flow=q, temperature=temp, volume=vol)
        # ODE integrated over 60 residence times to rtol 1e-10: agreement to 1e-6 relative
        assert got == pytest.approx(q * sol.y[2, -1], rel=1e-6)
