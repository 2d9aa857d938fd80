"""Bilinear CSTR reconciliation against scipy SLSQP (+ KKT polish) and cvxpy."""

import numpy as np
import pytest
from scipy import optimize

from kinetrace.reconcile import (CSTRBalances, ConvergenceError, ReconciliationError,
                                 UnobservableError, reconcile_cstr)

from .conftest import cvxpy_wls

# Invented demo chemistry: A + D -> B, B + D -> C (D in excess), extents [mol/s].
NU = np.array([[-1.0, 0.0], [1.0, -1.0], [0.0, 1.0], [-1.0, -1.0]])
C_IN = np.array([1000.0, 0.0, 0.0, 1500.0])
SIG_CIN = np.array([10.0, 5.0, 5.0, 15.0])
SIG_COUT = np.array([8.0, 8.0, 8.0, 8.0])
SIG_Q = 1e-5


def _synthetic(rng, T, q=1e-3, extents=(0.4, 0.2)):
    qi = q * (1 + 0.05 * rng.standard_normal(T))
    xi = np.array(extents) * (1 + 0.05 * rng.standard_normal((T, 2)))
    cout = (qi[:, None] * C_IN + xi @ NU.T) / qi[:, None]
    y = dict(q_in=qi + SIG_Q * rng.standard_normal(T), q_out=qi + SIG_Q * rng.standard_normal(T),
             c_in=C_IN + SIG_CIN * rng.standard_normal((T, 4)),
             c_out=cout + SIG_COUT * rng.standard_normal((T, 4)))
    return y, xi


def _run(y, **kw):
    return reconcile_cstr(y["q_in"], y["q_out"], y["c_in"], y["c_out"], NU, sigma_q_in=SIG_Q,
                          sigma_q_out=SIG_Q, sigma_c_in=SIG_CIN, sigma_c_out=SIG_COUT, **kw)


def _residual(w, xi):
    """Balances written out independently of the package: w = q_in, q_out, c_in(4), c_out(4)."""
    qi, qo, ci, co = w[0], w[1], w[2:6], w[6:10]
    return np.r_[qo * co - qi * ci - NU @ xi, qi - qo]


def _jac_w(w):
    """d residual / d w, written out by hand for the test (independent of the package)."""
    qi, qo, ci, co = w[0], w[1], w[2:6], w[6:10]
    J = np.zeros((5, 10))
    J[:4, 0], J[:4, 1] = -ci, co
    J[:4, 2:6], J[:4, 6:10] = -qi * np.eye(4), qo * np.eye(4)
    J[4, 0], J[4, 1] = 1.0, -1.0
    return J


JXI = -np.vstack([NU, np.zeros((1, 2))])


def _scipy_reference(yt, sig):
    """SLSQP on the standardised problem, then the KKT system polished by scipy.optimize.root."""
    def obj(u):
        return u[:10] @ u[:10]

    def cons(u):
        return _residual(yt + sig * u[:10], u[10:])

    sol = optimize.minimize(obj, np.zeros(12), jac=lambda u: np.r_[2 * u[:10], 0, 0],
                            constraints=[{"type": "eq", "fun": cons}], method="SLSQP",
                            options={"ftol": 1e-15, "maxiter": 1000})

    def cons_jac(u):
        return np.hstack([_jac_w(yt + sig * u[:10]) * sig, JXI])

    def kkt(v):
        u, lam = v[:12], v[12:]
        grad = np.r_[2 * u[:10], 0, 0] + cons_jac(u).T @ lam
        return np.r_[grad, cons(u)]

    Jc = cons_jac(sol.x)
    lam0 = np.linalg.lstsq(Jc.T, -np.r_[2 * sol.x[:10], 0, 0], rcond=None)[0]
    pol = optimize.root(kkt, np.r_[sol.x, lam0], method="hybr", options={"xtol": 1e-14})
    return sol, pol.x[:12]


def test_against_scipy_slsqp_polished(rng):
    y, _ = _synthetic(rng, 6)
    r = _run(y)
    assert r.converged.all() and (r.dof == 3).all()
    sig = np.r_[SIG_Q, SIG_Q, SIG_CIN, SIG_COUT]
    for t in range(6):
        yt = np.r_[y["q_in"][t], y["q_out"][t], y["c_in"][t], y["c_out"][t]]
        sol, u = _scipy_reference(yt, sig)
        mine = (r.x[t, :10] - yt) / sig
        # SLSQP alone agrees to its own accuracy (~1e-6 sd); the KKT root to 1e-8 sd.
        assert np.max(np.abs(mine - sol.x[:10])) < 1e-5
        assert np.max(np.abs(mine - u[:10])) < 1e-8
        assert np.max(np.abs(r.extent[t] - u[10:]) / r.extent_sd[t]) < 1e-8
        assert r.objective[t] == pytest.approx(sol.fun, rel=1e-7)


def test_fixed_point_is_the_cvxpy_solution_of_its_linearisation(rng):
    y, _ = _synthetic(rng, 3)
    r = _run(y)
    sig = np.r_[SIG_Q, SIG_Q, SIG_CIN, SIG_COUT]
    for t in range(3):
        w, xi = r.x[t, :10], r.extent[t]
        Jw, Jxi = _jac_w(w), JXI
        b = Jw @ w + Jxi @ xi - _residual(w, xi)
        yt = np.r_[y["q_in"][t], y["q_out"][t], y["c_in"][t], y["c_out"][t]]
        xr, zr, _ = cvxpy_wls(yt, sig, Jw, Jxi, b)
        assert np.max(np.abs(xr - w) / sig) < 1e-8
        assert np.max(np.abs(zr - xi) / r.extent_sd[t]) < 1e-8
        assert np.max(np.abs(_residual(w, xi))) < 1e-9 * np.abs(w[1] * w[6:]).max()


def test_constraints_hold_and_truth_recovered(rng):
    y, xi_true = _synthetic(rng, 500)
    r = _run(y)
    res = CSTRBalances(NU).residual(r.x, r.extent)
    scale = r.q_out[:, None] * np.abs(r.c_out).max(axis=1, keepdims=True)
    assert np.max(np.abs(res[:, :4]) / scale) < 1e-9
    assert np.max(np.abs(res[:, 4]) / r.q_in) < 1e-12
    # Monte Carlo check of the reported extent standard deviation (1 sd of the ratio ~ 3 %)
    zscore = (r.extent - xi_true) / r.extent_sd
    assert np.std(zscore, axis=0) == pytest.approx([1.0, 1.0], abs=0.12)


def test_missing_concentration_and_flow_steps(rng):
    y, _ = _synthetic(rng, 8)
    y["c_out"][3, 2] = np.nan   # product C analyser missing at one step
    y["q_out"][5] = np.nan      # outlet meter missing at another
    r = _run(y)
    assert r.converged.all()
    assert r.dof[3] == 2 and r.dof[5] == 2 and r.dof[0] == 3
    assert np.isfinite(r.c_out[3, 2]) and r.observable_x[3, 6 + 2]
    assert r.q_out[5] == pytest.approx(r.q_in[5], rel=1e-12)  # volume balance
    res = CSTRBalances(NU).residual(r.x, r.extent)
    assert np.max(np.abs(res[:, :4])) < 1e-9


def test_unobservable_extents_raise():
    # Only the feed is analysed: the outlet composition never measured -> extents free.
    T = 3
    with pytest.raises(UnobservableError, match=r"extent\[R0\], extent\[R1\]"):
        reconcile_cstr(np.ones(T) * 1e-3, np.ones(T) * 1e-3, np.tile(C_IN, (T, 1)),
                       np.full((T, 4), np.nan), NU, sigma_q_in=SIG_Q, sigma_q_out=SIG_Q,
                       sigma_c_in=SIG_CIN, sigma_c_out=SIG_COUT)


def test_nonconvergence_flag_and_raise(rng):
    y, _ = _synthetic(rng, 4)
    r = _run(y, max_iter=1)
    assert not r.converged.any() and (r.iterations == 1).all()
    with pytest.raises(ConvergenceError, match="did not converge within 1 iterations at 4 of 4"):
        _run(y, max_iter=1, nonconvergence="raise")


def test_element_balances_only_and_bad_stoichiometry():
    # Element matrix of the invented chemistry: atoms a (in A, B, C) and d (in D, B, 2 in C)
    E = np.array([[1.0, 1.0, 1.0, 0.0], [0.0, 1.0, 2.0, 1.0]])
    assert np.allclose(E @ NU, 0)  # sanity of the invented chemistry
    m = CSTRBalances(None, E)
    assert m.constraint_names == ("element[0]", "element[1]", "volume")
    with pytest.raises(ReconciliationError, match="does not balance"):
        CSTRBalances(NU, np.array([[1.0, 1.0, 0.0, 0.0]]))
    rng = np.random.default_rng(3)
    y, _ = _synthetic(rng, 5)
    r = reconcile_cstr(y["q_in"], y["q_out"], y["c_in"], y["c_out"], None, element_matrix=E,
                       sigma_q_in=SIG_Q, sigma_q_out=SIG_Q, sigma_c_in=SIG_CIN, sigma_c_out=SIG_COUT)
    # the element balances follow from the component balances (E nu = 0): same reconciliation
    r2 = _run(y)
    np.testing.assert_allclose(r.x, r2.x, rtol=1e-9)
    assert r.z.shape == (5, 0)


def test_level_change_and_accumulation_terms(rng):
    # Consistent data with a falling level (dV/dt < 0) and a known hold-up term: unchanged.
    T = 4
    qi = np.full(T, 1e-3)
    dvdt = np.full(T, -2e-5)
    qo = qi - dvdt
    xi = np.array([0.4, 0.2])
    acc = np.tile([1e-3, -2e-3, 5e-4, 0.0], (T, 1))  # V dC/dt [mol/s], invented
    cout = (qi[:, None] * C_IN + xi @ NU.T - acc) / qo[:, None]
    r = reconcile_cstr(qi, qo, np.tile(C_IN, (T, 1)), cout, NU, sigma_q_in=SIG_Q, sigma_q_out=SIG_Q,
                       sigma_c_in=SIG_CIN, sigma_c_out=SIG_COUT, dvdt=dvdt, sigma_dvdt=1e-6,
                       accumulation=acc, cov="full")
    np.testing.assert_allclose(r.extent, np.tile(xi, (T, 1)), rtol=1e-10)
    np.testing.assert_allclose(r.dvdt, dvdt, rtol=1e-10)
    np.testing.assert_allclose(np.diagonal(r.cov_x, axis1=1, axis2=2), r.var_x, atol=1e-20)
    assert r.redundant[0, -1]  # the level signal is checked by the volume balance


def test_extents_unobservable_at_one_step_only(rng):
    # Outlet analysers of A, B and C all missing at step 2: the extents cannot be found
    # there (flagged, NaN), elsewhere they can; no exception since the sensors exist.
    y, _ = _synthetic(rng, 5)
    y["c_out"][2, :3] = np.nan
    r = _run(y)
    assert not r.observable_z[2].any() and np.isnan(r.extent[2]).all()
    assert r.observable_z[[0, 1, 3, 4]].all() and np.isfinite(r.extent[[0, 1, 3, 4]]).all()
    assert r.missing_counts == {"c_out[S0]": 1, "c_out[S1]": 1, "c_out[S2]": 1}
    with pytest.raises(ReconciliationError, match="no time steps"):
        reconcile_cstr(np.zeros(0), np.zeros(0), np.zeros((0, 4)), np.zeros((0, 4)), NU,
                       sigma_q_in=SIG_Q, sigma_q_out=SIG_Q, sigma_c_in=SIG_CIN, sigma_c_out=SIG_COUT)


# ----- compiled kernel (steps with nothing missing) against the numpy path -----
# The numpy path (taken for cov="full", and for steps with a missing value) is the one checked
# against SLSQP and cvxpy above; the compiled kernel must give the same numbers. Same method,
# two implementations, so the tolerances are round-off (the kernel stops iterating one pass
# earlier: at most tol = 1e-10 sd apart).
def _same(a, b):
    sd = np.max(b.sigma, axis=0)  # per variable: round-off is judged against its sigma
    big = np.max(b.imbalance_scale, axis=0) + 1e-300
    atol = {"x": 1e-8 * sd, "adjustment": 1e-8 * sd, "var_x": 1e-8 * sd ** 2,
            "var_adjustment": 1e-8 * sd ** 2, "objective": 1e-10, "imbalance": 1e-10 * big, "imbalance_scale": 1e-10 * big}
    for f in ("x", "var_x", "adjustment", "var_adjustment", "z", "var_z", "objective", "imbalance",
              "imbalance_sd", "imbalance_scale"):
        A, B = getattr(a, f), getattr(b, f)
        np.testing.assert_array_equal(np.isnan(A), np.isnan(B), err_msg=f)
        tol = atol.get(f, 1e-10 * np.nanmax(np.abs(B), axis=0, initial=0.0))
        excess = np.abs(np.nan_to_num(A) - np.nan_to_num(B)) - (tol + 1e-8 * np.abs(np.nan_to_num(B)))
        assert np.all(excess <= 0), (f, np.unravel_index(np.argmax(excess), excess.shape))
    for f in ("redundant", "observable_x", "observable_z", "dof", "converged", "measured"):
        np.testing.assert_array_equal(getattr(a, f), getattr(b, f), err_msg=f)


@pytest.mark.parametrize("case", ["plain", "fixed_and_level", "elements", "mixed_missing"])
def test_compiled_kernel_matches_numpy_path(rng, case):
    T = 3000  # more than one block of the parallel loop
    y, _ = _synthetic(rng, T)
    kw = dict(sigma_q_in=SIG_Q, sigma_q_out=SIG_Q, sigma_c_in=SIG_CIN, sigma_c_out=SIG_COUT)
    nu, E = NU, None
    if case == "fixed_and_level":  # products known absent from the feed; level signal and hold-up
        kw.update(sigma_c_in=np.array([10.0, 0.0, 0.0, 15.0]), dvdt=1e-6 * rng.standard_normal(T),
                  sigma_dvdt=1e-6, accumulation=1e-3 * rng.standard_normal((T, 4)))
        y["c_in"][:, 1:3] = 0.0
    elif case == "elements":
        nu, E = None, np.array([[1.0, 1.0, 1.0, 0.0], [0.0, 1.0, 2.0, 1.0]])
    elif case == "mixed_missing":  # some steps go to the numpy path inside the same call
        y["c_out"][::7, 1] = np.nan
        y["q_out"][::11] = np.nan
    args = (y["q_in"], y["q_out"], y["c_in"], y["c_out"], nu)
    fast = reconcile_cstr(*args, element_matrix=E, **kw)
    ref = reconcile_cstr(*args, element_matrix=E, cov="full", **kw)
    _same(fast, ref)
    assert fast.converged.all()


def test_rank_deficient_steps_fall_back_to_the_numpy_path():
    # Every variable known exactly at step 1 (sigma 0 on all): the reduced system is empty of
    # information there; the kernel hands the step over and the pseudo-inverse path gives dof 0.
    T = 3
    qi = np.full(T, 1e-3)
    xi = np.array([0.4, 0.2])
    cout = np.tile(C_IN + xi @ NU.T / 1e-3, (T, 1))
    sq = np.array([SIG_Q, 0.0, SIG_Q])
    sc = np.where(np.arange(T)[:, None] == 1, 0.0, np.tile(SIG_COUT, (T, 1)))
    sci = np.where(np.arange(T)[:, None] == 1, 0.0, np.tile(SIG_CIN, (T, 1)))
    r = reconcile_cstr(qi, qi, np.tile(C_IN, (T, 1)), cout, NU, sigma_q_in=sq, sigma_q_out=sq,
                       sigma_c_in=sci, sigma_c_out=sc)
    ref = reconcile_cstr(qi, qi, np.tile(C_IN, (T, 1)), cout, NU, sigma_q_in=sq, sigma_q_out=sq,
                         sigma_c_in=sci, sigma_c_out=sc, cov="full")
    assert r.dof.tolist() == [3, 0, 3] == ref.dof.tolist()
    np.testing.assert_allclose(r.extent, np.tile(xi, (T, 1)), rtol=1e-10)
    _same(r, ref)
