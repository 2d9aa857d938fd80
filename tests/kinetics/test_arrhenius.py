"""Checks of kinetrace.kinetics.arrhenius against published examples and scipy."""

import math

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import optimize, stats

from kinetrace.errors import DataQualityError, KinetraceError
from kinetrace.kinetics.arrhenius import (
    R_GAS,
    at_temperature,
    fit_arrhenius,
    normalise_to_reference,
)

# Fogler, Elements of Chemical Reaction Engineering, Example 3-1 (benzene diazonium
# chloride decomposition) [found, via REFERENCES.md]
FOGLER_3_1_T = np.array([313.0, 319.0, 323.0, 328.0, 333.0])  # K
FOGLER_3_1_K = np.array([0.00043, 0.00103, 0.00180, 0.00355, 0.00717])  # 1/s


def test_r_gas_codata_2018():
    # CODATA 2018 (Tiesinga et al. 2021), exact in the 2019 SI
    assert R_GAS == 8.314462618


def test_fogler_example_3_1_least_squares():
    fit = fit_arrhenius(FOGLER_3_1_T, FOGLER_3_1_K)
    # REFERENCES.md [computed]: OLS of ln k on 1/T gives E = 121.5 kJ/mol. The book
    # prints 116 kJ/mol because it reads the slope off a hand-drawn semi-log plot
    # (graphical method), not a least-squares fit. Tolerance: half a unit of the
    # last printed digit (0.05 kJ/mol).
    assert fit.activation_energy / 1e3 == pytest.approx(121.5, abs=0.05)
    assert fit.n_used == 5 and fit.n_excluded == 0
    lo, hi = fit.activation_energy_ci95
    assert lo < fit.activation_energy < hi


def test_fit_matches_scipy_linregress():
    # reference library: scipy.stats.linregress of ln k on 1/T (slope, stderr, intercept)
    reg = stats.linregress(1.0 / FOGLER_3_1_T, np.log(FOGLER_3_1_K))
    fit = fit_arrhenius(FOGLER_3_1_T, FOGLER_3_1_K, reference_temperature=320.0)
    assert fit.activation_energy == pytest.approx(-reg.slope * R_GAS, rel=1e-10)
    assert fit.activation_energy_se == pytest.approx(reg.stderr * R_GAS, rel=1e-10)
    assert math.log(fit.pre_exponential) == pytest.approx(reg.intercept, rel=1e-10)
    assert fit.ln_pre_exponential_se == pytest.approx(reg.intercept_stderr, rel=1e-8)
    assert fit.r_squared == pytest.approx(reg.rvalue**2, rel=1e-10)
    # k_ref is the regression line evaluated at 1/T_ref
    assert math.log(fit.k_ref) == pytest.approx(reg.intercept + reg.slope / 320.0, rel=1e-10)
    t_crit = stats.t.ppf(0.975, 3)
    assert fit.activation_energy_ci95[1] - fit.activation_energy == pytest.approx(
        t_crit * reg.stderr * R_GAS, rel=1e-10
    )


def test_default_reference_decorrelates():
    # common practice, no source: centring 1/T makes intercept and slope uncorrelated
    fit = fit_arrhenius(FOGLER_3_1_T, FOGLER_3_1_K)
    assert fit.reference_temperature == pytest.approx(1.0 / np.mean(1.0 / FOGLER_3_1_T))
    assert abs(fit.correlation) < 1e-10
    fit_far = fit_arrhenius(FOGLER_3_1_T, FOGLER_3_1_K, reference_temperature=273.15)
    assert abs(fit_far.correlation) > 0.9


def test_levenspiel_example_2_3_pasteurisation():
    # Levenspiel (1999) Chemical Reaction Engineering 3rd ed., Example 2.3 [memory, recomputed]:
    # 30 min at 63 C is equivalent to 15 s at 74 C, so k(74 C)/k(63 C) = 1800/15 = 120,
    # and E = 422 kJ/mol. E printed to 3 s.f. (+-0.5 kJ/mol) moves the ratio by
    # exp(0.5e3/R * (1/336.15 - 1/347.15)) - 1 = 0.57 %, hence rel=6e-3.
    ratio = at_temperature(1.0, 347.15, 422e3, 336.15)
    assert ratio == pytest.approx(120.0, rel=6e-3)
    # and solving at_temperature for Ea (scipy.optimize.brentq) gives 422 kJ/mol
    ea = optimize.brentq(lambda e: at_temperature(1.0, 347.15, e, 336.15) - 120.0, 1e4, 1e6)
    assert ea / 1e3 == pytest.approx(422, abs=0.5)


def test_input_types_scalar_array_series_nan():
    assert isinstance(normalise_to_reference(1.0, 300.0, 5e4, 310.0), float)
    arr = normalise_to_reference(np.array([1.0, np.nan]), np.array([300.0, 300.0]), 5e4, 310.0)
    assert isinstance(arr, np.ndarray) and np.isnan(arr[1])
    idx = pd.date_range("2026-01-01", periods=3, freq="h", tz="UTC")
    k = pd.Series([1.0, 2.0, np.nan], index=idx, name="k_app")
    t = pd.Series([300.0, 310.0, 305.0], index=idx)
    out = normalise_to_reference(k, t, 5e4, 310.0)
    assert isinstance(out, pd.Series) and out.index.equals(idx) and out.name == "k_app"
    assert out.iloc[1] == pytest.approx(2.0) and np.isnan(out.iloc[2])
    # temperature as a Series and k scalar also keeps the index
    out2 = at_temperature(1.0, t, 5e4, 310.0)
    assert isinstance(out2, pd.Series) and out2.index.equals(idx)
    # non-positive temperature -> NaN, silently
    assert math.isnan(normalise_to_reference(1.0, 0.0, 5e4, 310.0))


@settings(max_examples=60, deadline=None)
@given(
    k=st.floats(1e-8, 1e3),
    t=st.floats(250.0, 600.0),
    ea=st.floats(0.0, 3e5),
    t_ref=st.floats(250.0, 600.0),
)
def test_round_trip(k, t, ea, t_ref):
    # the two functions are inverses (definition of the reference form)
    k_ref = normalise_to_reference(k, t, ea, t_ref)
    assert at_temperature(k_ref, t, ea, t_ref) == pytest.approx(k, rel=1e-9)


def test_fit_excludes_and_counts_bad_points():
    t = np.append(FOGLER_3_1_T, [330.0, np.nan])
    k = np.append(FOGLER_3_1_K, [-1e-3, 1e-3])
    fit = fit_arrhenius(t, k)
    assert fit.n_used == 5 and fit.n_excluded == 2
    assert fit.excluded.tolist() == [False] * 5 + [True, True]
    assert fit.activation_energy / 1e3 == pytest.approx(121.5, abs=0.05)


def test_fit_errors():
    with pytest.raises(DataQualityError, match="at least 3"):
        fit_arrhenius([300.0, 310.0], [1.0, 2.0])
    with pytest.raises(DataQualityError, match="two different temperatures"):
        fit_arrhenius([300.0, 300.0, 300.0], [1.0, 2.0, 3.0])
    with pytest.raises(KinetraceError, match="same length"):
        fit_arrhenius([300.0, 310.0, 320.0], [1.0, 2.0])
    with pytest.raises(KinetraceError, match="reference_temperature"):
        fit_arrhenius(FOGLER_3_1_T, FOGLER_3_1_K, reference_temperature=-5.0)
