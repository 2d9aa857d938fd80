"""Correlated measurement errors: full covariance matrices and named correlations.

References: cvxpy (Clarabel) solving the same quadratic programme with the full inverse
covariance; the closed form of Kuehn & Davidson (1961), x = y - V A' (A V A')^-1 A y,
Cov(x) = W V W' with W = I - V A' (A V A')^-1 A; the measurement test of Mah & Tamhane
(1982) with Cov(a) = V A' (A V A')^-1 A V; scipy SLSQP for the bilinear CSTR.
"""

import cvxpy as cp
import numpy as np
import pytest
from scipy import optimize, stats

from kinetrace.reconcile import (ReconciliationError, correlation_matrix, global_test, measurement_test,
                                 reconcile_cstr, reconcile_linear, split_covariance)

from .conftest import NJ_A, NJ_Y


def _random_spd(rng, n, scale):
    """A random covariance with strong correlations (condition number ~ 10-100)."""
    Q, _ = np.linalg.qr(rng.normal(size=(n, n)))
    w = rng.uniform(0.05, 1.0, n)
    V = (Q * w) @ Q.T
    d = np.sqrt(np.diag(V))
    return V / np.outer(d, d) * np.outer(scale, scale)


def cvxpy_gls(y, V, A_y, A_z=None, b=None):
    """Reference: min (y - x)' V^-1 (y - x) s.t. A_y x + A_z z = b, by cvxpy/Clarabel."""
    n = len(y)
    x = cp.Variable(n)
    expr = A_y @ x
    z = None
    if A_z is not None:
        z = cp.Variable(A_z.shape[1])
        expr = expr + A_z @ z
    Li = np.linalg.inv(np.linalg.cholesky(V))  # V^-1 = Li' Li
    rhs = np.zeros(A_y.shape[0]) if b is None else b
    prob = cp.Problem(cp.Minimize(cp.sum_squares(Li @ (x - y))), [expr == rhs])
    prob.solve(solver=cp.CLARABEL, tol_gap_abs=1e-14, tol_gap_rel=1e-14, tol_feas=1e-14,
               tol_ktratio=1e-12, max_iter=200)
    return x.value, (None if z is None else z.value), prob.value


def kuehn_davidson(y, V, A):
    """Kuehn & Davidson (1961) closed form with a full V, written out independently."""
    S = A @ V @ A.T
    K = V @ A.T @ np.linalg.inv(S)
    x = y - K @ (A @ y)
    W = np.eye(len(y)) - K @ A
    cov_a = K @ A @ V
    return x, W @ V @ W.T, cov_a, float((A @ y) @ np.linalg.solve(S, A @ y))


def test_full_covariance_against_cvxpy(rng):
    for _ in range(5):
        m, n = int(rng.integers(2, 5)), int(rng.integers(6, 10))
        A = rng.normal(size=(m, n))
        sig = rng.uniform(0.2, 2.0, n)
        V = _random_spd(rng, n, sig)
        assert np.max(np.abs(V - np.diag(np.diag(V)))) > 0.1 * sig.min() ** 2  # really non-diagonal
        y = rng.normal(size=n) * 10
        r = reconcile_linear(y, None, A, covariance=V)
        xr, _, obj = cvxpy_gls(y, V, A)
        assert np.max(np.abs(r.x[0] - xr) / sig) < 1e-7
        assert r.objective[0] == pytest.approx(obj, rel=1e-7)
        # and it differs from the uncorrelated answer (the covariance is really used)
        r0 = reconcile_linear(y, sig, A)
        assert np.max(np.abs(r0.x[0] - xr) / sig) > 1e-3


def test_correlation_with_unmeasured_and_rhs_against_cvxpy(rng):
    m, n, nz = 5, 9, 2
    for _ in range(3):
        A, Az, b = rng.normal(size=(m, n)), rng.normal(size=(m, nz)), rng.normal(size=m)
        sig = rng.uniform(0.1, 2.0, n)
        V = _random_spd(rng, n, sig)
        y = rng.normal(size=n) * 10
        s, R = split_covariance(V, [f"t{j}" for j in range(n)])
        r = reconcile_linear(y, s, A, Az, b, correlation=R)
        xr, zr, obj = cvxpy_gls(y, V, A, Az, b)
        assert np.max(np.abs(r.x[0] - xr) / sig) < 1e-7
        assert np.max(np.abs(r.z[0] - zr)) < 1e-7 * max(1.0, np.abs(zr).max())
        assert r.objective[0] == pytest.approx(obj, rel=1e-7, abs=1e-9)


def test_kuehn_davidson_closed_form_full_V_and_tests(rng):
    n = 6
    sig = np.array([1.0, 0.8, 0.6, 0.8, 0.6, 1.0])
    V = _random_spd(rng, n, sig)
    y = NJ_Y
    r = reconcile_linear(y, None, NJ_A, covariance=V, cov="full")
    x, cov_x, cov_a, gamma = kuehn_davidson(y, V, NJ_A)
    assert r.x[0] == pytest.approx(x, abs=1e-9)
    assert r.cov_x[0] == pytest.approx(cov_x, abs=1e-9)
    assert r.var_x[0] == pytest.approx(np.diag(cov_x), abs=1e-9)
    assert r.var_adjustment[0] == pytest.approx(np.diag(cov_a), abs=1e-9)
    # global test: gamma = r' (A V A')^-1 r, chi-square with rank(A) = 4 dof (Reilly & Carpani 1963)
    g = global_test(r)
    assert g.statistic[0] == pytest.approx(gamma, rel=1e-9)
    assert g.p_value[0] == pytest.approx(stats.chi2.sf(gamma, 4), rel=1e-9)
    # measurement test with the full covariance: z_j = |a_j| / sqrt(Cov(a)_jj) (Mah & Tamhane 1982)
    mt = measurement_test(r)
    assert mt.z[0] == pytest.approx(np.abs(x - y) / np.sqrt(np.diag(cov_a)), rel=1e-8)
    zdiag = np.abs(reconcile_linear(y, sig, NJ_A).standardized_adjustment[0])
    assert np.max(np.abs(mt.z[0] - zdiag)) > 1e-3  # not the diagonal-covariance statistic


def test_named_correlation_batched_and_missing(rng):
    # Narasimhan & Jordache (2000) Ch. 1 flowsheet, F2 and F4 read by one transmitter pair
    names = [f"F{j}" for j in range(1, 7)]
    R = correlation_matrix(names, {("F2", "F4"): 0.7, ("F3", "F5"): -0.3})
    V = R.copy()  # sigma = 1
    T = 30
    y = NJ_Y + rng.normal(size=(T, 6))
    y[5, 2] = np.nan  # F3 missing at step 5: unmeasured there, correlations of the rest kept
    r = reconcile_linear(y, 1.0, NJ_A, names=names, correlation={("F2", "F4"): 0.7, ("F3", "F5"): -0.3})
    for t in (0, 11, 29):
        assert r.x[t] == pytest.approx(kuehn_davidson(y[t], V, NJ_A)[0], abs=1e-9)
    keep = [0, 1, 3, 4, 5]
    xr, zr, _ = cvxpy_gls(y[5, keep], V[np.ix_(keep, keep)], NJ_A[:, keep], NJ_A[:, [2]])
    assert r.x[5, keep] == pytest.approx(xr, abs=1e-7)
    assert r.x[5, 2] == pytest.approx(zr[0], abs=1e-7)
    assert r.missing_counts == {"F3": 1}


def test_blocks_of_steps_equal_one_block(rng, monkeypatch):
    from kinetrace.reconcile import _correlated

    names = [f"F{j}" for j in range(1, 7)]
    corr = {("F2", "F4"): 0.7, ("F3", "F5"): -0.3}
    y = NJ_Y + rng.normal(size=(50, 6))
    y[7, 1] = np.nan
    whole = reconcile_linear(y, 1.0, NJ_A, names=names, correlation=corr)
    monkeypatch.setattr(_correlated, "BLOCK", 8)
    blocks = reconcile_linear(y, 1.0, NJ_A, names=names, correlation=corr)
    for key in ("x", "var_x", "var_adjustment", "objective", "dof", "redundant"):
        assert np.allclose(getattr(blocks, key), getattr(whole, key), rtol=1e-12, atol=1e-12, equal_nan=True)


def test_correlated_cstr_against_slsqp():
    # A -> B, both outlet concentrations from one analyzer with correlated errors (invented R-7);
    # reference: scipy SLSQP on the nonlinear problem min (y-x)' V^-1 (y-x) s.t. the balances.
    y_q = np.array([1.00e-3, 1.02e-3])
    y_ci = np.array([1000.0, 0.0])
    y_co = np.array([400.0, 630.0])
    s = np.array([1e-5, 1e-5, 10.0, 10.0, 10.0])  # q_in, q_out, c_in[A], c_out[A], c_out[B]
    rho = 0.6
    r = reconcile_cstr([y_q[0]], [y_q[1]], [y_ci], [y_co], [[-1.0], [1.0]], sigma_q_in=s[0], sigma_q_out=s[1],
                       sigma_c_in=[s[2], 0.0], sigma_c_out=s[3:], species=["A", "B"],
                       correlation={("c_out[A]", "c_out[B]"): rho}, tol=1e-12)
    assert r.converged[0]
    ymeas = np.array([y_q[0], y_q[1], y_ci[0], y_co[0], y_co[1]])
    V = np.diag(s**2)
    V[3, 4] = V[4, 3] = rho * s[3] * s[4]
    Vi = np.linalg.inv(V)
    sc = s  # scaled variables for the optimiser

    def obj(u):
        d = u * sc - ymeas
        return d @ Vi @ d

    def cons(u):
        qi, qo, ca0, ca, cb = u * sc
        # volume: qi = qo; A: qo ca - qi ca0 + xi = 0; B: qo cb - xi = 0 -> eliminate xi
        return np.array([qi - qo, qo * ca - qi * ca0 + qo * cb])

    sol = optimize.minimize(obj, ymeas / sc, constraints={"type": "eq", "fun": cons}, method="SLSQP",
                            options={"ftol": 1e-14, "maxiter": 500})
    xs = sol.x * sc
    got = np.array([r.q_in[0], r.q_out[0], r.c_in[0, 0], r.c_out[0, 0], r.c_out[0, 1]])
    assert np.max(np.abs(got - xs) / s) < 1e-4
    assert r.objective[0] == pytest.approx(sol.fun, rel=1e-4)
    assert r.extent[0, 0] == pytest.approx(xs[1] * xs[4], rel=1e-6)
    # the uncorrelated answer differs
    r0 = reconcile_cstr([y_q[0]], [y_q[1]], [y_ci], [y_co], [[-1.0], [1.0]], sigma_q_in=s[0],
                        sigma_q_out=s[1], sigma_c_in=[s[2], 0.0], sigma_c_out=s[3:])
    assert abs(r0.c_out[0, 1] - r.c_out[0, 1]) > 0.1


def test_not_positive_definite_names_the_tags():
    names = ["FI-101", "FI-102", "FI-103", "TI-1"]
    # three correlations that cannot hold together: 0.9, 0.9 and -0.9
    bad = {("FI-101", "FI-102"): 0.9, ("FI-102", "FI-103"): 0.9, ("FI-101", "FI-103"): -0.9}
    with pytest.raises(ReconciliationError, match="not positive definite") as e:
        correlation_matrix(names, bad)
    msg = str(e.value)
    assert "'FI-101'" in msg and "'FI-102'" in msg and "'FI-103'" in msg and "TI-1" not in msg
    with pytest.raises(ReconciliationError, match="not positive definite"):
        reconcile_linear([1.0, 1.0, 1.0, 1.0], 1.0, [[1.0, -1.0, 0.0, 0.0]], names=names, correlation=bad)


def test_bad_matrices_are_refused_with_the_tags():
    names = ["a", "b", "c"]
    V = np.diag([1.0, 2.0, 3.0])
    V[0, 1] = 0.5
    with pytest.raises(ReconciliationError, match=r"not symmetric: \('a', 'b'\)"):
        split_covariance(V, names)
    V = np.diag([1.0, 0.0, 3.0])
    with pytest.raises(ReconciliationError, match="variance of 'b'"):
        split_covariance(V, names)
    with pytest.raises(ReconciliationError, match="correlation of 'a' and 'c' is 1"):
        correlation_matrix(names, [("a", "c", 1.0)])
    with pytest.raises(ReconciliationError, match="'d' is not one of the variables"):
        correlation_matrix(names, [("a", "d", 0.2)])
    with pytest.raises(ReconciliationError, match="diagonal entry of 'b'"):
        reconcile_linear([1.0, 1.0, 2.0], 1.0, [[1.0, 1.0, -1.0]], names=names,
                         correlation=[[1, 0, 0], [0, 2, 0], [0, 0, 1]])
    with pytest.raises(ReconciliationError, match="either covariance"):
        reconcile_linear([1.0, 1.0, 2.0], 1.0, [[1.0, 1.0, -1.0]], covariance=np.eye(3))
