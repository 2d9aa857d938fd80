"""Arrhenius plot points and guide line."""

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from kinedash.arrhenius import R_GAS, guide_line, steady_points
from kinetrace.store import open_store

from .conftest import END


def test_guide_line_equals_scipy_linregress():
    rng = np.random.default_rng(11)
    inv_t = 1 / rng.uniform(320, 360, 40)
    ln_k = 12.0 - 7000.0 * inv_t + 0.05 * rng.standard_normal(40)
    a, b, ea = guide_line(inv_t, ln_k)
    ref = stats.linregress(inv_t, ln_k)                      # scipy reference implementation
    assert a == pytest.approx(ref.intercept, rel=1e-10) and b == pytest.approx(ref.slope, rel=1e-10)
    assert ea == pytest.approx(-ref.slope * 8.314462618, rel=1e-10)   # CODATA 2018 R, exact
    assert np.isnan(guide_line([1 / 340.0] * 3, [1.0, 2.0, 3.0])[2])
    assert R_GAS == 8.314462618


def test_steady_points_only_from_steady_buckets(hourly_url):
    store = open_store(hourly_url, create=False)
    start = END - pd.Timedelta(days=30)
    pts = steady_points(store, "R-210", "k_apparent:addition", start, END, n_buckets=720)   # 1 h buckets
    raw = store.series("R-210", ["k_apparent:addition", "temperature", "steady"], start, END)
    steady = raw[raw["steady"] == 1]
    assert len(pts) == len(steady)
    np.testing.assert_allclose(pts["ln_k"].to_numpy(), np.log(steady["k_apparent:addition"].to_numpy()), rtol=1e-12)
    np.testing.assert_allclose(pts["inv_t"].to_numpy(), 1 / steady["temperature"].to_numpy(), rtol=1e-12)
    # no steady series: no points (the page then shows its "no steady window" state)
    assert steady_points(store, "R-210", "k_apparent:missing", start, END).empty
