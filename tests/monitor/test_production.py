"""Production totals per day and shift, and the exact attribution of each day's gap to its causes.

Synthetic days with known causes (invented unit, plan feed 1.0e-3 m3/s of 2000 mol/m3 key reactant,
target 1.2 mol/s, so the plan yield Y* = 0.6 mol product per mol fed).
"""

from __future__ import annotations

import itertools
import math

import numpy as np
import pandas as pd
import pytest

from kinetrace.errors import KinetraceError
from kinetrace.monitor.production import CAUSES, attribute_shortfall, period_labels, production_totals

Q_PLAN, C_PLAN, TARGET = 1.0e-3, 2000.0, 1.2
Y_PLAN = TARGET / (Q_PLAN * C_PLAN)
HOUR = 3600.0


def _days():
    """Six days of hourly data, each with one known cause (day 6 mixes them)."""
    idx = pd.date_range("2026-11-01", periods=24 * 6, freq="h", tz="UTC")
    q = np.full(idx.size, Q_PLAN)
    y = np.full(idx.size, Y_PLAN)
    c = np.full(idx.size, C_PLAN)
    day = np.arange(idx.size) // 24
    hour = np.arange(idx.size) % 24
    q[day == 1] *= 0.8                                  # day 2: feed 20 % below plan
    y[day == 2] *= 0.9                                  # day 3: yield 10 % below plan
    down = (day == 3) & (hour < 6)                      # day 4: 6 h down
    q[down] = 0.0
    q[day == 5] *= 0.9                                  # day 6: mixed
    y[day == 5] *= 0.95
    q[(day == 5) & (hour < 2)] = 0.0
    p = q * c * y
    p = pd.Series(p, index=idx)
    p[(day == 4) & (hour >= 10) & (hour < 14)] = np.nan  # day 5: analyser out for 4 h
    p[(day == 5) & (hour == 12)] = np.nan
    frame = pd.DataFrame({"production": p, "feed_flow": q, "c": c}, index=idx)
    frame = frame.drop(idx[(day == 5) & (hour == 20)])   # day 6: one hour missing entirely
    return frame


def _shapley_feed_conversion(f, y):
    """Shapley (1953) values of two players, from the definition: average marginal loss over both orders."""
    loss = lambda ff, yy: Q_PLAN * C_PLAN * Y_PLAN - ff * yy  # noqa: E731
    plan_f = Q_PLAN * C_PLAN
    phi_f = 0.5 * ((loss(f, Y_PLAN) - loss(plan_f, Y_PLAN)) + (loss(f, y) - loss(plan_f, y)))
    phi_y = 0.5 * ((loss(plan_f, y) - loss(plan_f, Y_PLAN)) + (loss(f, y) - loss(f, Y_PLAN)))
    return phi_f, phi_y


def test_each_day_is_attributed_to_its_known_cause():
    fr = _days()
    att = attribute_shortfall(fr["production"], fr["feed_flow"], fr["c"], TARGET, plan_feed_flow=Q_PLAN)
    day_target = TARGET * 86400.0
    # the parts add up to the gap exactly (to floating-point rounding of sums of 24 terms)
    np.testing.assert_allclose(att[list(CAUSES)].sum(axis=1), att["gap"], rtol=0, atol=1e-9 * day_target)
    d = att.reset_index(drop=True)
    # day 1: on plan
    assert d.loc[0, "gap"] == pytest.approx(0.0, abs=1e-9 * day_target)
    # day 2: only feed, 20 % of the target
    assert d.loc[1, "feed"] == pytest.approx(0.2 * day_target, rel=1e-12)
    assert d.loc[1, ["conversion", "downtime", "data"]].abs().max() < 1e-9 * day_target
    # day 3: only conversion, 10 %
    assert d.loc[2, "conversion"] == pytest.approx(0.1 * day_target, rel=1e-12)
    assert abs(d.loc[2, "feed"]) < 1e-9 * day_target
    # day 4: only downtime, 6 h of target
    assert d.loc[3, "downtime"] == pytest.approx(6 * HOUR * TARGET, rel=1e-12)
    assert d.loc[3, "hours_down"] == 6
    # day 5: only data, 4 h of target
    assert d.loc[4, "data"] == pytest.approx(4 * HOUR * TARGET, rel=1e-12)
    assert d.loc[4, "hours_poor"] == 4


def test_mixed_day_matches_the_shapley_definition():
    fr = _days()
    att = attribute_shortfall(fr["production"], fr["feed_flow"], fr["c"], TARGET, plan_feed_flow=Q_PLAN)
    d6 = att.iloc[5]
    # running hours: 24 - 2 down - 1 no production - 1 missing = 20, each at F = 0.9 F*, Y = 0.95 Y*
    assert (d6["hours_running"], d6["hours_down"], d6["hours_poor"], d6["hours_missing"]) == (20, 2, 1, 1)
    phi_f, phi_y = _shapley_feed_conversion(0.9 * Q_PLAN * C_PLAN, 0.95 * Y_PLAN)
    assert d6["feed"] == pytest.approx(20 * HOUR * phi_f, rel=1e-12)
    assert d6["conversion"] == pytest.approx(20 * HOUR * phi_y, rel=1e-12)
    assert d6["downtime"] == pytest.approx(2 * HOUR * TARGET, rel=1e-12)
    assert d6["data"] == pytest.approx(2 * HOUR * TARGET, rel=1e-12)  # 1 h NaN + 1 h absent
    assert math.isclose(d6[list(CAUSES)].sum(), d6["gap"], rel_tol=0, abs_tol=1e-9 * TARGET * 86400)


def test_sum_is_exact_on_random_days_and_any_period():
    # common practice, no source: an exact decomposition leaves no residual whatever the data
    rng = np.random.default_rng(3)
    idx = pd.date_range("2026-11-01", periods=24 * 10, freq="h", tz="UTC")
    q = pd.Series(Q_PLAN * rng.uniform(0.0, 1.3, idx.size), index=idx)
    q[rng.random(idx.size) < 0.05] = np.nan
    c = pd.Series(C_PLAN * rng.uniform(0.9, 1.1, idx.size), index=idx)
    p = q * c * Y_PLAN * rng.uniform(0.5, 1.1, idx.size)
    p[rng.random(idx.size) < 0.05] = np.nan
    valid = pd.Series(rng.random(idx.size) > 0.03, index=idx)
    for period, tz in itertools.product(("day", "shift"), ("UTC", "Europe/Berlin")):
        att = attribute_shortfall(p, q, c, TARGET, expected_yield=Y_PLAN, plan_feed_conc=C_PLAN, valid=valid,
                                  period=period, tz=tz, day_start="06:00")
        np.testing.assert_allclose(att[list(CAUSES)].sum(axis=1), att["gap"], rtol=0, atol=1e-7)
        hours = att[["hours_running", "hours_down", "hours_poor", "hours_missing"]].sum(axis=1)
        expected = (att.index.to_series().shift(-1) - att.index.to_series()).dt.total_seconds() / 3600
        np.testing.assert_allclose(hours.iloc[1:-1], expected.iloc[1:-1])


def test_plan_given_as_expected_yield_is_equivalent():
    fr = _days()
    a = attribute_shortfall(fr["production"], fr["feed_flow"], fr["c"], TARGET, plan_feed_flow=Q_PLAN)
    b = attribute_shortfall(fr["production"], fr["feed_flow"], fr["c"], TARGET, expected_yield=Y_PLAN)
    pd.testing.assert_frame_equal(a, b, rtol=1e-12)
    with pytest.raises(KinetraceError, match="exactly one"):
        attribute_shortfall(fr["production"], fr["feed_flow"], fr["c"], TARGET)


def test_daily_and_shift_totals():
    idx = pd.date_range("2026-11-01", periods=48, freq="h", tz="UTC")
    p = pd.Series(1.0, index=idx)
    p.iloc[30] = np.nan
    day = production_totals(p, 1.2)
    assert day["produced"].tolist() == [24 * HOUR, 23 * HOUR]
    assert day["hours_with_data"].tolist() == [24, 23]
    assert day["shortfall"].iloc[1] == pytest.approx(1.2 * 86400 - 23 * HOUR)
    shifts = production_totals(p, 1.2, period="shift")
    # shifts 22-06, 06-14, 14-22: first partial shift (00-06 belongs to the shift started 31 Oct 22:00)
    assert shifts.index[0] == pd.Timestamp("2026-10-31 22:00", tz="UTC")
    assert shifts["produced"].iloc[0] == 6 * HOUR and shifts["hours"].iloc[0] == 8
    assert shifts["produced"].sum() == day["produced"].sum()


def test_period_labels_in_site_time_zone():
    # 2026-11-02 05:30 UTC is 06:30 in Berlin (CET, UTC+1): production day starting 06:00 local is 2 Nov
    t = pd.DatetimeIndex(["2026-11-02 04:30", "2026-11-02 05:30"], tz="UTC")
    start, end = period_labels(t, tz="Europe/Berlin", day_start="06:00")
    assert [f"{s:%Y-%m-%d %H:%M}" for s in start] == ["2026-11-01 06:00", "2026-11-02 06:00"]
    assert (end - start).tolist() == [pd.Timedelta("24h")] * 2
    with pytest.raises(KinetraceError, match="HH:MM"):
        period_labels(t, day_start=6)
    with pytest.raises(KinetraceError, match="'day' or 'shift'"):
        period_labels(t, period="week")


def test_daylight_saving_days_keep_every_hour():
    # Europe/London, end of summer time 25 Oct 2026 (clock 02:00 BST -> 01:00 GMT): a production day starting
    # at the twice-occurring 01:30 has 25 hours; the start of summer time (29 Mar 2026) gives a 23-hour day;
    # no row is dropped (common practice, no source)
    for day, hours, start in (("2026-10-25", 25, "01:30"), ("2026-03-29", 23, "00:00")):
        idx = pd.date_range(pd.Timestamp(day, tz="Europe/London").tz_convert("UTC") - pd.Timedelta("1D"),
                            periods=24 * 3, freq="h")
        p = pd.Series(1.0, index=idx)
        tot = production_totals(p, 1.0, tz="Europe/London", day_start=start)
        assert tot["produced"].sum() == 3 * 24 * HOUR
        mid = tot.loc[tot.index.normalize() == pd.Timestamp(day, tz="Europe/London")]
        assert mid["hours"].iloc[0] == hours
