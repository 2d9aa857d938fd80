"""Compiled per-step kernel of the bilinear CSTR reconciliation (successive linearisation).

The same method as :meth:`.cstr.CSTRBalances.reconcile` on its numpy path, for the steps
at which no variable is missing (every variable measured, or fixed with sigma = 0): the
unknowns are then the extents alone, whose constraint columns are constant, so the
projection ``P`` (``P A_xi = 0``, Crowe, Garcia Campos & Hrymak 1983) and the estimator of
the extents are computed once, and each step needs only its own Jacobian, a ``p x p``
Cholesky factorisation and a few small products per linearisation (Kuehn & Davidson 1961
closed form, Crowe 1986 successive linearisation). A fixed variable is carried with zero
variance, which leaves it unadjusted exactly as moving it to the right-hand side would.

Compiled with numba; steps are processed in blocks spread over the available cores
(``prange``), each block with its own small work arrays, and every result is written
straight into the caller's arrays: no temporaries the size of the data. A step whose
reduced constraint matrix is rank-deficient is marked ``ok = False`` and left to the numpy
path, which handles pseudo-inverses.

This module is private; the public entry point is :func:`.cstr.reconcile_cstr`.
"""

from __future__ import annotations

import math

import numba as nb
import numpy as np

from ._kernel import NULL_TOL, RANK_TOL

#: Floating-point freedoms given to the compiler: reassociation and fused multiply-add, but
#: never the assumption that no NaN or infinity occurs (NaN marks unobservable extents).
_FM = {"reassoc", "contract", "arcp", "nsz"}
#: Steps per block of the parallel loop (each block allocates its work arrays once).
BLOCK = 2048


@nb.njit(cache=True, nogil=True, fastmath=_FM, error_model="numpy", inline="always")
def _balance_rows(v, M, out):
    """Rows ``M (d/dv)(q_out c_out - q_in c_in)`` at ``v`` into ``out`` (rows of M, n); the
    species (or element) rows of the Jacobian for ``M = W``, their projection for ``M = P W``."""
    k_rows, ns = M.shape
    n = v.shape[0]
    qi, qo = v[0], v[1]
    for k in range(k_rows):
        s_in = 0.0
        s_out = 0.0
        for s in range(ns):
            s_in += M[k, s] * v[2 + s]
            s_out += M[k, s] * v[2 + ns + s]
            out[k, 2 + s] = -M[k, s] * qi
            out[k, 2 + ns + s] = M[k, s] * qo
        out[k, 0] = -s_in
        out[k, 1] = s_out
        out[k, n - 1] = 0.0


@nb.njit(cache=True, nogil=True, fastmath=_FM, error_model="numpy", inline="always")
def _linearise(v, acc, W, PW, Pvol, B, gb):
    """Reduced constraint matrix ``B = P J(v)`` (p, n) and ``gb = W (g(v) - acc)`` (ne,),
    ``g = q_out c_out - q_in c_in``, at the linearisation point ``v``."""
    ne, ns = W.shape
    n = v.shape[0]
    qi, qo = v[0], v[1]
    _balance_rows(v, PW, B)
    for k in range(PW.shape[0]):  # the volume row q_in - q_out - dV/dt, weighted by P
        B[k, 0] += Pvol[k]
        B[k, 1] -= Pvol[k]
        B[k, n - 1] = -Pvol[k]
    for e in range(ne):
        t = 0.0
        for s in range(ns):
            t += W[e, s] * (qo * v[2 + ns + s] - qi * v[2 + s] - acc[s])
        gb[e] = t


@nb.njit(cache=True, nogil=True, fastmath=_FM, error_model="numpy", inline="always")
def _cholesky(S, L):
    """Lower factor of the SPD ``S`` into ``L``; False if a pivot is not clearly positive
    (the same relative test as the numpy path)."""
    p = S.shape[0]
    for i in range(p):
        for j in range(p):
            L[i, j] = 0.0
    for i in range(p):
        d = S[i, i]
        for k in range(i):
            d -= L[i, k] * L[i, k]
        if not d > RANK_TOL * abs(S[i, i]):
            return False
        L[i, i] = math.sqrt(d)
        for j in range(i + 1, p):
            t = S[j, i]
            for k in range(i):
                t -= L[j, k] * L[i, k]
            L[j, i] = t / L[i, i]
    return True


@nb.njit(cache=True, nogil=True, fastmath=_FM, error_model="numpy", inline="always")
def _solve(L, r, w, lam):
    """Solve ``L L' lam = r``."""
    p = L.shape[0]
    for i in range(p):
        t = r[i]
        for k in range(i):
            t -= L[i, k] * w[k]
        w[i] = t / L[i, i]
    for i in range(p - 1, -1, -1):
        t = w[i]
        for k in range(i + 1, p):
            t -= L[k, i] * lam[k]
        lam[i] = t / L[i, i]


@nb.njit(cache=True, nogil=True, fastmath=_FM, error_model="numpy", inline="always")
def _solve_step(y, var, v, acc, W, PW, Pvol, Z, B, gb, S, L, r, w, lam, x, z):
    """One linearised solve at ``v``: reconciled ``x`` (n,) and extents ``z`` (nz,);
    False if the reduced system is rank-deficient. Leaves ``B, gb, S, L, r, lam`` set."""
    ne, ns = W.shape
    p, n = B.shape
    nz = Z.shape[0]
    _linearise(v, acc, W, PW, Pvol, B, gb)
    # r = B y - P b, with b = [W (g - acc); 0], so (P b)_k = sum_s PW[k, s] (g - acc)_s
    qi, qo = v[0], v[1]
    for k in range(p):
        t = 0.0
        for j in range(n):
            t += B[k, j] * y[j]
        for s in range(ns):
            t -= PW[k, s] * (qo * v[2 + ns + s] - qi * v[2 + s] - acc[s])
        r[k] = t
    for a in range(p):
        for c in range(a + 1):
            t = 0.0
            for j in range(n):
                t += B[a, j] * B[c, j] * var[j]
            S[a, c] = t
            S[c, a] = t
    if not _cholesky(S, L):
        return False
    _solve(L, r, w, lam)
    for j in range(n):
        t = 0.0
        for k in range(p):
            t += B[k, j] * lam[k]
        x[j] = y[j] - var[j] * t
    # z = Z (b - J x): species (or element) rows of J x, then the volume row
    for i in range(nz):
        z[i] = 0.0
    for e in range(ne):
        jx = 0.0
        for s in range(ns):
            jx += W[e, s] * (-v[2 + s] * x[0] + v[2 + ns + s] * x[1] - qi * x[2 + s] + qo * x[2 + ns + s])
        res = gb[e] - jx
        for i in range(nz):
            z[i] += Z[i, e] * res
    res = -(x[0] - x[1] - x[n - 1])
    for i in range(nz):
        z[i] += Z[i, ne] * res
    return True


@nb.njit(cache=True, nogil=True, fastmath=_FM, error_model="numpy", inline="always")
def _jacobian(v, W, J):
    """Full Jacobian of the balances at ``v`` into ``J`` (ne + 1, n)."""
    ne = W.shape[0]
    n = v.shape[0]
    _balance_rows(v, W, J)
    for j in range(n):
        J[ne, j] = 0.0
    J[ne, 0] = 1.0
    J[ne, 1] = -1.0
    J[ne, n - 1] = -1.0


@nb.njit(cache=True, nogil=True, fastmath=_FM, error_model="numpy", inline="always")
def _inverse_from_chol(L, Li, Sinv):
    """``(L L')^-1`` into ``Sinv``, through ``Li = L^-1``."""
    p = L.shape[0]
    for i in range(p):
        for j in range(p):
            Li[i, j] = 0.0
    for i in range(p):
        Li[i, i] = 1.0 / L[i, i]
        for j in range(i + 1, p):
            t = 0.0
            for k in range(i, j):
                t += L[j, k] * Li[k, i]
            Li[j, i] = -t / L[j, j]
    for a in range(p):
        for b in range(a + 1):
            t = 0.0
            for k in range(a, p):
                t += Li[k, a] * Li[k, b]
            Sinv[a, b] = t
            Sinv[b, a] = t


@nb.njit(cache=True, nogil=True, fastmath=_FM, error_model="numpy", inline="always")
def _matmul(A, B, out):
    """``out = A B`` for small dense matrices."""
    for i in range(A.shape[0]):
        for j in range(B.shape[1]):
            t = 0.0
            for k in range(A.shape[1]):
                t += A[i, k] * B[k, j]
            out[i, j] = t


@nb.njit(cache=True, nogil=True, fastmath=_FM, error_model="numpy", inline="always")
def _var_z(var, Z, J, B, Sinv, G, Kz, out):
    """Variances of the extents, diag(G V G' - Kz S^-1 Kz'), G = Z J, Kz = G V B'."""
    nz = Z.shape[0]
    p, n = B.shape
    _matmul(Z, J, G)
    for i in range(nz):
        for k in range(p):
            t = 0.0
            for j in range(n):
                t += G[i, j] * var[j] * B[k, j]
            Kz[i, k] = t
        t = 0.0
        for j in range(n):
            t += G[i, j] * G[i, j] * var[j]
        for a in range(p):
            for c in range(p):
                t -= Kz[i, a] * Sinv[a, c] * Kz[i, c]
        out[i] = t


@nb.njit(cache=True, nogil=True, fastmath=_FM, error_model="numpy", inline="always")
def _closure(t, yt, a, vt, W, Exi, obs, zn, J, B, Sinv, Mx, imbalance, imbalance_sd, imbalance_scale):
    """Closure of step ``t`` at the raw measurements ``yt`` with the estimated extents ``zn``:
    imbalance of each balance, its sd from the measurement variances ``vt`` (through the
    reduced system ``B``, ``Sinv``) and its throughput scale, into row ``t`` of the outputs."""
    ne, ns = W.shape
    m, n = J.shape
    p = B.shape[0]
    nz = zn.shape[0]
    for e in range(m):
        for k in range(p):
            u = 0.0
            for j in range(n):
                u += J[e, j] * vt[j] * B[k, j]
            Mx[k] = u
        u = 0.0
        for k in range(p):
            for c in range(p):
                u += Mx[k] * Sinv[k, c] * Mx[c]
        imbalance_sd[t, e] = math.sqrt(max(u, 0.0))
    qi, qo = yt[0], yt[1]
    for e in range(ne):
        g = 0.0
        sc = 0.0
        for s in range(ns):
            g += W[e, s] * (qo * yt[2 + ns + s] - qi * yt[2 + s] + a[s])
            sc += abs(W[e, s]) * (abs(qi * yt[2 + s]) + abs(qo * yt[2 + ns + s]))
        for i in range(nz):
            if obs[i]:
                g += Exi[e, i] * zn[i]
                sc += abs(Exi[e, i]) * abs(zn[i])
        imbalance[t, e] = g
        imbalance_scale[t, e] = 0.5 * sc
    imbalance[t, ne] = qi - qo - yt[n - 1]
    imbalance_scale[t, ne] = 0.5 * (abs(qi) + abs(qo) + abs(yt[n - 1]))


@nb.njit(cache=True, parallel=True, fastmath=_FM, error_model="numpy")
def cstr_kernel(y, sigma, acc, has_acc, W, PW, Pvol, Z, Exi, obs, max_iter, tol,
                x_out, adjustment, z_out, var_x, var_adj, var_z, redundant, objective, dof,
                imbalance, imbalance_sd, imbalance_scale, converged, iterations, ok):
    """Reconcile every step of ``y`` (T, n); see the module docstring.

    ``sigma`` (T, n) standard deviations (0 = fixed); ``acc`` (T, ns) hold-up terms (or (1, ns) zeros
    with ``has_acc`` False); ``W`` (ne, ns) balance rows; ``PW = P[:, :ne] W`` (p, ns) and
    ``Pvol = P[:, ne]`` (p,) from the projection ``P`` (p, ne + 1); ``Z`` (nz, ne + 1) the
    estimator of the extents; ``Exi`` (ne + 1, nz) their constraint columns; ``obs`` (nz,)
    which extents are observable. Results go into the ``*_out`` and statistics arrays
    (time first); ``ok[t]`` False leaves step ``t`` to the numpy path.
    """
    T, n = y.shape
    ne, ns = W.shape
    m = ne + 1
    p = PW.shape[0]
    nz = Z.shape[0]
    nblocks = (T + BLOCK - 1) // BLOCK
    for bi in nb.prange(nblocks):
        B = np.empty((p, n))
        J = np.empty((m, n))
        gb = np.empty(ne)
        S = np.empty((p, p))
        L = np.empty((p, p))
        Li = np.empty((p, p))
        Sinv = np.empty((p, p))
        r = np.empty(p)
        w = np.empty(p)
        lam = np.empty(p)
        v = np.empty(n)
        vp = np.empty(n)
        xn = np.empty(n)
        zn = np.empty(nz)
        xi = np.zeros(nz)
        sdz = np.empty(nz)
        vz = np.empty(nz)
        G = np.empty((nz, n))
        Kz = np.empty((nz, p))
        SB = np.empty((p, n))
        Mx = np.empty(p)
        vt = np.empty(n)
        for t in range(bi * BLOCK, min(T, (bi + 1) * BLOCK)):
            yt = y[t]
            for j in range(n):
                vt[j] = sigma[t, j] * sigma[t, j]
            a = acc[t] if has_acc else acc[0]
            for j in range(n):
                v[j] = yt[j]
            for i in range(nz):
                xi[i] = 0.0
            good = True
            conv = False
            it = 0
            for it in range(1, max_iter + 1):
                if not _solve_step(yt, vt, v, a, W, PW, Pvol, Z, B, gb, S, L, r, w, lam, xn, zn):
                    good = False
                    break
                if it == 1:  # step scale of the extents: their sd at the first linearisation
                    _jacobian(v, W, J)
                    _inverse_from_chol(L, Li, Sinv)
                    _var_z(vt, Z, J, B, Sinv, G, Kz, vz)
                    for i in range(nz):
                        sd = math.sqrt(vz[i]) if (obs[i] and vz[i] > 0) else 0.0
                        sdz[i] = sd if sd > 0 else (abs(zn[i]) if obs[i] else 0.0) + 1e-300
                step = 0.0
                for j in range(n):
                    if vt[j] > 0:
                        d = abs(xn[j] - v[j]) / sigma[t, j]
                        if d > step:
                            step = d
                    vp[j] = v[j]
                    v[j] = xn[j]
                for i in range(nz):
                    if obs[i]:
                        d = abs(zn[i] - xi[i]) / sdz[i]
                        if d > step:
                            step = d
                        xi[i] = zn[i]
                if step < tol:
                    conv = True
                    break
            ok[t] = good
            if not good:
                continue
            # statistics of the last linearisation (at vp; the solution moved by < tol sd since)
            converged[t] = conv
            iterations[t] = it
            _jacobian(vp, W, J)
            _inverse_from_chol(L, Li, Sinv)
            _var_z(vt, Z, J, B, Sinv, G, Kz, vz)
            obj = 0.0
            for k in range(p):
                obj += r[k] * lam[k]
            objective[t] = obj
            dof[t] = p
            _matmul(Sinv, B, SB)
            cmax = 0.0
            for j in range(n):
                u = 0.0
                c2 = 0.0
                for k in range(p):
                    u += B[k, j] * SB[k, j]
                    c2 += B[k, j] * B[k, j]
                va = vt[j] * vt[j] * u
                x_out[t, j] = xn[j]
                adjustment[t, j] = xn[j] - yt[j]
                var_adj[t, j] = va
                var_x[t, j] = vt[j] - va
                c2 = math.sqrt(c2 * vt[j])
                xn[j] = c2  # column norms, reused as scratch
                if c2 > cmax:
                    cmax = c2
            thr = NULL_TOL * max(cmax, 1e-300)
            for j in range(n):
                redundant[t, j] = xn[j] > thr
            for i in range(nz):
                if obs[i]:
                    z_out[t, i] = zn[i]
                    var_z[t, i] = vz[i]
                else:
                    z_out[t, i] = np.nan
                    var_z[t, i] = np.nan
            _closure(t, yt, a, vt, W, Exi, obs, zn, J, B, Sinv, Mx, imbalance, imbalance_sd,
                     imbalance_scale)


@nb.njit(cache=True, parallel=True)
def input_status(y, sigma, status):
    """Status of every value (0 measured, 1 missing = NaN, 2 fixed = sigma 0) into ``status``
    (T, n) int8, in one pass; returns the numbers of infinite values and of sigmas that are
    not finite and >= 0 where the value is finite (the caller reports them)."""
    T, n = y.shape
    n_inf = 0
    n_bad = 0
    for t in nb.prange(T):
        for j in range(n):
            v = y[t, j]
            s = sigma[t, j]
            if math.isnan(v):
                status[t, j] = 1
            elif math.isinf(v):
                n_inf += 1
                status[t, j] = 1
            elif not (s >= 0.0 and s < math.inf):
                n_bad += 1
                status[t, j] = 0
            else:
                status[t, j] = 2 if s == 0.0 else 0
    return n_inf, n_bad
