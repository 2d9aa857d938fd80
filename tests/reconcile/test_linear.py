"""Linear WLS reconciliation: published examples and cvxpy as independent reference."""

import numpy as np
import pandas as pd
import pytest

from kinetrace.errors import KinetraceError
from kinetrace.reconcile import (ReconciliationError, UnobservableError, classify_variables,
                                 reconcile_linear)

from .conftest import NJ_A, NJ_Y, YANG_A, YANG_SIGMA, YANG_X, cvxpy_wls


def test_narasimhan_jordache_ch1_heat_exchanger():
    r = reconcile_linear(NJ_Y, 1.0, NJ_A)
    # Narasimhan & Jordache (2000) Ch. 1, reconciled flows printed to 2 decimals
    # [memory, recomputed] (REFERENCES.md); tolerance = half a unit in the last printed place.
    expected = [100.22, 64.50, 35.72, 64.50, 35.72, 100.22]
    assert r.x[0] == pytest.approx(expected, abs=0.005)
    # gamma = 6.41 at sigma = 1 [computed] (REFERENCES.md), printed to 2 decimals
    assert r.objective[0] == pytest.approx(6.41, abs=0.005)
    assert r.dof[0] == 4
    assert np.all(r.redundant)


def test_kuehn_davidson_closed_form_against_cvxpy(rng):
    # cvxpy (Clarabel) solving the same problem is the independent reference.
    for _ in range(5):
        m, n = rng.integers(2, 5), rng.integers(6, 10)
        A = rng.normal(size=(m, n))
        sigma = rng.uniform(0.1, 2.0, n)
        y = rng.normal(size=n) * 10
        r = reconcile_linear(y, sigma, A)
        xr, _, obj = cvxpy_wls(y, sigma, A)
        assert np.max(np.abs(r.x[0] - xr) / sigma) < 1e-8
        assert r.objective[0] == pytest.approx(obj, rel=1e-8)


def test_projection_with_unmeasured_against_cvxpy(rng):
    # Crowe et al. (1983) projection; reference: cvxpy on the full problem with z free.
    for _ in range(5):
        m, n, nz = 5, 9, 2
        A, Az = rng.normal(size=(m, n)), rng.normal(size=(m, nz))
        sigma = rng.uniform(0.1, 2.0, n)
        y = rng.normal(size=n) * 10
        b = rng.normal(size=m)
        r = reconcile_linear(y, sigma, A, Az, b)
        xr, zr, obj = cvxpy_wls(y, sigma, A, Az, b)
        assert np.max(np.abs(r.x[0] - xr) / sigma) < 1e-8
        assert np.max(np.abs(r.z[0] - zr)) < 1e-8 * max(1.0, np.abs(zr).max())
        assert r.objective[0] == pytest.approx(obj, rel=1e-8, abs=1e-10)
        assert np.all(r.observable_z)


def test_batched_equals_one_step_at_a_time(rng):
    T = 50
    y = YANG_X + YANG_SIGMA * rng.standard_normal((T, 8))
    batch = reconcile_linear(y, YANG_SIGMA, YANG_A, cov="full")
    for t in (0, 17, 49):
        single = reconcile_linear(y[t], YANG_SIGMA, YANG_A, cov="full")
        np.testing.assert_allclose(batch.x[t], single.x[0], rtol=1e-12)
        np.testing.assert_allclose(batch.cov_x[t], single.cov_x[0], atol=1e-12)
    # Kuehn & Davidson (1961): Cov(x) = W V W', W = I - V A'(A V A')^-1 A
    V = np.diag(YANG_SIGMA**2)
    W = np.eye(8) - V @ YANG_A.T @ np.linalg.solve(YANG_A @ V @ YANG_A.T, YANG_A)
    np.testing.assert_allclose(batch.cov_x[0], W @ V @ W.T, atol=1e-12)
    np.testing.assert_allclose(batch.var_x, np.diagonal(batch.cov_x, axis1=1, axis2=2), atol=1e-12)


def test_yang_true_flows_are_consistent_and_unchanged():
    # Yang, Ten & Jao (1995) true flows satisfy the balances [found]: no adjustment.
    r = reconcile_linear(YANG_X, YANG_SIGMA, YANG_A)
    np.testing.assert_allclose(r.x[0], YANG_X, atol=1e-10)
    assert r.objective[0] == pytest.approx(0.0, abs=1e-20)


def test_missing_values_become_unmeasured_at_that_step(rng):
    y = YANG_X + YANG_SIGMA * rng.standard_normal((6, 8))
    y[2, 3] = np.nan
    y[4, [1, 6]] = np.nan
    r = reconcile_linear(y, YANG_SIGMA, YANG_A)
    # reference: the same step with the variable moved to A_z explicitly, via cvxpy
    keep = [j for j in range(8) if j != 3]
    xr, zr, obj = cvxpy_wls(y[2, keep], YANG_SIGMA[keep], YANG_A[:, keep], YANG_A[:, [3]])
    np.testing.assert_allclose(r.x[2, keep], xr, atol=1e-8)
    assert r.x[2, 3] == pytest.approx(zr[0], abs=1e-8)
    assert not r.measured[2, 3] and np.isnan(r.adjustment[2, 3])
    assert r.dof.tolist() == [4, 4, 3, 4, 2, 4]
    assert r.missing_counts == {"x[1]": 1, "x[3]": 1, "x[6]": 1}
    assert np.all(r.observable_x)
    # other steps are unaffected by the missing values elsewhere
    np.testing.assert_allclose(r.x[0], reconcile_linear(y[0], YANG_SIGMA, YANG_A).x[0], rtol=1e-12)


def test_fixed_value_sigma_zero_is_not_adjusted():
    r = reconcile_linear([10.0, 6.0, 3.0], [1.0, 0.0, 1.0], [[1.0, -1.0, -1.0]])
    # common practice, no source: a value known exactly is moved to the right-hand side
    assert r.x[0].tolist() == pytest.approx([9.5, 6.0, 3.5], abs=1e-12)
    assert r.var_adjustment[0, 1] == 0.0


def test_classification_crowe_zero_columns():
    # Crowe et al. (1983): a zero column of P A_y marks a non-redundant measurement.
    # Network: node1 F1 - F2 - F3 = 0, node2 F3 - F4 = 0, F2 unmeasured.
    A_y = np.array([[1.0, -1.0, 0.0], [0.0, 1.0, -1.0]])  # columns F1, F3, F4
    A_z = np.array([[-1.0], [0.0]])  # F2
    c = classify_variables(A_y, A_z, ["F1", "F3", "F4"], ["F2"])
    assert c.redundant.tolist() == [False, True, True]
    assert c.nonredundant_names == ["F1"]
    assert c.observable.tolist() == [True] and c.dof == 1
    # two unmeasured streams in parallel between the same nodes: unobservable
    c2 = classify_variables(np.array([[1.0], [-1.0]]), np.array([[-1.0, -1.0], [1.0, 1.0]]),
                            ["F1"], ["F2", "F3"])
    assert c2.unobservable_names == ["F2", "F3"]
    with pytest.raises(UnobservableError, match="F2, F3"):
        c2.require_observable()
    r = reconcile_linear([5.0], 1.0, [[1.0], [-1.0]], [[-1.0, -1.0], [1.0, 1.0]])
    assert np.all(np.isnan(r.z)) and not r.observable_z.any()


def test_input_types_and_errors():
    base = reconcile_linear(NJ_Y, 1.0, NJ_A).x
    for y in (list(NJ_Y), pd.Series(NJ_Y), NJ_Y[None, :], pd.DataFrame([NJ_Y])):
        np.testing.assert_allclose(reconcile_linear(y, 1.0, NJ_A).x, base)
    with pytest.raises(ReconciliationError, match=r"sigma of 'x\[2\]' at step 0"):
        reconcile_linear(NJ_Y, [1, 1, -1, 1, 1, 1], NJ_A)
    with pytest.raises(ReconciliationError, match="6 variables but A_y has 5 columns"):
        reconcile_linear(NJ_Y, 1.0, NJ_A[:, :5])
    with pytest.raises(ReconciliationError, match="infinite"):
        reconcile_linear(np.r_[NJ_Y[:5], np.inf], 1.0, NJ_A)
    with pytest.raises(ValueError, match="allowed: diag, full"):
        reconcile_linear(NJ_Y, 1.0, NJ_A, cov="dense")
    assert issubclass(ReconciliationError, KinetraceError)


def test_closure_of_raw_data():
    r = reconcile_linear(NJ_Y, 1.0, NJ_A)
    # imbalance at the raw data is A y (no unmeasured); its sd is sqrt(diag(A V A'))
    np.testing.assert_allclose(r.imbalance[0], NJ_A @ NJ_Y, atol=1e-12)
    np.testing.assert_allclose(r.imbalance_sd[0], np.sqrt(np.diag(NJ_A @ NJ_A.T)), atol=1e-12)
    assert r.relative_imbalance[0, 0] == pytest.approx((101.91 - 64.45 - 34.65) / 100.22, rel=1e-3)


def test_dependent_constraints_give_the_same_answer():
    # A redundant balance (sum of the node balances) adds no information: same x, same dof
    # (common practice, no source); exercises the pseudo-inverse path for singular A V A'.
    A2 = np.vstack([NJ_A, NJ_A.sum(axis=0)])
    r1, r2 = reconcile_linear(NJ_Y, 1.0, NJ_A), reconcile_linear(NJ_Y, 1.0, A2)
    np.testing.assert_allclose(r2.x, r1.x, atol=1e-9)
    assert r2.dof[0] == 4
    assert r2.objective[0] == pytest.approx(r1.objective[0], rel=1e-9)


def test_full_covariance_with_missing_values(rng):
    y = YANG_X + YANG_SIGMA * rng.standard_normal((3, 8))
    y[1, 2] = np.nan
    r = reconcile_linear(y, YANG_SIGMA, YANG_A, cov="full")
    np.testing.assert_allclose(np.diagonal(r.cov_x, axis1=1, axis2=2), r.var_x, atol=1e-12)
    # reference at the step with the missing value: Monte Carlo-free linear propagation, the
    # estimates are linear in the 7 measurements: x_hat = L y, Cov = L V L' (numerical L)
    keep = [j for j in range(8) if j != 2]
    V = np.diag(YANG_SIGMA[keep] ** 2)
    Lmat = np.empty((8, 7))
    for i in range(7):
        e = np.zeros(8)
        e[keep[i]] = 1.0
        e[2] = np.nan
        base = np.where(np.isnan(e), np.nan, 0.0)
        Lmat[:, i] = reconcile_linear(e, YANG_SIGMA, YANG_A).x[0] - reconcile_linear(base, YANG_SIGMA, YANG_A).x[0]
    np.testing.assert_allclose(r.cov_x[1], Lmat @ V @ Lmat.T, atol=1e-10)


def test_per_step_right_hand_side(rng):
    # b given per step (T, m) equals solving each step with its own b (Kuehn & Davidson 1961)
    b = rng.normal(size=(4, 4))
    y = YANG_X + YANG_SIGMA * rng.standard_normal((4, 8))
    r = reconcile_linear(y, YANG_SIGMA, YANG_A, b=b)
    for t in range(4):
        xr, _, _ = cvxpy_wls(y[t], YANG_SIGMA, YANG_A, None, b[t])
        assert np.max(np.abs(r.x[t] - xr) / YANG_SIGMA) < 1e-8


def test_closure_table_flags_a_leak():
    from kinetrace.reconcile import closure_table

    y = np.vstack([NJ_Y, NJ_Y])
    y[1, 5] -= 10.0  # 10 units lost at the mixer (balance 4) at step 1
    r = reconcile_linear(y, 1.0, NJ_A, constraint_names=["split", "exch", "bypass", "mix"])
    tab = closure_table(r, index=["t0", "t1"])
    assert len(tab) == 8 and set(tab.columns) >= {"imbalance", "sd", "standardized", "flagged"}
    # raw imbalance of the mixer: F4 + F5 - F6 (common practice, no source)
    row = tab[(tab.step == "t1") & (tab.balance == "mix")].iloc[0]
    assert row.imbalance == pytest.approx(64.20 + 36.44 - 88.88, abs=1e-9)
    assert row.sd == pytest.approx(np.sqrt(3.0), rel=1e-12)
    assert row.flagged and not tab[tab.step == "t0"].flagged.any()
