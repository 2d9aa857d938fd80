"""Arrhenius points (activity-corrected, steady buckets only), the temperature-span check, the fit's
lines, the 1000/T ticks and the model weights, against independent references."""

import numpy as np
import pandas as pd
import pytest
from scipy import special, stats

from kinedash.arrhenius import MIN_SPAN, R_GAS, fit_lines, span_check, steady_points
from kinedash.evidence import akaike_weights, comparison_table
from kinedash.figures import nice_ticks
from kinetrace.store import open_store

from .conftest import END

# Fogler, Elements of Chemical Reaction Engineering, Example 3-1 (benzene diazonium chloride) [found]
FOGLER_T = np.array([313.0, 319.0, 323.0, 328.0, 333.0])
FOGLER_K = np.array([0.00043, 0.00103, 0.00180, 0.00355, 0.00717])


def test_steady_points_are_activity_corrected_steady_buckets(hourly_url):
    store = open_store(hourly_url, create=False)
    start = END - pd.Timedelta(days=30)
    pts = steady_points(store, "R-210", "k_apparent:addition", start, END, n_buckets=720)   # 1 h buckets
    raw = store.series("R-210", ["k_apparent:addition", "activity_fit", "temperature", "steady"], start, END)
    steady = raw[raw["steady"] == 1]
    assert len(pts) == len(steady)
    np.testing.assert_allclose(pts["ln_k"].to_numpy(),
                               np.log(steady["k_apparent:addition"] / steady["activity_fit"]).to_numpy(), rtol=1e-12)
    np.testing.assert_allclose(pts["inv_t"].to_numpy(), 1 / steady["temperature"].to_numpy(), rtol=1e-12)
    assert steady_points(store, "R-210", "k_apparent:missing", start, END).empty


def test_span_check_on_fogler_example_and_on_a_narrow_span():
    # the 20 K span of Fogler's Example 3-1 shows the temperature effect clearly; OLS Ea = 121.5 kJ/mol
    # (REFERENCES.md, [computed] from the printed k, T; scipy.stats.linregress as the reference fit)
    ea = -stats.linregress(1 / FOGLER_T, np.log(FOGLER_K)).slope * R_GAS
    assert ea / 1000 == pytest.approx(121.5, abs=0.1)
    ok = span_check(1 / FOGLER_T, np.log(FOGLER_K), ea)
    assert ok.supported and ok.span_k == pytest.approx(20.0)
    # the same k over a 2 K span (below the joint fit's 3 K threshold): no plot, and the reason says so
    narrow = span_check(1 / np.linspace(343.0, 345.0, 12), np.zeros(12), ea)
    assert not narrow.supported and "2.0 K only" in narrow.reason and MIN_SPAN == 3.0
    # a wide span buried in scatter: ln k noise of 1.0 against a 0.2 signal is refused
    rng = np.random.default_rng(3)
    t = np.linspace(340.0, 346.0, 40)
    noisy = span_check(1 / t, -30000.0 / (R_GAS * t) + rng.standard_normal(40), 30000.0)
    assert not noisy.supported and "scatter" in noisy.reason


def test_fit_lines_have_the_stored_slope_through_the_centre():
    lines = fit_lines(1 / FOGLER_T, np.log(FOGLER_K), 121.5e3, 110e3, 133e3)
    assert lines["line"].nunique() == 3
    for _, seg in lines.groupby("line"):
        x, y = seg["inv_t_k"].to_numpy() / 1000, seg["ln_k"].to_numpy()
        ea = -(y[1] - y[0]) / (x[1] - x[0]) * R_GAS
        assert ea in (pytest.approx(121.5e3), pytest.approx(110e3), pytest.approx(133e3))
        mid = np.interp(np.mean(1 / FOGLER_T), x, y)
        assert mid == pytest.approx(np.log(FOGLER_K).mean())


@pytest.mark.parametrize("lo,hi", [(2.90, 2.95), (2.9151, 2.9319), (1000 / 345.0, 1000 / 343.0), (2.5, 3.3)])
def test_ticks_are_few_round_and_inside(lo, hi):
    ticks = nice_ticks(lo, hi)
    assert 2 <= len(ticks) <= 6 and all(lo - 1e-12 <= t <= hi + 1e-12 for t in ticks)
    steps = np.diff(ticks)
    np.testing.assert_allclose(steps, steps[0])
    mant = steps[0] / 10 ** np.floor(np.log10(steps[0]))
    assert round(mant, 6) in (1.0, 2.0, 5.0)


def test_akaike_weights_against_scipy_softmax():
    aicc = np.array([-412.3, -398.7, -410.1, np.nan])
    delta, w = akaike_weights(aicc)
    ok = np.isfinite(aicc)
    # w_i = exp(-Delta_i/2) / sum exp(-Delta_j/2), Burnham & Anderson (2002), sec. 2.9; scipy's softmax of -AICc/2
    np.testing.assert_allclose(w[ok], special.softmax(-aicc[ok] / 2), rtol=1e-12)
    assert np.isnan(w[3]) and np.nansum(w) == pytest.approx(1.0)
    # Delta = 2 gives an evidence ratio of exp(1) = 2.718 (Burnham & Anderson 2002, sec. 2.10; from memory)
    _, w2 = akaike_weights([0.0, 2.0])
    assert w2[0] / w2[1] == pytest.approx(np.e)
    t = comparison_table(["saturating", "power law", "third"], aicc[:3])
    assert list(t["candidate"]) == ["saturating", "third", "power law"] and t["delta"].iloc[0] == 0
    assert t["support"].tolist() == ["best supported", "considerably less support", "essentially no support"]
