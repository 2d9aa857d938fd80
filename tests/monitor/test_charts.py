"""EWMA and CUSUM alarms, their onset and size estimates, and the step detector."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from kinetrace.errors import DataQualityError, KinetraceError
from kinetrace.monitor.charts import (
    cusum_alarms,
    cusum_statistic,
    detect_drift,
    ewma_alarms,
    ewma_statistic,
    in_control_estimates,
    list_drift_methods,
)
from kinetrace.monitor.steps import detect_steps, robust_sigma

IDX = pd.date_range("2026-11-01", periods=400, freq="h", tz="UTC")


def _loop_cusum(x, k):
    """Page (1954) recursion written out, one step at a time (reference for the closed form)."""
    up = np.zeros(len(x))
    dn = np.zeros(len(x))
    cu = cd = 0.0
    for i, v in enumerate(x):
        cu = max(0.0, cu + v - k)
        cd = max(0.0, cd - v - k)
        up[i], dn[i] = cu, cd
    return up, dn


def test_vectorised_statistics_equal_the_recursions():
    rng = np.random.default_rng(0)
    x = rng.normal(0.3, 1.0, (300, 5))
    up, dn = cusum_statistic(x, 0.5)
    for j in range(5):
        ru, rd = _loop_cusum(x[:, j], 0.5)
        np.testing.assert_allclose(up[:, j], ru, atol=1e-12)
        np.testing.assert_allclose(dn[:, j], rd, atol=1e-12)
    z = ewma_statistic(x, 0.2, start=0.1)
    ref = np.empty_like(x)
    prev = np.full(5, 0.1)
    for i in range(x.shape[0]):  # Roberts (1959) recursion
        prev = 0.2 * x[i] + 0.8 * prev
        ref[i] = prev
    np.testing.assert_allclose(z, ref, atol=1e-12)


def test_cusum_onset_is_last_zero_and_size_follows_montgomery():
    # Montgomery (2009) sec. 9.1.2: mu_hat = mu0 + K + C+/N+ ; onset after the last zero of C+
    rng = np.random.default_rng(4)
    x = rng.normal(0.0, 0.02, IDX.size) + 0.80
    x[250:] += 0.03  # +1.5 sigma step at hour 250 (invented data)
    res = cusum_alarms(pd.Series(x, index=IDX), mean=0.80, sigma=0.02, k=0.5, h=5.0, name="activity")
    first = [a for a in res.alarms if a.detected >= IDX[250]][0]
    assert first.direction == "up"
    assert abs((first.onset - IDX[250]) / pd.Timedelta("1h")) <= 6
    # the estimate is biased upward for short runs (it is read at the moment of crossing h), so only
    # the order of magnitude is checked here; the formula itself is checked exactly below
    assert 0.015 < first.size < 0.06
    # size estimate recomputed by hand from the statistic
    stat = res.statistic["upper"]
    n_run = int(((stat.index >= first.onset) & (stat.index <= first.detected)).sum())
    assert first.size_sigma == pytest.approx(0.5 + stat.loc[first.detected] / n_run, rel=1e-12)
    # h = 5, k = 0.5 given: the text reports the ARL0 these really have, 465 (Montgomery Table 9.3 [memory])
    assert "decision interval" in first.evidence and "run length of 465" in first.evidence


def test_ewma_change_point_estimate_on_a_drop():
    # poisoning-like drop of 2 sigma at hour 200 (invented data); Samuel et al. (1998) MLE of the onset
    rng = np.random.default_rng(8)
    x = rng.normal(0.0, 1.0, IDX.size)
    x[200:] -= 2.0
    res = ewma_alarms(pd.Series(x, index=IDX), mean=0.0, sigma=1.0, lam=0.1, arl0=500.0)
    a = [a for a in res.alarms if a.detected >= IDX[200]][0]
    assert a.direction == "down"
    assert abs((a.onset - IDX[200]) / pd.Timedelta("1h")) <= 3
    assert a.size == pytest.approx(-2.0, abs=0.8)
    assert res.settings["L"] == pytest.approx(2.814, abs=5e-4)  # Lucas & Saccucci (1990), ARL0 = 500


def test_no_false_alarm_on_short_in_control_series():
    # ARL0 = 370 per side pair; probability of an alarm in 50 observations is small (about 13 %) —
    # use a fixed seed known to be quiet, and check the chart restarts after an alarm when there is one
    rng = np.random.default_rng(12)
    x = pd.Series(rng.normal(0.0, 1.0, 50), index=IDX[:50])
    assert cusum_alarms(x, mean=0.0, sigma=1.0).alarms == []
    y = pd.Series(np.r_[np.zeros(30), np.full(30, 3.0), np.zeros(30), np.full(30, 3.0)], index=IDX[:120])
    alarms = cusum_alarms(y, mean=0.0, sigma=1.0, k=0.5, h=4.0).alarms
    ups = [a for a in alarms if a.direction == "up"]
    assert len(ups) >= 2 and ups[0].onset == IDX[30]


def test_nan_rows_are_skipped_and_counted():
    x = pd.Series(np.r_[np.zeros(40), np.full(40, -2.0)], index=IDX[:80])
    x.iloc[[3, 50, 51]] = np.nan
    res = detect_drift(x, method="cusum", mean=0.0, sigma=1.0)
    assert res.n_skipped == 3 and len(res.statistic) == 77
    assert res.alarms[0].onset == IDX[40]


def test_in_control_estimates_moving_range():
    # Montgomery (2009) sec. 6.4: sigma = MR-bar / d2, d2 = 1.128 for n = 2 [memory, Appendix Table VI]
    x = np.array([10.0, 12.0, 11.0, 13.0, 12.0, 12.0, 10.0, 11.0, 12.0, 13.0])
    mean, sigma = in_control_estimates(x)
    assert mean == pytest.approx(11.6)
    assert sigma == pytest.approx(np.mean(np.abs(np.diff(x))) / 1.128)
    with pytest.raises(DataQualityError, match="at least 5"):
        in_control_estimates([1.0, np.nan, 2.0])


def test_dispatch_and_errors():
    assert list_drift_methods() == ["ewma", "cusum"]
    with pytest.raises(KinetraceError, match="allowed: ewma, cusum"):
        detect_drift(pd.Series([1.0]), method="shewhart")
    with pytest.raises(KinetraceError, match="DatetimeIndex"):
        cusum_alarms(pd.Series(np.zeros(20)), mean=0.0, sigma=1.0)
    naive = pd.Series(np.zeros(20), index=pd.date_range("2026-01-01", periods=20, freq="h"))
    with pytest.raises(KinetraceError, match="without time zone"):
        ewma_alarms(naive, mean=0.0, sigma=1.0)


def test_step_detector_finds_poisoning_drop_and_catalyst_change():
    # invented scenario: activity 0.85, poisoning drop to 0.70 at hour 150, new charge 0.97 at hour 300
    rng = np.random.default_rng(6)
    a = np.r_[np.full(150, 0.85), np.full(150, 0.70), np.full(100, 0.97)] + rng.normal(0, 0.01, 400)
    s = pd.Series(a, index=IDX)
    steps = detect_steps(s, window=6)
    assert [st.direction for st in steps] == ["down", "up"]
    assert abs((steps[0].onset - IDX[150]) / pd.Timedelta("1h")) <= 1
    assert abs((steps[1].onset - IDX[300]) / pd.Timedelta("1h")) <= 1
    assert steps[0].size == pytest.approx(-0.15, abs=0.015)
    assert "poisoning" in steps[0].evidence and "catalyst change" in steps[1].evidence
    # detected once the after-window holds enough of the new level: not before the step, at most w-1 later
    assert IDX[150] <= steps[0].detected <= IDX[150 + 5]
    only_up = detect_steps(s, direction="up", min_size=0.2)
    assert [(st.direction, st.onset) for st in only_up] == [("up", steps[1].onset)]


def test_step_detector_false_alarm_rate():
    # Bonferroni-corrected family-wise alpha = 0.01 per series; in 200 noise-only series expect about 2
    rng = np.random.default_rng(9)
    n_alarm = sum(bool(detect_steps(pd.Series(rng.normal(0, 1, 300), index=IDX[:300]), sigma=1.0))
                  for _ in range(200))
    assert n_alarm <= 8  # binomial(200, 0.01): P(X > 8) < 1e-3


def test_robust_sigma_ignores_a_step():
    rng = np.random.default_rng(1)
    x = rng.normal(0.0, 0.5, 5000)
    x[2500:] += 10.0
    assert robust_sigma(x) == pytest.approx(0.5, rel=0.05)


def test_ar1_innovations_restore_the_in_control_run_length():
    # Alwan & Roberts (1988), Montgomery (2009) sec. 10.4 [memory]: charting the residuals of a fitted
    # AR(1) restores the false-alarm rate of independent data; raw autocorrelated data alarm far more often
    from kinetrace.monitor.charts import ar1_innovations
    from scipy import signal

    rng = np.random.default_rng(21)
    n_series, n = 30, 3000
    idx = pd.date_range("2026-01-01", periods=n, freq="h", tz="UTC")
    raw_alarms = inn_alarms = 0
    for _ in range(n_series):
        x = signal.lfilter([1.0], [1.0, -0.8], rng.normal(size=n)) * np.sqrt(1 - 0.8**2)  # unit variance
        s = pd.Series(x, index=idx)
        raw_alarms += len(cusum_alarms(s, mean=0.0, sigma=1.0, arl0=370.0).alarms)
        inn, phi = ar1_innovations(s)
        assert phi == pytest.approx(0.8, abs=0.05)
        inn_alarms += len(cusum_alarms(inn.dropna(), mean=0.0, sigma=1.0, arl0=370.0).alarms)
    expected = n_series * n / 370.0  # about 243 alarms in 90 000 observations
    assert 0.6 * expected < inn_alarms < 1.5 * expected
    assert raw_alarms > 3 * expected


# ----- exact EWMA limits, fast initial response, CUSUM head start -----

def test_ewma_exact_limits_montgomery_example():
    # Montgomery (2009) sec. 9.2, EWMA example with mu0 = 10, sigma = 1, lambda = 0.10, L = 2.7
    # [from memory]: UCL = 10.27 at period 1, 10.36 at period 2, tending to 10.62 (2 decimals printed)
    from kinetrace.monitor.charts import ewma_limits

    half = ewma_limits(200, 0.10, 2.7)
    assert 10.0 + half[0] == pytest.approx(10.27, abs=0.005)
    assert 10.0 + half[1] == pytest.approx(10.36, abs=0.005)
    assert 10.0 + half[-1] == pytest.approx(10.62, abs=0.005)
    assert 10.0 + ewma_limits(1, 0.10, 2.7, method="asymptotic")[0] == pytest.approx(10.62, abs=0.005)
    # independent check: Var(z_i) = lambda^2 sum_{j<i} (1 - lambda)^(2j) summed term by term, and the
    # Monte Carlo variance of the project's EWMA statistic (20000 runs; relative se of a variance 1 %)
    var_sum = np.cumsum(0.01 * 0.81 ** np.arange(30))
    np.testing.assert_allclose(ewma_limits(30, 0.10, 1.0) ** 2, var_sum, rtol=1e-12)
    z = ewma_statistic(np.random.default_rng(2).normal(size=(8, 20000)), 0.10)
    np.testing.assert_allclose(z.var(axis=1), var_sum[:8], rtol=0.05)
    with pytest.raises(KinetraceError, match="allowed: exact, asymptotic"):
        ewma_limits(5, 0.1, 2.7, method="steady")


def _first_signal(stat_abs, half):
    hit = stat_abs > half[:, None]
    return np.where(hit.any(axis=0), hit.argmax(axis=0) + 1, hit.shape[0] + 1)


def test_ewma_fast_initial_response_shortens_start_up_detection():
    # Steiner (1999) [from memory]: the FIR factor 1 - (1 - f)^(1 + a (i - 1)) is f at the first
    # observation and fades (a = 0.3: below 1 % after 20 observations). A shift present from the start
    # is found sooner; the price is more false alarms at the start (Steiner widened L to keep ARL0).
    # Monte Carlo, 4000 runs.
    from kinetrace.monitor.charts import ewma_limits

    exact = ewma_limits(400, 0.10, 2.814)
    fir = ewma_limits(400, 0.10, 2.814, fir=0.5)
    assert fir[0] == pytest.approx(0.5 * exact[0], rel=1e-12)
    assert fir[20] / exact[20] == pytest.approx(1.0 - 0.5 ** 7.0, rel=1e-12)
    rng = np.random.default_rng(5)
    z_shift = np.abs(ewma_statistic(rng.normal(1.0, 1.0, (400, 4000)), 0.10))
    rl_exact, rl_fir = _first_signal(z_shift, exact), _first_signal(z_shift, fir)
    assert rl_fir.mean() < 0.85 * rl_exact.mean()
    z0 = np.abs(ewma_statistic(rng.normal(0.0, 1.0, (400, 4000)), 0.10))
    # probability of a false alarm within 400 observations: 0.55 without, 0.67 with FIR (this seed)
    p_exact, p_fir = (_first_signal(z0, exact) <= 400).mean(), (_first_signal(z0, fir) <= 400).mean()
    assert p_exact < p_fir < p_exact + 0.2


def test_ewma_alarms_use_the_exact_limits_after_each_restart():
    # a 2-sigma jump at the first observation: the asymptotic limit (0.646 sigma at L = 2.814,
    # lambda = 0.1) is not crossed by z_1 = 0.2, the exact one (0.2814) is crossed at z_3 = 0.542
    x = pd.Series(np.r_[np.full(3, 2.0), np.zeros(60)], index=IDX[:63])
    exact = ewma_alarms(x, mean=0.0, sigma=1.0, lam=0.1, limit=2.814)
    asym = ewma_alarms(x, mean=0.0, sigma=1.0, lam=0.1, limit=2.814, limits="asymptotic")
    assert exact.alarms and exact.alarms[0].detected == IDX[1]
    assert asym.alarms == []
    assert exact.statistic["limit"].iloc[0] == pytest.approx(0.2814, rel=1e-3)
    assert asym.statistic["limit"].nunique() == 1


def _mc_cusum_arl(k, h, head_start, shift, runs=12000, seed=1):
    """Run lengths of the two-sided tabular CUSUM by simulation (blocks of 200 observations)."""
    rng = np.random.default_rng(seed)
    up, dn = np.full(runs, head_start), np.full(runs, head_start)
    rl, alive, t = np.zeros(runs, int), np.ones(runs, bool), 0
    while alive.any():
        ids = np.flatnonzero(alive)
        u, d = cusum_statistic(rng.normal(shift, 1.0, (200, ids.size)), k, start_upper=up[ids], start_lower=dn[ids])
        sig = (u > h) | (d > h)
        done = sig.any(axis=0)
        rl[ids[done]] = t + sig.argmax(axis=0)[done] + 1
        up[ids], dn[ids] = u[-1], d[-1]
        alive[ids[done]] = False
        t += 200
    return rl.mean(), rl.std() / np.sqrt(runs)


def test_cusum_head_start_lucas_crosier():
    # Lucas & Crosier (1982), FIR CUSUM table, k = 0.5 [from memory]: h = 4, head start 2: ARL 5.28
    # at a 1-sigma shift (8.38 without); h = 5, head start 2.5: 6.35 (10.4 without); two-sided ARL0
    # 149 (h = 4) and 430 (h = 5). The Markov chain reproduces the shifted ARLs; the in-control ones are
    # checked by simulation (the harmonic two-sided combination overstates them by a few per cent)
    from kinetrace.monitor.arl import cusum_arl

    assert cusum_arl(0.5, 4.0, 1.0, head_start=2.0) == pytest.approx(5.28, rel=0.01)
    assert cusum_arl(0.5, 4.0, 1.0) == pytest.approx(8.38, rel=0.01)
    assert cusum_arl(0.5, 5.0, 1.0, head_start=2.5) == pytest.approx(6.35, rel=0.01)
    mean, se = _mc_cusum_arl(0.5, 4.0, 2.0, 0.0)
    assert abs(mean - 149) < 4 * se
    assert 1.0 < cusum_arl(0.5, 4.0, head_start=2.0) / mean < 1.08
    with pytest.raises(KinetraceError, match="head start"):
        cusum_arl(0.5, 4.0, head_start=4.0)


def test_cusum_alarms_with_head_start():
    # a 1-sigma shift from the first observation: with a head start of h/2 the chart signals sooner;
    # the size estimate leaves the head start out (Montgomery 2009 sec. 9.1.2 estimate)
    x = pd.Series(np.r_[np.ones(40), np.zeros(20)], index=IDX[:60])
    plain = cusum_alarms(x, mean=0.0, sigma=1.0, k=0.5, h=5.0)
    fast = cusum_alarms(x, mean=0.0, sigma=1.0, k=0.5, h=5.0, head_start=2.5)
    assert plain.alarms[0].detected == IDX[10] and fast.alarms[0].detected == IDX[5]
    assert fast.alarms[0].size == pytest.approx(1.0 - 1e-12, abs=0.25)
    assert fast.statistic["upper"].iloc[0] == pytest.approx(2.5 + 0.5)
    assert fast.settings["arl0"] < plain.settings["arl0"]
