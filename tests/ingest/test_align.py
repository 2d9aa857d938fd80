"""Grid alignment and screening rules against independent computations.

References: the time-weighted mean is checked against a brute-force integral of
the zero-order-hold signal sampled every second (numpy, an independent
calculation), and against pandas ``resample().mean()`` where the two must agree
(readings at interval starts, no gaps). The analyzer rule is checked against
pandas ``resample().mean()`` followed by a forward fill limited by age.
"""

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from kinetrace.ingest import grid_edges, sample_mean_carry, time_weighted_mean
from kinetrace.ingest.fates import CONFLICT, DUPLICATE, FROZEN, GOOD, OUT_OF_RANGE, SPIKE
from kinetrace.ingest.screening import flag_duplicates, flag_frozen, flag_spikes, screen, sort_readings

S = 10**9


def _brute(ts_s, x, edges_s, max_gap):
    """Integral of the held signal on a 1-s lattice (independent of the bincount algorithm)."""
    t = np.arange(edges_s[0], edges_s[-1]) + 0.5
    k = np.searchsorted(ts_s, t, side="right") - 1
    held = (k >= 0) & (t - ts_s[np.maximum(k, 0)] <= max_gap)
    sig = np.where(held, x[np.maximum(k, 0)], np.nan)
    out, cov = [], []
    for a, b in zip(edges_s[:-1], edges_s[1:]):
        m = (t >= a) & (t < b)
        c = np.isfinite(sig[m]).mean()
        cov.append(c)
        out.append(np.nanmean(sig[m]) if c >= 0.5 else np.nan)
    return np.array(out), np.array(cov)


@settings(max_examples=40, deadline=None)
@given(st.lists(st.integers(0, 3599), min_size=1, max_size=40, unique=True),
       st.integers(30, 900))
def test_time_weighted_mean_equals_brute_force_integral(times, max_gap):
    ts = np.array(sorted(times), dtype=np.int64)
    x = np.cos(ts / 100.0) * 10 + 50
    edges = np.arange(0, 3601, 600, dtype=np.int64)
    got, cov = time_weighted_mean(ts * S, x, edges * S, max_gap)
    ref, rcov = _brute(ts.astype(float), x, edges, max_gap)
    np.testing.assert_allclose(cov, rcov, atol=1e-12)
    np.testing.assert_allclose(got, ref, rtol=1e-12, equal_nan=True)


def test_time_weighted_mean_equals_pandas_resample_for_regular_data():
    rng = np.random.default_rng(3)
    t = pd.date_range("2026-09-01", periods=24 * 60, freq="1min", tz="UTC").as_unit("ns")
    x = rng.normal(5.0, 0.1, len(t))
    edges = grid_edges(t.asi8[0], t.asi8[-1], 3600)
    got, _ = time_weighted_mean(t.asi8, x, edges, max_gap=120)
    ref = pd.Series(x, index=t).resample("1h").mean().to_numpy()
    np.testing.assert_allclose(got, ref, rtol=1e-12)


def test_a_long_hold_fills_whole_intervals():
    got, cov = time_weighted_mean(np.array([0, 3 * 3600]) * S, np.array([2.0, 4.0]), np.arange(5) * 3600 * S, 4 * 3600)
    assert got.tolist() == [2.0, 2.0, 2.0, 4.0] and cov.tolist() == [1.0] * 4


def test_analyzer_rule_equals_pandas_mean_then_age_limited_ffill():
    rng = np.random.default_rng(5)
    t = np.sort(rng.choice(np.arange(0, 12 * 3600, 60), 25, replace=False)).astype(np.int64)
    x = rng.normal(1.0, 0.1, t.size)
    edges = np.arange(0, 12 * 3600 + 1, 600, dtype=np.int64)
    max_age = 1800.0
    got, carried = sample_mean_carry(t * S, x, edges * S, max_age)
    s = pd.Series(x, index=pd.to_datetime(t, unit="s"))
    mean = s.resample("10min", origin="epoch").mean().reindex(pd.to_datetime(edges[:-1], unit="s"))
    last_time = pd.Series(s.index, index=s.index).resample("10min", origin="epoch").max().reindex(mean.index).ffill()
    last_val = s.resample("10min", origin="epoch").last().reindex(mean.index).ffill()
    age = (mean.index + pd.Timedelta("10min") - last_time).dt.total_seconds()
    ref = mean.where(mean.notna(), last_val.where(age <= max_age))
    np.testing.assert_allclose(got, ref.to_numpy(), rtol=1e-12, equal_nan=True)
    assert carried.sum() == int((mean.isna() & ref.notna()).sum())


def test_sort_and_duplicates():
    late, ts, (v, f) = sort_readings(np.array([30, 10, 20, 20, 10]) * S, np.array([3., 1., 2., 2.5, 1.]),
                                     np.zeros(5, np.int8))
    assert late == 4   # 10, 20, 20, 10 all come after 30 in file order
    f = flag_duplicates(ts, v, f)
    assert f.tolist() == [GOOD, DUPLICATE, CONFLICT, CONFLICT, GOOD]
    # pandas as reference for the identical-copy part: duplicated() on (time, value)
    ref = pd.DataFrame({"t": ts, "v": v}).duplicated().to_numpy()
    assert ((f == DUPLICATE) == (ref & (f != CONFLICT))).all()


def test_spike_needs_an_excursion_that_returns():
    t = np.arange(7) * 60 * S
    x = np.array([10, 10, 30, 10, 10, 30, 30.])
    f = flag_spikes(t, x, np.zeros(7, np.int8), max_rate=5.0)
    assert f.tolist() == [0, 0, SPIKE, 0, 0, 0, 0]   # the second jump is a step that stays
    # a slower change (4 units/min) is no spike at max_rate 5
    assert (flag_spikes(t, np.array([10, 10, 14, 10, 10, 10, 10.]), np.zeros(7, np.int8), 5.0) == 0).all()


def test_frozen_needs_duration_and_readings():
    t = np.arange(10) * 600 * S
    x = np.array([1, 2, 3, 3, 3, 3, 3, 3, 4, 5.])   # 3.0 for 50 min (6 readings)
    assert (flag_frozen(t, x, np.zeros(10, np.int8), 3000.0) == FROZEN).sum() == 5
    assert (flag_frozen(t, x, np.zeros(10, np.int8), 3001.0) == FROZEN).sum() == 0


def _frozen_by_pandas(t, x, fate, frozen_after, min_readings, floor):
    """The flat-line rule written with pandas groupby over runs of equal good values (reference)."""
    good = pd.Series(fate == GOOD)
    s = pd.DataFrame({"t": t[good.to_numpy()], "x": x[good.to_numpy()]})
    run = (s["x"] != s["x"].shift()).cumsum()
    g = s.groupby(run)
    frozen_run = (g["x"].transform("size") >= min_readings) \
        & ((g["t"].transform("max") - g["t"].transform("min")) / 1e9 >= frozen_after)
    if floor is not None:
        frozen_run &= g["x"].transform("first") > floor
    out = fate.copy()
    out[np.flatnonzero(good.to_numpy())[(frozen_run & run.duplicated()).to_numpy()]] = FROZEN
    return out


@settings(max_examples=60, deadline=None)
@given(st.lists(st.tuples(st.integers(1, 3), st.sampled_from([0.0, 1.0, 2.0]), st.sampled_from([GOOD, GOOD, 4])),
                min_size=0, max_size=40),
       st.sampled_from([0.0, 120.0, 300.0]), st.integers(1, 4), st.sampled_from([None, 0.0, 1.0]))
def test_frozen_rule_equals_pandas_runs(rows, frozen_after, min_readings, floor):
    t = np.cumsum([dt for dt, _, _ in rows]).astype(np.int64) * 60 * S
    x = np.array([v for _, v, _ in rows], dtype=float)
    fate = np.array([f for _, _, f in rows], dtype=np.int8)
    got = flag_frozen(t, x, fate, frozen_after, min_readings=min_readings, floor=floor)
    assert got.tolist() == _frozen_by_pandas(t, x, fate, frozen_after, min_readings, floor).tolist()


def test_screen_runs_rules_in_order_and_counts_each_reading_once():
    t = np.arange(8) * 60 * S
    x = np.array([5, 5, 99, 5, 5, 5, 5, 5.])
    f = screen(t, x, np.zeros(8, np.int8), valid_range=(0, 50), max_rate=10.0, frozen_after=240.0)
    # 99 is out of range first (not a spike); the rest is 5.0 flat for 7 min -> frozen after the first
    assert f.tolist() == [0, FROZEN, OUT_OF_RANGE, FROZEN, FROZEN, FROZEN, FROZEN, FROZEN]


@pytest.mark.parametrize("step, first, last, n", [(60, 0, 59, 1), (600, 0, 600, 2), (3600, 1, 7200, 3)])
def test_grid_edges(step, first, last, n):
    e = grid_edges(first * S, last * S, step)
    assert len(e) - 1 == n and e[0] % (step * S) == 0 and e[-1] > last * S


def test_grid_edges_of_a_long_period_keep_the_last_interval():
    # one year of minutes from 2026-01-01 (np.arange with a float length drops the last edge here)
    first = int(pd.Timestamp("2026-01-01T00:00Z").value)
    last = int(pd.Timestamp("2026-12-31T23:59Z").value)
    e = grid_edges(first, last, 60)
    assert len(e) - 1 == 365 * 1440 and e[-1] == last + 60 * S


def test_a_flow_at_zero_during_a_shutdown_is_not_frozen():
    t = np.arange(300) * 60 * S
    x = np.r_[np.full(100, 4.0) + np.arange(100) * 1e-3, np.zeros(100), np.full(100, 4.0)]   # 100 min at 0
    f = screen(t, x, np.zeros(300, np.int8), valid_range=(0.0, 12.0), frozen_after=1800.0)
    assert (f[100:200] == GOOD).all()
    assert (f[201:300] == FROZEN).all() and f[200] == GOOD    # 4.0 flat for 99 min after the restart
