"""Property-based checks (hypothesis) of the linear and bilinear reconciliation."""

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from kinetrace.reconcile import CSTRBalances, reconcile_cstr, reconcile_linear

from .test_cstr import NU

seeds = st.integers(0, 2**31 - 1)


def _network(seed):
    g = np.random.default_rng(seed)
    m, n = int(g.integers(1, 5)), int(g.integers(5, 10))
    nz = int(g.integers(0, 3))
    A, Az = g.normal(size=(m + nz, n)), g.normal(size=(m + nz, nz))
    sigma = g.uniform(0.05, 3.0, n)
    y = g.normal(size=(4, n)) * 5
    return A, Az, sigma, y, g


@settings(max_examples=40, deadline=None)
@given(seeds)
def test_constraints_satisfied(seed):
    A, Az, sigma, y, _ = _network(seed)
    r = reconcile_linear(y, sigma, A, Az)
    z = np.where(r.observable_z, r.z, 0.0)
    # constraints hold to 1e-9 relative to the size of the terms (common practice, no source)
    lhs = r.x @ A.T + z @ Az.T
    scale = np.abs(r.x) @ np.abs(A).T + np.abs(z) @ np.abs(Az).T + 1.0
    if r.observable_z.all():
        assert np.all(np.abs(lhs) <= 1e-9 * scale)
    assert np.all(r.objective >= -1e-12)


@settings(max_examples=40, deadline=None)
@given(seeds)
def test_consistent_data_unchanged(seed):
    A, Az, sigma, _, g = _network(seed)
    # a consistent point: x in the null space of [A Az]
    ns = np.linalg.svd(np.hstack([A, Az]))[2][np.linalg.matrix_rank(np.hstack([A, Az])):]
    v = g.normal(size=ns.shape[0]) @ ns * 10
    x0, z0 = v[:A.shape[1]], v[A.shape[1]:]
    r = reconcile_linear(x0, sigma, A, Az)
    np.testing.assert_allclose(r.x[0], x0, atol=1e-9 * (1 + np.abs(x0).max()))
    ok = r.observable_z[0]
    np.testing.assert_allclose(r.z[0, ok], z0[ok], atol=1e-8 * (1 + np.abs(z0).max(initial=0.0)))


@settings(max_examples=30, deadline=None)
@given(seeds, st.floats(1e-4, 1e4))
def test_invariant_to_order_and_units(seed, unit):
    A, Az, sigma, y, g = _network(seed)
    r = reconcile_linear(y, sigma, A, Az)
    perm = g.permutation(A.shape[1])
    rp = reconcile_linear(y[:, perm], sigma[perm], A[:, perm], Az)
    np.testing.assert_allclose(rp.x, r.x[:, perm], rtol=1e-9, atol=1e-9)
    # variable 0 expressed in another unit: y' = unit * y, sigma' = unit * sigma, A' = A / unit
    s = np.ones(A.shape[1])
    s[0] = unit
    ru = reconcile_linear(y * s, sigma * s, A / s, Az)
    np.testing.assert_allclose(ru.x / s, r.x, rtol=1e-8, atol=1e-9)
    np.testing.assert_allclose(ru.objective, r.objective, rtol=1e-8, atol=1e-10)
    # constraint rows scaled: nothing changes
    rr = reconcile_linear(y, sigma, A * 1e3, Az * 1e3)
    np.testing.assert_allclose(rr.x, r.x, rtol=1e-9, atol=1e-9)


@settings(max_examples=15, deadline=None)
@given(seeds, st.floats(1e-3, 1e3))
def test_bilinear_constraints_and_unit_invariance(seed, unit):
    g = np.random.default_rng(seed)
    T = 5
    qi = 1e-3 * (1 + 0.1 * g.random(T))
    cin = np.array([1000.0, 0.0, 0.0, 1500.0])
    xi = np.array([0.4, 0.2]) * (1 + 0.1 * g.random((T, 2)))
    cout = cin + xi @ NU.T / qi[:, None]
    s_c = np.array([10.0, 5.0, 5.0, 15.0])
    kw = dict(sigma_q_in=1e-5, sigma_q_out=1e-5, sigma_c_in=s_c, sigma_c_out=8.0)
    yi, yo = qi + 1e-5 * g.standard_normal(T), qi + 1e-5 * g.standard_normal(T)
    ci, co = cin + s_c * g.standard_normal((T, 4)), cout + 8 * g.standard_normal((T, 4))
    r = reconcile_cstr(yi, yo, ci, co, NU, **kw)
    res = CSTRBalances(NU).residual(r.x, r.extent)
    assert np.max(np.abs(res[:, :4])) <= 1e-9 * np.max(np.abs(r.q_out[:, None] * r.c_out))
    assert np.max(np.abs(res[:, 4])) <= 1e-9 * r.q_in.max()
    # concentrations in another unit (e.g. mol/L vs mol/m^3): extents scale, x scales
    ru = reconcile_cstr(yi, yo, ci * unit, co * unit, NU, sigma_q_in=1e-5, sigma_q_out=1e-5,
                        sigma_c_in=s_c * unit, sigma_c_out=8.0 * unit)
    np.testing.assert_allclose(ru.c_out / unit, r.c_out, rtol=1e-9)
    np.testing.assert_allclose(ru.extent / unit, r.extent, rtol=1e-8)
    np.testing.assert_allclose(ru.objective, r.objective, rtol=1e-6, atol=1e-9)
    # consistent (noise-free) data are left unchanged
    r0 = reconcile_cstr(qi, qi, np.tile(cin, (T, 1)), cout, NU, **kw)
    np.testing.assert_allclose(r0.c_out, cout, rtol=1e-10, atol=1e-9)
    np.testing.assert_allclose(r0.extent, xi, rtol=1e-10)
