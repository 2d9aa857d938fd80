"""Checks of kinetrace.kinetics.estimation against scipy.optimize.curve_fit, OLS and simulation."""

import numpy as np
import pandas as pd
import pytest
from scipy import optimize

from kinetrace.errors import DataQualityError, KinetraceError
from kinetrace.kinetics.arrhenius import R_GAS, at_temperature, fit_arrhenius
from kinetrace.kinetics.estimation import compare_models, fit_rate_law, window_means
from kinetrace.kinetics.steady import detect_steady

T_REF = 345.0
TEMPS = np.repeat([330.0, 340.0, 350.0, 360.0], 6)  # K
CONCS = np.tile([50.0, 150.0, 400.0, 800.0, 1500.0, 2500.0], 4)  # mol/m^3
TRUE = {"k_ref": 0.01, "activation_energy": 65e3, "K_A": 0.002}


def _saturating_data(seed, noise=0.03, k_ads=0.002):
    rng = np.random.default_rng(seed)
    r = 0.01 * at_temperature(1.0, TEMPS, 65e3, T_REF) * CONCS / (1 + k_ads * CONCS)
    return r * np.exp(noise * rng.normal(size=TEMPS.size))


def _fit_sat(r, **kw):
    return fit_rate_law(r, {"A": CONCS}, TEMPS, "saturating", reference_temperature=T_REF,
                        orders={"A": 1}, fit_adsorption=["A"], **kw)


def test_matches_scipy_curve_fit():
    # reference library: scipy.optimize.curve_fit (Levenberg-Marquardt) on ln r with the
    # same parameterisation; pcov = s^2 (J'J)^-1 with absolute_sigma=False
    r = _saturating_data(1)
    fit = _fit_sat(r)

    def ln_model(x, ln_k, ea, k_ads):
        t, c = x
        return ln_k - ea / R_GAS * (1 / t - 1 / T_REF) + np.log(c / (1 + k_ads * c))

    popt, pcov = optimize.curve_fit(ln_model, (TEMPS, CONCS), np.log(r), p0=[np.log(0.01), 6e4, 1e-3])
    assert np.log(fit.estimates["k_ref"]) == pytest.approx(popt[0], abs=1e-6)
    assert fit.estimates["activation_energy"] == pytest.approx(popt[1], rel=1e-6)
    assert fit.estimates["K_A"] == pytest.approx(popt[2], rel=1e-5)
    se = np.sqrt(np.diag(pcov))
    # standard errors agree to the accuracy of the two Jacobians (finite differences)
    assert fit.standard_errors["activation_energy"] == pytest.approx(se[1], rel=1e-3)
    assert fit.standard_errors["K_A"] == pytest.approx(se[2], rel=1e-3)
    assert fit.standard_errors["k_ref"] / fit.estimates["k_ref"] == pytest.approx(se[0], rel=1e-3)
    corr = pcov / np.outer(se, se)
    assert fit.correlation.to_numpy() == pytest.approx(corr, abs=1e-3)
    # information criteria by their definitions (Akaike 1974; Schwarz 1978)
    n, p = 24, 3
    assert fit.aic == pytest.approx(n * np.log(fit.ssr / n) + 2 * p, rel=1e-12)
    assert fit.bic == pytest.approx(n * np.log(fit.ssr / n) + p * np.log(n), rel=1e-12)


def test_first_order_log_fit_equals_arrhenius_ols_fogler_3_1():
    # with log residuals a first-order power law is linear in (ln k_ref, Ea), so the fit
    # must equal the OLS Arrhenius fit; Fogler Example 3-1 data give 121.5 kJ/mol
    # by least squares [computed, REFERENCES.md] (the book's 116 is graphical)
    t = np.array([313.0, 319.0, 323.0, 328.0, 333.0])
    k = np.array([0.00043, 0.00103, 0.00180, 0.00355, 0.00717])
    fit = fit_rate_law(k * 1.0, {"A": np.ones(5)}, t, "power_law", reference_temperature=323.0,
                       orders={"A": 1})
    ols = fit_arrhenius(t, k, reference_temperature=323.0)
    assert fit.estimates["activation_energy"] / 1e3 == pytest.approx(121.5, abs=0.05)
    assert fit.estimates["activation_energy"] == pytest.approx(ols.activation_energy, rel=1e-7)
    assert fit.standard_errors["activation_energy"] == pytest.approx(ols.activation_energy_se, rel=1e-5)
    assert fit.ci95["k_ref"] == pytest.approx(ols.k_ref_ci95, rel=1e-6)


@pytest.mark.slow
def test_confidence_intervals_cover_true_values():
    # linearised 95 % intervals (Bates & Watts 1988) should contain the true value in
    # about 95 % of repeated experiments. 300 seeds: binomial sd of the coverage 1.3 %;
    # accept 0.90..0.99 (about -4 and +3 sd; the linearisation may be slightly off).
    n_seeds = 300
    hits = dict.fromkeys(TRUE, 0)
    for seed in range(n_seeds):
        fit = _fit_sat(_saturating_data(seed))
        assert fit.success
        for name, value in TRUE.items():
            lo, hi = fit.ci95[name]
            hits[name] += lo <= value <= hi
    for name, h in hits.items():
        assert 0.90 <= h / n_seeds <= 0.99, (name, h / n_seeds)


def test_model_comparison_verdicts():
    # strong saturation (K C up to 5): the saturating law must win clearly
    r_strong = _saturating_data(5, noise=0.02)
    f_pl = fit_rate_law(r_strong, {"A": CONCS}, TEMPS, "power_law", reference_temperature=T_REF, orders={"A": 1})
    f_sat = _fit_sat(r_strong)
    cmp_strong = compare_models({"first order": f_pl, "saturating": f_sat})
    assert cmp_strong.best == "saturating" and cmp_strong.distinguishable
    assert "clearly better" in cmp_strong.verdict
    assert cmp_strong.table["weight"].sum() == pytest.approx(1.0)
    # negligible saturation (K C <= 0.005): the data cannot tell them apart; AICc alone
    # prefers the smaller model by about 2.6 (penalty of the unused parameter), and the
    # likelihood-ratio test (Wilks 1938) finds no support for the extra parameter
    r_weak = _saturating_data(6, noise=0.03, k_ads=2e-6)
    f_pl_w = fit_rate_law(r_weak, {"A": CONCS}, TEMPS, "power_law", reference_temperature=T_REF, orders={"A": 1})
    f_sat_w = _fit_sat(r_weak, initial={"K_A": 1e-5})
    cmp_weak = compare_models({"first order": f_pl_w, "saturating": f_sat_w})
    assert not cmp_weak.distinguishable
    assert "cannot tell" in cmp_weak.verdict and "'first order'" in cmp_weak.verdict.split("Use the simpler")[1]


def test_exclusions_diagnostics_and_errors():
    r = _saturating_data(2)
    r[0] = np.nan
    r[1] = -1e-3  # negative rate from noise: not usable with log residuals
    fit = _fit_sat(r)
    assert fit.n == 22 and fit.n_excluded == 2
    assert 1.0 < fit.diagnostics["durbin_watson"] < 3.0
    assert set(fit.diagnostics) == {"durbin_watson", "shapiro_wilk_p", "spearman_temperature",
                                    "max_abs_standardised"}
    pred = fit.predict({"A": CONCS}, TEMPS)
    assert np.all(np.isfinite(pred))
    fit_abs = fit_rate_law(r, {"A": CONCS}, TEMPS, "saturating", reference_temperature=T_REF, orders={"A": 1},
                           fit_adsorption=["A"], residual="absolute", sigma=0.03 * np.abs(r) + 1e-3)
    assert fit_abs.n == 23
    with pytest.raises(KinetraceError, match="same data"):
        compare_models({"a": fit, "b": fit_abs})
    with pytest.raises(DataQualityError, match="at least 4 usable points"):
        _fit_sat(np.full(24, np.nan))
    with pytest.raises(KinetraceError, match="residual"):
        _fit_sat(r, residual="relative")


def test_window_means_from_detected_windows():
    idx = pd.date_range("2026-10-01", periods=400, freq="min", tz="UTC")
    rng = np.random.default_rng(0)
    temp = np.where(np.arange(400) < 200, 340.0, 350.0) + 0.05 * rng.normal(size=400)
    frame = pd.DataFrame({"T": temp, "rate": 0.5 + 0.001 * rng.normal(size=400)}, index=idx)
    res = detect_steady(frame[["T"]], min_duration=30, critical_value=1.73)
    means = window_means(frame, res.windows)
    assert len(means) >= 2
    assert means["T"].iloc[0] == pytest.approx(340.0, abs=0.05)
    assert means["T"].iloc[-1] == pytest.approx(350.0, abs=0.05)
    assert (means["n_samples"] >= 30).all()


def test_reversible_fit_with_law_params_and_negative_rates():
    # net rates change sign across equilibrium; absolute residuals keep every point
    # (log residuals must drop the negative ones, and count them)
    from kinetrace.kinetics.ratelaws import rate

    t = np.repeat([330.0, 340.0, 350.0, 360.0], 5)
    ca = np.tile([100.0, 300.0, 600.0, 900.0, 1200.0], 4)
    cc = np.tile([800.0, 600.0, 300.0, 200.0, 50.0], 4)
    law = dict(orders={"A": 1}, reverse_orders={"C": 1}, equilibrium_constant=5.0,
               reaction_enthalpy=-30e3, reference_temperature=345.0)  # van 't Hoff T_ref
    k_true = at_temperature(0.004, t, 60e3, 345.0)
    r = rate("reversible", {"A": ca, "C": cc}, k_true, temperature=t, **law)
    r = r * np.exp(0.02 * np.random.default_rng(0).normal(size=r.size))
    assert (r < 0).any()
    fit = fit_rate_law(r, {"A": ca, "C": cc}, t, "reversible", reference_temperature=340.0,
                       law_params=law, residual="absolute", sigma=0.02 * np.abs(r))
    assert fit.n == 20
    k340 = at_temperature(0.004, 340.0, 60e3, 345.0)  # true k at the fit's T_ref
    lo, hi = fit.ci95["k_ref"]
    assert lo < k340 < hi
    lo, hi = fit.ci95["activation_energy"]
    assert lo < 60e3 < hi
    fit_log = fit_rate_law(r, {"A": ca, "C": cc}, t, "reversible", reference_temperature=340.0, law_params=law)
    assert fit_log.n_excluded == int((r <= 0).sum())
