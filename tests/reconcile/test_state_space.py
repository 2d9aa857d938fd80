"""Kalman filter and Rauch-Tung-Striebel smoother (kinetrace.reconcile.state_space) against a
closed form and against statsmodels' state-space implementation on the same data."""

import numpy as np
import pytest

from kinetrace.reconcile.state_space import kalman_smoother, local_level_gain


def test_local_level_steady_state_gain_is_the_closed_form():
    # Local level model with q = sigma_eta^2 / sigma_eps^2 = 1: P / sigma_eps^2 = (1 + sqrt 5) / 2 =
    # 1.618034 and K = 0.618034 (REFERENCES.md [computed] from Durbin & Koopman 2012, Ch. 2)
    r = kalman_smoother(np.random.default_rng(0).standard_normal(40), [1.0], [[1.0]], [[1.0]], 1.0,
                        [0.0], [[1e7]])
    assert r.gain[-1, 0] == pytest.approx(0.618034, abs=1e-6)
    assert r.predicted_cov[-1, 0, 0] == pytest.approx(1.618034, abs=1e-6)
    assert local_level_gain(1.0) == pytest.approx(0.618034, abs=1e-6)
    # another ratio, same closed form: q = 0.25 gives P = (0.25 + sqrt(0.0625 + 1)) / 2 = 0.640388
    r = kalman_smoother(np.zeros(80), [1.0], [[1.0]], [[0.5]], 2.0, [0.0], [[1e7]])
    assert r.gain[-1, 0] == pytest.approx(local_level_gain(0.25), abs=1e-9)
    assert r.predicted_cov[-1, 0, 0] / 2.0 == pytest.approx(0.640388, abs=1e-6)


def test_local_linear_trend_matches_statsmodels():
    """Filtered and smoothed states of the local linear trend equal statsmodels' on the same data,
    missing observations included (statsmodels' UnobservedComponents, Durbin & Koopman's model)."""
    sm = pytest.importorskip("statsmodels.api")
    rng = np.random.default_rng(3)
    n = 120
    slope = np.cumsum(0.01 * rng.standard_normal(n))
    y = np.cumsum(slope) + 0.3 * rng.standard_normal(n)
    y[[5, 40, 41, 90]] = np.nan
    s_eps, s_level, s_trend = 0.09, 0.004, 0.0001       # variances
    a0, p0 = np.array([0.2, 0.0]), np.diag([4.0, 0.1])
    mod = sm.tsa.UnobservedComponents(y, level="lltrend")
    mod.ssm.initialize_known(a0, p0)
    ref = mod.smooth([s_eps, s_level, s_trend])
    ours = kalman_smoother(y, [1.0, 0.0], [[1.0, 1.0], [0.0, 1.0]], np.diag([s_level, s_trend]), s_eps, a0, p0)
    np.testing.assert_allclose(ours.filtered, ref.filtered_state.T, atol=1e-8)
    np.testing.assert_allclose(ours.smoothed, ref.smoothed_state.T, atol=1e-8)
    np.testing.assert_allclose(ours.filtered_cov, np.moveaxis(ref.filtered_state_cov, -1, 0), atol=1e-8)
    np.testing.assert_allclose(ours.smoothed_cov, np.moveaxis(ref.smoothed_state_cov, -1, 0), atol=1e-8)
    np.testing.assert_allclose(ours.predicted, ref.predicted_state[:, :-1].T, atol=1e-8)


def test_time_varying_system_matches_statsmodels_kalman_filter():
    """Uneven spacing (time-varying T and Q, as the lab samples have) against statsmodels' KalmanFilter."""
    sm_kf = pytest.importorskip("statsmodels.tsa.statespace.kalman_smoother")
    rng = np.random.default_rng(8)
    n = 60
    dt = rng.uniform(0.3, 1.2, n)
    tr = np.tile(np.eye(2), (n, 1, 1))
    tr[:, 0, 1] = dt
    q = np.zeros((n, 2, 2))
    q[:, 0, 0] = 1e-4 * dt + 4e-6 * dt ** 3 / 3
    q[:, 0, 1] = q[:, 1, 0] = 4e-6 * dt ** 2 / 2
    q[:, 1, 1] = 4e-6 * dt
    h = rng.uniform(0.5, 2.0, n) * 1e-5
    y = 0.01 * np.cumsum(dt) + np.sqrt(h) * rng.standard_normal(n)
    a0, p0 = np.zeros(2), np.diag([1e-2, 1e-4])
    ks = sm_kf.KalmanSmoother(k_endog=1, k_states=2, k_posdef=2)
    ks.bind(y[None, :])
    ks["design"] = np.array([[1.0, 0.0]])
    ks["obs_cov"] = h[None, None, :]
    ks["transition"] = np.moveaxis(tr, 0, -1)
    ks["selection"] = np.eye(2)
    ks["state_cov"] = np.moveaxis(q, 0, -1)
    ks.initialize_known(a0, p0)
    ref = ks.smooth()
    ours = kalman_smoother(y, [1.0, 0.0], tr, q, h, a0, p0)
    np.testing.assert_allclose(ours.filtered, ref.filtered_state.T, atol=1e-8)
    np.testing.assert_allclose(ours.smoothed, ref.smoothed_state.T, atol=1e-8)
