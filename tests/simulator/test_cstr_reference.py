"""The simulator's ODE integration against analytic and published CSTR results.

References
----------
Fogler, H. S. (2016). Elements of Chemical Reaction Engineering, 5th ed., ch. 5: CSTR design
equation; ethylene glycol CSTR example (k = 0.311 1/min, v0 = 15.34 ft^3/min, about 1480 gal
for X = 0.8; two 800-gal CSTRs: X = 0.81 in parallel, 0.90 in series) [found, see REFERENCES.md].
Levenspiel, O. (1999). Chemical Reaction Engineering, 3rd ed., ch. 5 (mixed flow reactor,
first order: C = C0 / (1 + k tau)) and Example 2.3 (E = 422 kJ/mol) [memory, recomputed].
"""

import math

import numpy as np
import pint
import pytest
from scipy.optimize import brentq

from kinetrace.simulator import FeedProfile, Kinetics, LevelControl, Segment, arrhenius, integrate_cstr

UREG = pint.UnitRegistry()   # a fresh pint registry, independent of kinetrace.units


def first_order(k):
    return Kinetics.build(["A", "B"], [("power_law", k, 0.0, 300.0, {"A": 1.0}, {}, 1.0)])


NU_AB = [[-1.0], [1.0]]


def run_first_order(k, volume, flow, c0, t_end, c_start=0.0, step=60.0, rtol=1e-10):
    return integrate_cstr(NU_AB, first_order(k), [Segment(0.0, t_end, flow, 300.0)],
                          FeedProfile.constant([c0, 0.0]), initial_moles=[volume * c_start, 0.0],
                          initial_volume=volume, initial_temperature=300.0, step=step, rtol=rtol)


def steady_exit(k, volume, flow, c0):
    tau = volume / flow
    return run_first_order(k, volume, flow, c0, 40.0 * tau, c_start=c0, step=tau).conc[-1, 0]


@pytest.mark.parametrize("method", ["LSODA", "BDF", "Radau"])
def test_first_order_steady_state(method):
    # Levenspiel (1999) ch. 5 / Fogler (2016) ch. 5: C = C0 / (1 + k tau), analytic
    k, vol, q, c0 = 2.0e-3, 5.0, 1.0e-3, 1500.0
    tau = vol / q
    run = integrate_cstr(NU_AB, first_order(k), [Segment(0.0, 60.0 * tau, q, 300.0)],
                         FeedProfile.constant([c0, 0.0]), initial_moles=[0.0, 0.0], initial_volume=vol,
                         initial_temperature=300.0, step=tau, method=method, rtol=1e-10)
    # after 60 tau the start-up transient is below e^-60; the tolerance is the integrator's rtol scale
    assert run.conc[-1, 0] == pytest.approx(c0 / (1.0 + k * tau), rel=1e-7)
    assert run.conc[-1, 1] == pytest.approx(c0 - c0 / (1.0 + k * tau), rel=1e-7)


def test_first_order_step_response():
    # Analytic solution of dC/dt = (C0 - C)/tau - k C from C(0) = 0 (Levenspiel 1999 ch. 5 balance):
    # C(t) = Css (1 - exp(-t (1/tau + k))), Css = C0 / (1 + k tau)
    k, vol, q, c0 = 5.0e-4, 8.0, 2.0e-3, 2000.0
    tau = vol / q
    run = run_first_order(k, vol, q, c0, 6.0 * tau, step=60.0)
    css = c0 / (1.0 + k * tau)
    expected = css * (1.0 - np.exp(-run.t * (1.0 / tau + k)))
    np.testing.assert_allclose(run.conc[:, 0], expected, rtol=1e-7, atol=1e-6 * c0)


def test_fogler_ethylene_glycol_cstr():
    # Fogler (2016) ch. 5 example [found]: k = 0.311 1/min, v0 = 15.34 ft^3/min, V about 1480 gal -> X = 0.8
    k = (0.311 / UREG.minute).to("1/s").magnitude
    q = (15.34 * UREG.foot ** 3 / UREG.minute).to("m^3/s").magnitude
    lbmol = (1.0 * UREG.lb).to("g").magnitude * UREG.mol          # 1 lbmol = 453.59237 mol
    c0 = (0.5 * lbmol / UREG.foot ** 3).to("mol/m^3").magnitude
    v1480 = (1480 * UREG.gallon).to("m^3").magnitude
    x = 1.0 - steady_exit(k, v1480, q, c0) / c0
    assert x == pytest.approx(0.80, rel=5e-3)     # "about 1480 gal": 3 s.f. on V
    v800 = (800 * UREG.gallon).to("m^3").magnitude
    # two 800-gal CSTRs in parallel, half the feed each: X = 0.81 (printed to 2 decimals)
    assert 1.0 - steady_exit(k, v800, q / 2.0, c0) / c0 == pytest.approx(0.81, abs=5e-3)
    # in series: the first one's exit is the second one's feed: X = 0.90
    c1 = steady_exit(k, v800, q, c0)
    c2 = steady_exit(k, v800, q, c1)
    assert 1.0 - c2 / c0 == pytest.approx(0.90, abs=5e-3)


def test_saturating_steady_state_matches_brentq():
    # Steady-state balance Q (C0 - C) = V k C / (1 + K C) solved by scipy.optimize.brentq
    k, kads, vol, q, c0 = 6.0e-4, 5.0e-4, 9.6, 4.9 / 3600.0, 2000.0
    kin = Kinetics.build(["A", "P"], [("saturating", k, 0.0, 343.15, {"A": 1.0}, {"A": kads}, 1.0)])
    tau = vol / q
    run = integrate_cstr(NU_AB, kin, [Segment(0.0, 50.0 * tau, q, 343.15)], FeedProfile.constant([c0, 0.0]),
                         initial_moles=[0.0, 0.0], initial_volume=vol, initial_temperature=343.15,
                         step=tau, rtol=1e-10)
    c_ref = brentq(lambda c: q * (c0 - c) - vol * k * c / (1.0 + kads * c), 0.0, c0, xtol=1e-12)
    assert run.conc[-1, 0] == pytest.approx(c_ref, rel=1e-7)


def test_arrhenius_levenspiel_pasteurisation():
    # Levenspiel (1999) Example 2.3 [memory, recomputed]: 30 min at 63 C equals 15 s at 74 C,
    # i.e. k(74 C)/k(63 C) = 120, giving E = 422 kJ/mol (printed to 3 s.f., hence rel 2 %)
    ratio = arrhenius(1.0, 422e3, 273.15 + 63.0, 273.15 + 74.0)
    assert float(ratio) == pytest.approx(120.0, rel=2e-2)


def test_temperature_lag_in_rates():
    # First-order lag of T after a set-point step: T(tau_T) = Tsp + (T0 - Tsp) / e (common practice, no source)
    kin = Kinetics.build(["A", "B"], [("power_law", 1e-4, 50e3, 340.0, {"A": 1.0}, {}, 1.0)])
    segs = [Segment(0.0, 3600.0, 1e-3, 340.0), Segment(3600.0, 3 * 3600.0, 1e-3, 350.0)]
    run = integrate_cstr(NU_AB, kin, segs, FeedProfile.constant([1000.0, 0.0]), initial_moles=[5000.0, 0.0],
                         initial_volume=5.0, initial_temperature=340.0, temperature_time_constant=1800.0)
    i = np.searchsorted(run.t, 3600.0 + 1800.0)
    assert run.temperature[i] == pytest.approx(350.0 - 10.0 / math.e, rel=1e-12)
    assert run.temperature_setpoint[i] == 350.0


def test_pi_level_control_removes_offset():
    # PI control leaves no steady offset after a load step (Seborg et al. 2011, ch. 8; common practice)
    vol_sp, q1, q2 = 9.6, 4.6 / 3600.0, 5.4 / 3600.0
    segs = [Segment(0.0, 3600.0, q1, 340.0, vol_sp), Segment(3600.0, 30 * 3600.0, q2, 340.0, vol_sp)]
    run = integrate_cstr(NU_AB, first_order(1e-4), segs, FeedProfile.constant([1000.0, 0.0]),
                         initial_moles=[vol_sp * 500.0, 0.0], initial_volume=vol_sp, initial_temperature=340.0,
                         level_control=LevelControl(1.0 / 3600.0, 7200.0), step=600.0)
    assert run.volume.max() > vol_sp + 0.05          # the step does move the level
    assert run.volume[-1] == pytest.approx(vol_sp, abs=1e-4)
    assert run.outlet_flow[-1] == pytest.approx(q2, rel=1e-4)
    # proportional only: offset dV = (q2 - q1) / Kc (Seborg et al. 2011, P-only level loop)
    run_p = integrate_cstr(NU_AB, first_order(1e-4), segs, FeedProfile.constant([1000.0, 0.0]),
                           initial_moles=[vol_sp * 500.0, 0.0], initial_volume=vol_sp, initial_temperature=340.0,
                           level_control=LevelControl(1.0 / 3600.0), initial_integral=q1, step=600.0)
    assert run_p.volume[-1] - vol_sp == pytest.approx((q2 - q1) * 3600.0, rel=1e-4)


def test_unknown_integrator_is_named():
    with pytest.raises(ValueError, match="allowed: LSODA, BDF, Radau"):
        run = integrate_cstr(NU_AB, first_order(1e-3), [Segment(0.0, 60.0, 1e-3, 300.0)],
                             FeedProfile.constant([1.0, 0.0]), initial_moles=[0.0, 0.0], initial_volume=1.0,
                             initial_temperature=300.0, method="Euler")
        del run


def test_unknown_rate_law_is_named():
    with pytest.raises(ValueError, match="allowed: power_law, saturating"):
        Kinetics.build(["A"], [("elementary", 1.0, 0.0, 300.0, {"A": 1.0}, {}, 1.0)])
