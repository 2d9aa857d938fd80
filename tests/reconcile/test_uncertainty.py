"""Sigma estimation from steady stretches."""

import numpy as np
import pytest

from kinetrace.reconcile import (ReconciliationError, estimate_sigma, reconcile_linear,
                                 sigma_methods)

from .conftest import YANG_A, YANG_SIGMA, YANG_X


def test_pooled_and_successive_difference(rng):
    T = 6000
    y = YANG_X + YANG_SIGMA * rng.standard_normal((T, 8))
    y[3000:] += 5.0  # a level change between stretches: removed by per-stretch means
    steady = np.ones(T, bool)
    steady[2990:3010] = False
    for method in sigma_methods():
        est = estimate_sigma(y, steady, method=method)
        # sampling sd of a sd estimate with ~6000 dof: sigma / sqrt(2 dof) ~ 0.9 %; 5 % allowed
        np.testing.assert_allclose(est.sigma, YANG_SIGMA, rtol=0.05)
        assert est.n_stretches == 2 and est.method == method
    # slow drift inflates the pooled sd but hardly the successive-difference one
    # (von Neumann et al. 1941)
    drift = y + np.linspace(0, 40, T)[:, None] * YANG_SIGMA
    est_p = estimate_sigma(drift, [(0, 2990), (3010, T)], method="pooled_std")
    est_d = estimate_sigma(drift, [(0, 2990), (3010, T)], method="successive_difference")
    assert np.all(est_p.sigma > 2 * YANG_SIGMA)
    np.testing.assert_allclose(est_d.sigma, YANG_SIGMA, rtol=0.05)


def test_estimate_is_recorded_in_results(rng):
    y = YANG_X + YANG_SIGMA * rng.standard_normal((500, 8))
    est = estimate_sigma(y, np.ones(500, bool))
    r = reconcile_linear(y, est, YANG_A)
    assert r.sigma_source.startswith("estimated (pooled_std, 1 steady stretches")
    assert reconcile_linear(y, YANG_SIGMA, YANG_A).sigma_source == "given"


def test_errors(rng):
    y = rng.standard_normal((50, 2))
    with pytest.raises(ValueError, match="allowed: pooled_std, successive_difference"):
        estimate_sigma(y, np.ones(50, bool), method="range")
    with pytest.raises(ReconciliationError, match=r"cannot estimate sigma of 'y\[0\]'"):
        estimate_sigma(y, np.r_[np.ones(5, bool), np.zeros(45, bool)])
    with pytest.raises(ReconciliationError, match="overlaps"):
        estimate_sigma(y, [(0, 20), (10, 30)])


@pytest.mark.parametrize("method", sigma_methods())
def test_no_steady_step_or_no_finite_reading_is_a_clear_error(rng, method):
    """A unit that is down (no steady step) or whose readings are all unusable (all NaN) gives a
    ReconciliationError naming the variable, never an IndexError (common practice, no source)."""
    y = rng.standard_normal((50, 2))
    with pytest.raises(ReconciliationError, match=r"no steady stretch"):
        estimate_sigma(y, np.zeros(50, bool), method=method, names=["feed_flow", "outlet_flow"])
    with pytest.raises(ReconciliationError, match=r"no steady stretch"):
        estimate_sigma(y, [], method=method)
    with pytest.raises(ReconciliationError, match=r"cannot estimate sigma of 'feed_flow'.*no finite reading"):
        estimate_sigma(np.full((50, 2), np.nan), np.ones(50, bool), method=method, names=["feed_flow", "outlet_flow"])
    with pytest.raises(ReconciliationError, match=r"no steady stretch"):
        estimate_sigma(np.empty((0, 2)), np.zeros(0, bool), method=method)
