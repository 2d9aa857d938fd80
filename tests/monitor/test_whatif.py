"""What-if settings: analytic first-order checks, infeasible cases, and never a setting outside the limits."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from kinetrace.errors import KinetraceError
from kinetrace.monitor.whatif import CAUTIONS, list_levers, production_at, what_if

from .conftest import make_unit

R = 8.314462618  # J/(mol K), CODATA 2018 (exact in the 2019 SI)


def _by_lever(results):
    return {r.lever: r for r in results}


def test_first_order_settings_match_closed_forms():
    """First order in a CSTR, X = k tau / (1 + k tau) (Fogler 2016, ch. 5); k(T) by Arrhenius (Fogler eq. 3-21)."""
    unit = make_unit(target=0.8, volume=0.4)
    a, q, t, v = 0.5, 1e-3, 350.0, 0.4  # k tau = 2 now: X = 2/3 < 0.8
    res = _by_lever(what_if(unit, activity=a, feed_flow=q, temperature=t, volume=v, volume_limits=(0.2, 1.0)))
    # temperature: k needed = X / ((1 - X) tau) / a with X = 0.8
    k_need = 0.8 / 0.2 / (v / q) / a
    t_need = 1.0 / (1.0 / 350.0 - R * np.log(k_need / 0.01) / 60e3)
    assert res["temperature"].feasible and res["temperature"].setting == pytest.approx(t_need, rel=1e-9)
    # feed flow: P = C k V Q / (Q + k V)  ->  Q = P k V / (C k V - P)
    kv = 0.01 * a * v
    assert res["feed_flow"].setting == pytest.approx(0.8 * kv / (1000.0 * kv - 0.8), rel=1e-9)
    # residence time at the present feed: tau = X / ((1 - X) k)
    assert res["residence_time"].setting == pytest.approx(0.8 / 0.2 / (0.01 * a), rel=1e-9)
    assert res["residence_time"].volume == pytest.approx(res["residence_time"].setting * q)
    for r in res.values():
        assert r.cautions == CAUTIONS and "management of change" in r.cautions
        assert r.production >= r.target * (1 - 1e-9)


def test_says_so_plainly_when_no_safe_setting_meets_the_target():
    unit = make_unit(target=0.8, t_limits=(330.0, 352.0), q_limits=(5e-4, 1.1e-3))
    res = _by_lever(what_if(unit, activity=0.05, feed_flow=1e-3, temperature=350.0, volume=0.4))
    for lever in ("temperature", "feed_flow"):
        r = res[lever]
        assert not r.feasible and r.setting is None
        assert "No " in r.message and "inside the configured safe range" in r.message
        assert r.production < r.target
    # best production is the top of the safe temperature range
    best = production_at(unit, activity=0.05, feed_flow=1e-3, temperature=352.0, volume=0.4)
    assert res["temperature"].production == pytest.approx(best, rel=1e-9)
    assert not res["residence_time"].feasible and "not searched" in res["residence_time"].message


def test_present_setting_outside_limits_is_never_returned():
    # running above the safe maximum and meeting the target: the answer must come from inside the range
    unit = make_unit(target=0.5, t_limits=(330.0, 345.0))
    r = what_if(unit, activity=1.0, feed_flow=1e-3, temperature=360.0, volume=0.4, levers=["temperature"])[0]
    assert r.feasible and 330.0 <= r.setting <= 345.0


def test_errors():
    unit = make_unit()
    assert list_levers() == ["temperature", "feed_flow", "residence_time"]
    with pytest.raises(KinetraceError, match="allowed: temperature, feed_flow, residence_time"):
        what_if(unit, activity=0.5, feed_flow=1e-3, temperature=350.0, volume=0.4, levers=["pressure"])
    with pytest.raises(KinetraceError, match="activity must be a positive number"):
        what_if(unit, activity=float("nan"), feed_flow=1e-3, temperature=350.0, volume=0.4)


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    activity=st.floats(0.01, 2.0),
    target_frac=st.floats(0.05, 1.2),
    t_lo=st.floats(300.0, 380.0),
    t_width=st.floats(0.0, 60.0),
    q_lo=st.floats(1e-4, 2e-3),
    q_ratio=st.floats(1.0, 5.0),
    t_now=st.floats(280.0, 450.0),
    q_now=st.floats(5e-5, 1e-2),
    order=st.sampled_from([1.0, 2.0, 0.5]),
)
def test_never_outside_the_safe_limits(activity, target_frac, t_lo, t_width, q_lo, q_ratio, t_now, q_now, order):
    # property (common practice, no source): every returned set point lies inside the configured limits,
    # a feasible one meets the target, an infeasible one means no grid point of the range does
    t_limits = (t_lo, t_lo + t_width)
    q_limits = (q_lo, q_lo * q_ratio)
    target = target_frac * 1000.0 * q_now
    unit = make_unit(target=target, t_limits=t_limits, q_limits=q_limits, orders={"A": order},
                     k_ref=0.01 * 1000.0 ** (1 - order))
    v_limits = (0.1, 0.9)
    res = what_if(unit, activity=activity, feed_flow=q_now, temperature=t_now, volume=0.4, volume_limits=v_limits)
    lims = {"temperature": t_limits, "feed_flow": q_limits, "residence_time": (0.1 / q_now, 0.9 / q_now)}
    for r in res:
        lo, hi = lims[r.lever]
        assert r.limits == pytest.approx((lo, hi))
        assert "management of change" in r.cautions
        if r.feasible:
            assert lo <= r.setting <= hi
            assert r.production >= target * (1 - 1e-9)
        else:
            assert r.setting is None
            grid = np.linspace(lo, hi, 17)
            kw = dict(activity=activity, feed_flow=q_now, temperature=t_now, volume=0.4)
            key = {"temperature": "temperature", "feed_flow": "feed_flow", "residence_time": "volume"}[r.lever]
            kw[key] = grid if r.lever != "residence_time" else grid * q_now
            assert np.all(np.asarray(production_at(unit, **kw)) < target)
