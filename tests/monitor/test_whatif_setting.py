"""One setting of all three levers (the dashboard's interactive what-if): conversion and production
against an ODE integration, the refusal outside the safe ranges, and the unit rebuilt from stored
parameters."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import integrate

from kinetrace.errors import KinetraceError
from kinetrace.monitor.whatif import model_from_parameters, predict_setting, production_at, what_if

from .test_multireaction import _two_reaction_unit


def _ode_outlet(unit, activity, q, temp, vol):
    """Reference: dC/dt = (C0 - C)/tau + nu r(C) integrated to steady state (scipy solve_ivp, LSODA)."""
    from kinetrace.kinetics.arrhenius import at_temperature

    tau = vol / q
    c0 = np.array([unit.feed.get(s, 0.0) for s in unit.species])
    k1 = activity * at_temperature(6e-4, temp, 58e3, 343.15)
    k2 = at_temperature(2.4e-8, temp, 85e3, 343.15)

    def rhs(_, c):
        ca = max(c[0], 0.0)
        return (c0 - c) / tau + unit.nu @ np.array([k1 * ca / (1 + 5e-4 * ca), k2 * ca * ca])

    return integrate.solve_ivp(rhs, (0.0, 60 * tau), c0, method="LSODA", rtol=1e-10, atol=1e-8).y[:, -1]


@pytest.mark.parametrize("temp, q_h, tau_h", [(343.15, 4.9, 2.0), (352.0, 6.5, 1.2), (325.0, 2.0, 5.0)])
def test_prediction_matches_ode_integration(temp, q_h, tau_h):
    unit = _two_reaction_unit()
    q, tau = q_h / 3600, tau_h * 3600
    vol_limits = (0.5 * q * tau, 2.0 * q * tau)
    p = predict_setting(unit, activity=0.6, temperature=temp, feed_flow=q, residence_time=tau, volume_limits=vol_limits)
    c = _ode_outlet(unit, 0.6, q, temp, q * tau)
    # integrated over 60 residence times to rtol 1e-10: agreement to 1e-6 relative
    assert p.conversion == pytest.approx(1 - c[0] / unit.feed["A"], rel=1e-6)
    assert p.production == pytest.approx(q * c[2], rel=1e-6)
    assert p.production == pytest.approx(production_at(unit, activity=0.6, feed_flow=q, temperature=temp,
                                                       volume=q * tau), rel=1e-12)
    assert p.production_mass == pytest.approx(p.production * 0.1)
    lo, hi = unit.temperature_limits
    assert p.margins["temperature"] == (pytest.approx(temp - lo), pytest.approx(hi - temp))
    assert p.limits["residence_time"] == (pytest.approx(vol_limits[0] / q), pytest.approx(vol_limits[1] / q))


def test_setting_outside_a_safe_range_is_refused():
    unit = _two_reaction_unit()
    ok = dict(activity=0.6, temperature=343.15, feed_flow=1e-3, residence_time=8000.0, volume_limits=(5.0, 12.0))
    predict_setting(unit, **ok)
    for key, bad in (("temperature", 358.5), ("temperature", 317.0), ("feed_flow", 2.1e-3), ("feed_flow", 3e-4),
                     ("residence_time", 12.5 / 1e-3), ("residence_time", 4.0 / 1e-3)):
        with pytest.raises(KinetraceError, match="outside the safe range"):
            predict_setting(unit, **{**ok, key: bad})
    with pytest.raises(KinetraceError, match="positive number"):
        predict_setting(unit, **{**ok, "activity": 0.0})


def test_model_from_parameters_is_the_model_the_check_used():
    unit = _two_reaction_unit()
    rows = pd.DataFrame({"name": ["parameter_set", "k_ref_fitted:main", "activation_energy:main", "K_A:main",
                                  "k_ref_fitted:side", "calibration_kd", "ratelaw_aicc:power_law"],
                         "value": [1.0, 7e-4, 61e3, 8e-4, 3e-8, 1e-7, -12.0]})
    m = model_from_parameters(unit, rows)
    assert m.rate_laws["main"].k_ref == 7e-4 and m.rate_laws["main"].activation_energy == 61e3
    assert m.rate_laws["main"].params["adsorption"]["A"] == 8e-4 and m.rate_laws["side"].k_ref == 3e-8
    assert unit.rate_laws["main"].params["adsorption"]["A"] == 5e-4           # the configured unit untouched
    # the what-if searched on the rebuilt unit and the setting evaluated on it agree
    res = what_if(m, activity=0.25, feed_flow=4.9 / 3600, temperature=343.15, volume=10.0, levers=["temperature"])[0]
    assert res.feasible and res.setting > 343.15
    p = predict_setting(m, activity=0.25, temperature=res.setting, feed_flow=4.9 / 3600,
                        residence_time=10.0 / (4.9 / 3600), volume_limits=(10.0, 10.0))
    assert p.production == pytest.approx(res.production, rel=1e-9) and p.production >= p.target * (1 - 1e-9)
    # a run that did not fit its parameters: the configured unit
    assert model_from_parameters(unit, rows.assign(value=[0.0, *rows["value"][1:]])) is unit
    assert model_from_parameters(unit, rows.iloc[0:0]) is unit
