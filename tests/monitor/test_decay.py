"""Decay-law fits: parameter recovery, AICc choice, prediction band, the CSTR decay relation, time on stream."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import optimize, stats

from kinetrace.errors import DataQualityError, KinetraceError
from kinetrace.kinetics.cstr import solve_cstr
from kinetrace.monitor.decay import decay_activity, fit_decay, list_decay_laws
from kinetrace.monitor.trend import catalyst_changes, fit_activity_trend, time_on_stream

DAY = 86400.0
T = np.linspace(0.0, 120.0, 241) * DAY

# Decay laws as written in Fogler (2016) ch. 10 and Levenspiel (1999) ch. 21 [memory, REFERENCES.md]
TRUE = {
    "linear": {"a0": 0.97, "b": 0.004 / DAY},
    "exponential": {"a0": 0.97, "kd": 0.006 / DAY},
    "hyperbolic": {"a0": 0.97, "kd": 0.010 / DAY},
    "nth_order": {"a0": 0.97, "kd": 0.010 / DAY, "m": 3.0},
}


def test_lister_and_unknown_name():
    assert list_decay_laws() == ["linear", "exponential", "hyperbolic", "nth_order"]
    with pytest.raises(KinetraceError, match="allowed: linear, exponential, hyperbolic, nth_order"):
        fit_decay(T, np.ones_like(T), method="parabolic")
    with pytest.raises(KinetraceError, match="missing"):
        decay_activity("exponential", 1.0, a0=1.0)


def test_special_cases_of_the_nth_order_law():
    # Levenspiel (1999) ch. 21 [memory]: m = 2 is the hyperbolic law and m -> 1 the exponential law
    t = np.array([0.0, 10.0, 50.0]) * DAY
    kd = 0.01 / DAY
    np.testing.assert_allclose(decay_activity("nth_order", t, a0=0.9, kd=kd, m=2.0),
                               decay_activity("hyperbolic", t, a0=0.9, kd=kd), rtol=1e-12)
    np.testing.assert_allclose(decay_activity("nth_order", t, a0=0.9, kd=kd, m=1.0 + 1e-7),
                               decay_activity("exponential", t, a0=0.9, kd=kd), rtol=1e-6)
    # m < 1: activity reaches zero in finite time, t_end = 1 / ((1 - m) kd), and stays there
    assert decay_activity("nth_order", 300.0 * DAY, a0=1.0, kd=kd, m=0.5) == 0.0


def test_input_types():
    # scalar -> float, ndarray -> ndarray, Series -> Series with the same index; NaN propagates
    assert isinstance(decay_activity("linear", 0.0, a0=1.0, b=1e-7), float)
    s = pd.Series([0.0, DAY, np.nan], index=list("abc"))
    out = decay_activity("exponential", s, a0=1.0, kd=0.01 / DAY)
    assert list(out.index) == list("abc") and np.isnan(out["c"])
    assert out["b"] == pytest.approx(np.exp(-0.01), rel=1e-12)


@pytest.mark.parametrize("law", list(TRUE))
def test_fit_recovers_parameters_of_synthetic_data(law):
    # synthetic data with 1 % noise; tolerance 4 standard errors of the fit (common practice, no source)
    rng = np.random.default_rng(7)
    a = decay_activity(law, T, **TRUE[law]) + rng.normal(0.0, 0.01, T.size)
    fit = fit_decay(T, a, method=law)
    se = np.sqrt(np.diag(fit.covariance))
    for (name, true), s in zip(TRUE[law].items(), se):
        assert abs(fit.params[name] - true) < 4 * s, (law, name, fit.params[name], true, s)
    assert fit.residual_sd == pytest.approx(0.01, rel=0.15)


def test_linear_law_against_ordinary_least_squares():
    # Fogler (2016) ch. 10 [memory]: linear decay a = a0 (1 - b t) is a straight line in t with intercept
    # a0 and slope -a0 b, so the unweighted fit must equal scipy.stats.linregress (reference library) on
    # the same data, b = -slope / intercept. Data: an invented straight line plus 1 % noise.
    rng = np.random.default_rng(17)
    t_day = np.linspace(0.0, 120.0, 241)
    a = 0.97 - 0.0035 * t_day + rng.normal(0.0, 0.01, t_day.size)
    fit = fit_decay(t_day * DAY, a, method="linear")
    ols = stats.linregress(t_day, a)
    assert fit.params["a0"] == pytest.approx(ols.intercept, rel=1e-6)
    assert fit.params["b"] * DAY == pytest.approx(-ols.slope / ols.intercept, rel=1e-6)
    # the law itself at the OLS line: a(t) = intercept + slope t
    np.testing.assert_allclose(decay_activity("linear", t_day * DAY, a0=ols.intercept, b=-ols.slope / ols.intercept / DAY),
                               ols.intercept + ols.slope * t_day, rtol=1e-12)


@pytest.mark.parametrize("law", ["linear", "exponential", "hyperbolic"])
def test_aicc_picks_the_generating_law(law):
    # with 241 points and 1 % noise the generating two-parameter law wins or ties with nth_order
    rng = np.random.default_rng(11)
    a = decay_activity(law, T, **TRUE[law]) + rng.normal(0.0, 0.01, T.size)
    fit = fit_decay(T, a)
    assert fit.candidates.loc[law, "delta_aicc"] < 2.5
    assert set(fit.candidates.index) == set(list_decay_laws())


def test_fit_agrees_with_scipy_curve_fit():
    # reference library: scipy.optimize.curve_fit (Levenberg-Marquardt) on the same weighted problem
    rng = np.random.default_rng(3)
    a = decay_activity("hyperbolic", T, **TRUE["hyperbolic"]) + rng.normal(0.0, 0.01, T.size)
    w = np.linspace(0.5, 2.0, T.size)
    fit = fit_decay(T, a, method="hyperbolic", weights=w)
    popt, pcov = optimize.curve_fit(lambda t, a0, kd: a0 / (1 + kd * t), T / DAY, a, p0=[1.0, 0.01],
                                    sigma=1 / np.sqrt(w))
    assert fit.params["a0"] == pytest.approx(popt[0], rel=1e-6)
    assert fit.params["kd"] * DAY == pytest.approx(popt[1], rel=1e-6)
    assert np.sqrt(fit.covariance[1, 1]) * DAY == pytest.approx(np.sqrt(pcov[1, 1]), rel=1e-3)


def test_prediction_band_covers_new_observations():
    # 95 % prediction band: about 95 % of fresh observations fall inside (binomial error on 2000 draws)
    rng = np.random.default_rng(5)
    truth = TRUE["exponential"]
    a = decay_activity("exponential", T, **truth) + rng.normal(0.0, 0.01, T.size)
    fit = fit_decay(T, a, method="exponential")
    t_new = np.linspace(0.0, 150.0, 2000) * DAY
    y_new = decay_activity("exponential", t_new, **truth) + rng.normal(0.0, 0.01, t_new.size)
    mean, lo, hi = fit.predict(t_new, level=0.95)
    inside = np.mean((y_new >= lo) & (y_new <= hi))
    assert 0.93 < inside < 0.97
    _, clo, chi = fit.predict(t_new, band="confidence")
    assert np.all(chi - clo < hi - lo)


def test_levenspiel_cstr_decay_relation():
    """Levenspiel (1999) ch. 21 [memory]: first order in a CSTR with slowly decaying activity,
    ln(C_A0 / C_A - 1) = ln(k tau) - kd t. The outlet is computed with the project's CSTR solver; the
    relation is checked with scipy.stats.linregress (reference library) and against fit_decay.
    Values [computed]: k = 0.05 1/min, tau = 60 min (k tau = 3), kd = 0.02 1/day, 40 days."""
    k, tau, kd = 0.05 / 60.0, 3600.0, 0.02 / DAY
    t = np.arange(0.0, 40.0, 0.5) * DAY
    act = np.exp(-kd * t)
    sol = solve_cstr("power_law", tau, {"A": 2000.0}, k * act, key="A", stoichiometry={"A": -1, "R": 1},
                     orders={"A": 1})
    c_a = np.asarray(sol.concentrations["A"])
    y = np.log(2000.0 / c_a - 1.0)
    lr = stats.linregress(t, y)
    assert lr.intercept == pytest.approx(np.log(3.0), abs=1e-9)
    assert -lr.slope == pytest.approx(kd, rel=1e-9)
    # activity back-calculated from the outlet, a = (C_A0/C_A - 1) / (k tau), fitted by the decay module
    fit = fit_decay(t, (2000.0 / c_a - 1.0) / (k * tau), method="exponential")
    assert fit.params["kd"] == pytest.approx(-lr.slope, rel=1e-6)
    assert fit.params["a0"] == pytest.approx(np.exp(lr.intercept) / (k * tau), rel=1e-6)


def test_too_few_points_is_a_data_quality_error():
    with pytest.raises(DataQualityError, match="usable activity points"):
        fit_decay([0.0, 1.0, np.nan], [1.0, 0.9, 0.8])


def test_time_on_stream_restarts_at_changes():
    t = pd.date_range("2026-10-01", periods=6, freq="D", tz="UTC")
    tos = time_on_stream(t, ["2026-10-03 12:00"])
    np.testing.assert_allclose(tos / DAY, [0, 1, 2, 0.5, 1.5, 2.5])


def test_detected_catalyst_change_restarts_the_trend():
    # invented scenario: charge 1 decays, fresh charge loaded on day 30 (step up 0.55 -> 0.98)
    idx = pd.date_range("2026-08-01", periods=24 * 60, freq="h", tz="UTC")
    days = np.arange(idx.size) / 24.0
    rng = np.random.default_rng(2)
    a = np.where(days < 30, 0.95 * np.exp(-0.02 * days), 0.98 * np.exp(-0.01 * (days - 30)))
    act = pd.Series(a + rng.normal(0, 0.01, idx.size), index=idx)
    act.iloc[100:110] = np.nan
    changes = catalyst_changes(act)
    assert len(changes) == 1 and abs(changes[0] - pd.Timestamp("2026-08-31", tz="UTC")) <= pd.Timedelta("2h")
    trend = fit_activity_trend(act, method="exponential")
    assert trend.fit.params["kd"] * DAY == pytest.approx(0.01, abs=0.001)
    # a known event close to the detected step is used as is, not counted twice
    assert catalyst_changes(act, events=["2026-08-31 01:00"]) == [pd.Timestamp("2026-08-31 01:00", tz="UTC")]
    # without detection and events the whole series is one charge and the fit is poor
    poor = fit_activity_trend(act, method="exponential", detect_changes=False)
    assert poor.fit.residual_sd > 5 * trend.fit.residual_sd


def test_steady_mask_limits_the_rows_fitted():
    idx = pd.date_range("2026-08-01", periods=240, freq="h", tz="UTC")
    act = pd.Series(np.exp(-0.01 * np.arange(240) / 24.0), index=idx)
    act.iloc[::7] = 0.2  # transients
    steady = pd.Series(True, index=idx)
    steady.iloc[::7] = False
    trend = fit_activity_trend(act, steady=steady, method="exponential", detect_changes=False)
    assert trend.fit.n == int(steady.sum())
    assert trend.fit.params["kd"] * DAY == pytest.approx(0.01, rel=1e-6)
