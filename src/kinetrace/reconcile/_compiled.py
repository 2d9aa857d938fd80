"""Compiled per-step kernel of the bilinear CSTR reconciliation (successive linearisation).

The same method as :meth:`.cstr.CSTRBalances.reconcile` on its numpy path, for the steps
at which no variable is missing (every variable measured, or fixed with sigma = 0): the
unknowns are then the extents alone, whose constraint columns are constant, so the
projection ``P`` (``P A_xi = 0``, Crowe, Garcia Campos & Hrymak 1983) and the estimator of
the extents are computed once, and each step needs only its own Jacobian, a ``p x p``
Cholesky factorisation and a few small products per linearisation (Kuehn & Davidson 1961
closed form, Crowe 1986 successive linearisation). A fixed variable is carried with zero
variance, which leaves it unadjusted exactly as moving it to the right-hand side would.

Compiled with numba. Steps are taken ``LANES`` at a time: every work array holds one small
matrix per lane with the lane axis last, so each operation of the method is a short loop
over lanes that the compiler turns into vector instructions, with no dependency between
lanes. Blocks of lanes are spread over the cores (``prange``); each task allocates its work
arrays once, and every result is written straight into the caller's arrays: no temporaries
the size of the data. A lane that has converged is frozen while the others iterate, and all
are solved once more at their final point for the results and statistics, exactly as on the
numpy path. A step whose
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
#: Steps solved side by side: every work array has this many lanes as its last, contiguous
#: axis, so that each small matrix operation is a loop over lanes the compiler vectorises.
LANES = 32
#: Lane blocks per task of the parallel loop (each task allocates its work arrays once).
BLOCKS_PER_TASK = 64


_J = dict(cache=True, nogil=True, fastmath=_FM, error_model="numpy")


@nb.njit(**_J)
def _load(y, sigma, acc, has_acc, t0, kk, Y, VAR, SIG, A):
    """Lanes ``0..kk`` of the work arrays from steps ``t0..t0+kk``; spare lanes repeat the
    first step (their results are never written)."""
    n = Y.shape[0]
    ns = A.shape[0]
    for k in range(LANES):
        t = t0 + (k if k < kk else 0)
        for j in range(n):
            s = sigma[t, j]
            Y[j, k] = y[t, j]
            SIG[j, k] = s
            VAR[j, k] = s * s
        ta = t if has_acc else 0
        for s in range(ns):
            A[s, k] = acc[ta, s]


@nb.njit(**_J, inline="always")
def _balance_rows(V, M, out):
    """Rows ``M (d/dv)(q_out c_out - q_in c_in)`` of every lane at ``V`` into ``out``
    (rows of M, n, L): the species (or element) rows of the Jacobian for ``M = W``, their
    projection for ``M = P W``."""
    ns = M.shape[1]
    n = V.shape[0]
    for q in range(M.shape[0]):
        for k in range(LANES):
            out[q, 0, k] = 0.0
            out[q, 1, k] = 0.0
            out[q, n - 1, k] = 0.0
        for s in range(ns):
            c = M[q, s]
            for k in range(LANES):
                out[q, 0, k] -= c * V[2 + s, k]
                out[q, 1, k] += c * V[2 + ns + s, k]
                out[q, 2 + s, k] = -c * V[0, k]
                out[q, 2 + ns + s, k] = c * V[1, k]


@nb.njit(**_J, inline="always")
def _linearise(V, A, W, PW, Pvol, B, GS, GB, PG):
    """At the linearisation points ``V`` (n, L): the reduced constraint matrices
    ``B = P J(V)`` (p, n, L), ``GS = q_out c_out - q_in c_in - acc`` (ns, L), its balance rows
    ``GB = W GS`` (ne, L) and their projection ``PG = P[:, :ne] GB`` (p, L)."""
    ne, ns = W.shape
    p = PW.shape[0]
    n = V.shape[0]
    for s in range(ns):
        for k in range(LANES):
            GS[s, k] = V[1, k] * V[2 + ns + s, k] - V[0, k] * V[2 + s, k] - A[s, k]
    for e in range(ne):
        for k in range(LANES):
            GB[e, k] = 0.0
        for s in range(ns):
            c = W[e, s]
            for k in range(LANES):
                GB[e, k] += c * GS[s, k]
    _balance_rows(V, PW, B)
    for q in range(p):  # the volume row q_in - q_out - dV/dt, weighted by P
        pv = Pvol[q]
        for k in range(LANES):
            B[q, 0, k] += pv
            B[q, 1, k] -= pv
            B[q, n - 1, k] = -pv
            PG[q, k] = 0.0
        for s in range(ns):
            c = PW[q, s]
            for k in range(LANES):
                PG[q, k] += c * GS[s, k]


@nb.njit(**_J, inline="always")
def _factor(S, L, good):
    """Cholesky factors of the lanes' SPD ``S`` (p, p, L) into ``L``; ``good[k]`` is cleared
    where a pivot is not clearly positive (same relative test as the numpy path), and that
    lane's factor is made harmless (unit pivot)."""
    p = S.shape[0]
    # every loop over lanes is innermost, so that it is vectorised
    for i in range(p):
        for j in range(i, p):  # column i: S[j, i] - sum_m L[j, m] L[i, m]
            for k in range(LANES):
                L[j, i, k] = S[j, i, k]
            for m in range(i):
                for k in range(LANES):
                    L[j, i, k] -= L[j, m, k] * L[i, m, k]
        for k in range(LANES):
            d = L[i, i, k]
            pos = d > RANK_TOL * abs(S[i, i, k])
            good[k] = good[k] and pos
            L[i, i, k] = math.sqrt(d) if pos else 1.0
        for j in range(i + 1, p):
            for k in range(LANES):
                L[j, i, k] /= L[i, i, k]
        for j in range(i):
            for k in range(LANES):
                L[j, i, k] = 0.0


@nb.njit(**_J)
def _solve(Y, VAR, V, W, PW, Pvol, Z, B, GS, GB, PG, S, L, R, WK, LAM, XN, ZN, A, good):
    """One linearised solve of every lane at ``V``: reconciled ``XN`` (n, L) and extents
    ``ZN`` (nz, L) (Kuehn & Davidson closed form on the projected constraints)."""
    ne, ns = W.shape
    p, n = B.shape[0], B.shape[1]
    nz = Z.shape[0]
    _linearise(V, A, W, PW, Pvol, B, GS, GB, PG)
    for q in range(p):  # r = B y - P b
        for k in range(LANES):
            R[q, k] = -PG[q, k]
        for j in range(n):
            for k in range(LANES):
                R[q, k] += B[q, j, k] * Y[j, k]
    for a in range(p):  # S = B V B'
        for c in range(a + 1):
            for k in range(LANES):
                S[a, c, k] = 0.0
            for j in range(n):
                for k in range(LANES):
                    S[a, c, k] += B[a, j, k] * B[c, j, k] * VAR[j, k]
            for k in range(LANES):
                S[c, a, k] = S[a, c, k]
    _factor(S, L, good)
    for i in range(p):  # L L' lam = r
        for k in range(LANES):
            WK[i, k] = R[i, k]
        for m in range(i):
            for k in range(LANES):
                WK[i, k] -= L[i, m, k] * WK[m, k]
        for k in range(LANES):
            WK[i, k] /= L[i, i, k]
    for i in range(p - 1, -1, -1):
        for k in range(LANES):
            LAM[i, k] = WK[i, k]
        for m in range(i + 1, p):
            for k in range(LANES):
                LAM[i, k] -= L[m, i, k] * LAM[m, k]
        for k in range(LANES):
            LAM[i, k] /= L[i, i, k]
    for j in range(n):  # x = y - V B' lam
        for k in range(LANES):
            XN[j, k] = 0.0
        for q in range(p):
            for k in range(LANES):
                XN[j, k] += B[q, j, k] * LAM[q, k]
        for k in range(LANES):
            XN[j, k] = Y[j, k] - VAR[j, k] * XN[j, k]
    for i in range(nz):  # z = Z (b - J x), the volume row first
        for k in range(LANES):
            ZN[i, k] = -Z[i, ne] * (XN[0, k] - XN[1, k] - XN[n - 1, k])
    for e in range(ne):
        for k in range(LANES):
            WK[0, k] = GB[e, k]  # reused: the residual of balance e
        for s in range(ns):
            c = W[e, s]
            if c != 0.0:
                for k in range(LANES):
                    WK[0, k] -= c * (-V[2 + s, k] * XN[0, k] + V[2 + ns + s, k] * XN[1, k]
                                     - V[0, k] * XN[2 + s, k] + V[1, k] * XN[2 + ns + s, k])
        for i in range(nz):
            c = Z[i, e]
            for k in range(LANES):
                ZN[i, k] += c * WK[0, k]


@nb.njit(**_J)
def _jacobian(V, W, J):
    """Full Jacobian of the balances of every lane at ``V`` into ``J`` (ne + 1, n, L)."""
    ne = W.shape[0]
    n = V.shape[0]
    _balance_rows(V, W, J)
    for j in range(n):
        for k in range(LANES):
            J[ne, j, k] = 0.0
    for k in range(LANES):
        J[ne, 0, k] = 1.0
        J[ne, 1, k] = -1.0
        J[ne, n - 1, k] = -1.0


@nb.njit(**_J)
def _inverse(L, Li, Sinv):
    """``(L L')^-1`` of every lane into ``Sinv``, through ``Li = L^-1``."""
    p = L.shape[0]
    for i in range(p):
        for j in range(p):
            for k in range(LANES):
                Li[i, j, k] = 0.0
    for i in range(p):
        for k in range(LANES):
            Li[i, i, k] = 1.0 / L[i, i, k]
        for j in range(i + 1, p):
            for m in range(i, j):
                for k in range(LANES):
                    Li[j, i, k] -= L[j, m, k] * Li[m, i, k]
            for k in range(LANES):
                Li[j, i, k] /= L[j, j, k]
    for a in range(p):
        for b in range(a + 1):
            for k in range(LANES):
                Sinv[a, b, k] = 0.0
            for m in range(a, p):
                for k in range(LANES):
                    Sinv[a, b, k] += Li[m, a, k] * Li[m, b, k]
            for k in range(LANES):
                Sinv[b, a, k] = Sinv[a, b, k]


@nb.njit(**_J)
def _var_z(VAR, Z, J, B, Sinv, G, Kz, VZ):
    """Variances of the extents of every lane, diag(G V G' - Kz S^-1 Kz'), with G = Z J
    (nz, n, L) and Kz = G V B' (nz, p, L)."""
    nz, m = Z.shape
    p, n = B.shape[0], B.shape[1]
    for i in range(nz):
        for j in range(n):
            for k in range(LANES):
                G[i, j, k] = 0.0
            for e in range(m):
                c = Z[i, e]
                for k in range(LANES):
                    G[i, j, k] += c * J[e, j, k]
        for q in range(p):
            for k in range(LANES):
                Kz[i, q, k] = 0.0
            for j in range(n):
                for k in range(LANES):
                    Kz[i, q, k] += G[i, j, k] * VAR[j, k] * B[q, j, k]
        for k in range(LANES):
            VZ[i, k] = 0.0
        for j in range(n):
            for k in range(LANES):
                VZ[i, k] += G[i, j, k] * G[i, j, k] * VAR[j, k]
        for a in range(p):
            for c in range(p):
                for k in range(LANES):
                    VZ[i, k] -= Kz[i, a, k] * Sinv[a, c, k] * Kz[i, c, k]


@nb.njit(**_J)
def _statistics(Y, VAR, A, W, Exi, obs, ZN, B, J, Sinv, R, LAM, SB, Mx, OBJ, VA, CN, ISD, IMB, ISC):
    """Statistics of every lane at its final linearisation: objective ``OBJ`` (L,), adjustment
    variances ``VA`` and redundancy column norms ``CN`` (n, L), and the closure at the raw
    measurements: imbalance ``IMB``, its sd ``ISD`` and throughput scale ``ISC`` (m, L)."""
    ne, ns = W.shape
    m, n = J.shape[0], J.shape[1]
    p = B.shape[0]
    nz = ZN.shape[0]
    for k in range(LANES):
        OBJ[k] = 0.0
    for q in range(p):
        for k in range(LANES):
            OBJ[k] += R[q, k] * LAM[q, k]
        for j in range(n):  # SB = S^-1 B
            for k in range(LANES):
                SB[q, j, k] = 0.0
            for c in range(p):
                for k in range(LANES):
                    SB[q, j, k] += Sinv[q, c, k] * B[c, j, k]
    for j in range(n):
        for k in range(LANES):
            VA[j, k] = 0.0
            CN[j, k] = 0.0
        for q in range(p):
            for k in range(LANES):
                VA[j, k] += B[q, j, k] * SB[q, j, k]
                CN[j, k] += B[q, j, k] * B[q, j, k]
        for k in range(LANES):
            VA[j, k] *= VAR[j, k] * VAR[j, k]
            CN[j, k] = math.sqrt(CN[j, k] * VAR[j, k])
    for e in range(m):  # sd of each imbalance: sqrt(Mx S^-1 Mx'), Mx = J V B'
        for q in range(p):
            for k in range(LANES):
                Mx[q, k] = 0.0
            for j in range(n):
                for k in range(LANES):
                    Mx[q, k] += J[e, j, k] * VAR[j, k] * B[q, j, k]
        for k in range(LANES):
            ISD[e, k] = 0.0
        for q in range(p):
            for c in range(p):
                for k in range(LANES):
                    ISD[e, k] += Mx[q, k] * Sinv[q, c, k] * Mx[c, k]
        for k in range(LANES):
            ISD[e, k] = math.sqrt(max(ISD[e, k], 0.0))
    for e in range(ne):
        for k in range(LANES):
            IMB[e, k] = 0.0
            ISC[e, k] = 0.0
        for s in range(ns):
            c = W[e, s]
            ac = abs(c)
            for k in range(LANES):
                qi, qo = Y[0, k], Y[1, k]
                IMB[e, k] += c * (qo * Y[2 + ns + s, k] - qi * Y[2 + s, k] + A[s, k])
                ISC[e, k] += ac * (abs(qi * Y[2 + s, k]) + abs(qo * Y[2 + ns + s, k]))
        for i in range(nz):
            if obs[i]:
                c = Exi[e, i]
                ac = abs(c)
                for k in range(LANES):
                    IMB[e, k] += c * ZN[i, k]
                    ISC[e, k] += ac * abs(ZN[i, k])
        for k in range(LANES):
            ISC[e, k] *= 0.5
    for k in range(LANES):
        IMB[ne, k] = Y[0, k] - Y[1, k] - Y[n - 1, k]
        ISC[ne, k] = 0.5 * (abs(Y[0, k]) + abs(Y[1, k]) + abs(Y[n - 1, k]))


@nb.njit(cache=True, nogil=True, fastmath=_FM, error_model="numpy")
def _write(t0, kk, Y, VAR, obs, XN, ZN, VZ, OBJ, VA, CN, ISD, IMB, ISC, conv, iters, dofv,
           x_out, z_out, var_x, var_adj, var_z, redundant, objective, dof,
           imbalance, imbalance_sd, imbalance_scale, converged, iterations):
    """Lanes ``0..kk`` into rows ``t0..t0+kk`` of the outputs (time first)."""
    n = Y.shape[0]
    m = IMB.shape[0]
    nz = ZN.shape[0]
    for k in range(kk):
        t = t0 + k
        converged[t] = conv[k]
        iterations[t] = iters[k]
        objective[t] = OBJ[k]
        dof[t] = dofv
        cmax = 0.0
        for j in range(n):
            x_out[t, j] = XN[j, k]
            var_adj[t, j] = VA[j, k]
            var_x[t, j] = VAR[j, k] - VA[j, k]
            cmax = max(cmax, CN[j, k])
        thr = NULL_TOL * max(cmax, 1e-300)
        for j in range(n):
            redundant[t, j] = CN[j, k] > thr
        for i in range(nz):
            z_out[t, i] = ZN[i, k] if obs[i] else np.nan
            var_z[t, i] = VZ[i, k] if obs[i] else np.nan
        for e in range(m):
            imbalance[t, e] = IMB[e, k]
            imbalance_sd[t, e] = ISD[e, k]
            imbalance_scale[t, e] = ISC[e, k]


@nb.njit(cache=True, parallel=True, fastmath=_FM, error_model="numpy")
def cstr_kernel(y, sigma, acc, has_acc, W, PW, Pvol, Z, Exi, obs, max_iter, tol,
                x_out, z_out, var_x, var_adj, var_z, redundant, objective, dof,
                imbalance, imbalance_sd, imbalance_scale, converged, iterations, ok):
    """Reconcile every step of ``y`` (T, n); see the module docstring.

    ``sigma`` (T, n) standard deviations (0 = fixed); ``acc`` (T, ns) hold-up terms (or
    (1, ns) zeros with ``has_acc`` False); ``W`` (ne, ns) balance rows; ``PW = P[:, :ne] W``
    (p, ns) and ``Pvol = P[:, ne]`` (p,) from the projection ``P`` (p, ne + 1); ``Z``
    (nz, ne + 1) the estimator of the extents; ``Exi`` (ne + 1, nz) their constraint columns;
    ``obs`` (nz,) which extents are observable. Results go into the output arrays (time
    first); ``ok[t]`` False leaves step ``t`` to the numpy path.
    """
    T, n = y.shape
    ne, ns = W.shape
    m = ne + 1
    p = PW.shape[0]
    nz = Z.shape[0]
    nblocks = (T + LANES - 1) // LANES
    ntasks = (nblocks + BLOCKS_PER_TASK - 1) // BLOCKS_PER_TASK
    for task in nb.prange(ntasks):
        Y = np.empty((n, LANES))
        VAR = np.empty((n, LANES))
        SIG = np.empty((n, LANES))
        A = np.empty((ns, LANES))
        V = np.empty((n, LANES))
        XN = np.empty((n, LANES))
        XI = np.empty((nz, LANES))
        ZN = np.empty((nz, LANES))
        SDZ = np.empty((nz, LANES))
        VZ = np.empty((nz, LANES))
        B = np.empty((p, n, LANES))
        J = np.empty((m, n, LANES))
        GS = np.empty((ns, LANES))
        GB = np.empty((ne, LANES))
        PG = np.empty((p, LANES))
        S = np.empty((p, p, LANES))
        L = np.zeros((p, p, LANES))
        Li = np.empty((p, p, LANES))
        Sinv = np.empty((p, p, LANES))
        R = np.empty((p, LANES))
        WK = np.empty((max(p, 1), LANES))
        LAM = np.empty((p, LANES))
        G = np.empty((nz, n, LANES))
        Kz = np.empty((nz, p, LANES))
        Mx = np.empty((p, LANES))
        SB = np.empty((p, n, LANES))
        OBJ = np.empty(LANES)
        VA = np.empty((n, LANES))
        CN = np.empty((n, LANES))
        ISD = np.empty((m, LANES))
        IMB = np.empty((m, LANES))
        ISC = np.empty((m, LANES))
        good = np.empty(LANES, np.bool_)
        active = np.empty(LANES, np.bool_)
        conv = np.empty(LANES, np.bool_)
        iters = np.empty(LANES, np.int64)
        for bi in range(task * BLOCKS_PER_TASK, min(nblocks, (task + 1) * BLOCKS_PER_TASK)):
            t0 = bi * LANES
            kk = min(LANES, T - t0)
            _load(y, sigma, acc, has_acc, t0, kk, Y, VAR, SIG, A)
            for k in range(LANES):
                good[k] = True
                active[k] = True
                conv[k] = False
                iters[k] = 0
                for j in range(n):
                    V[j, k] = Y[j, k]
                for i in range(nz):
                    XI[i, k] = 0.0
            for it in range(1, max_iter + 1):
                _solve(Y, VAR, V, W, PW, Pvol, Z, B, GS, GB, PG, S, L, R, WK, LAM, XN, ZN, A, good)
                if it == 1:  # step scale of the extents: their sd at the first linearisation
                    _jacobian(V, W, J)
                    _inverse(L, Li, Sinv)
                    _var_z(VAR, Z, J, B, Sinv, G, Kz, VZ)
                    for i in range(nz):
                        for k in range(LANES):
                            sd = math.sqrt(VZ[i, k]) if VZ[i, k] > 0 else 0.0
                            SDZ[i, k] = (sd if sd > 0 else abs(ZN[i, k])) + (0.0 if sd > 0 else 1e-300)
                n_active = 0
                for k in range(LANES):
                    if not (active[k] and good[k]):
                        active[k] = False
                        continue
                    step = 0.0
                    for j in range(n):
                        if VAR[j, k] > 0:
                            d = abs(XN[j, k] - V[j, k]) / SIG[j, k]
                            step = max(step, d)
                        V[j, k] = XN[j, k]
                    for i in range(nz):
                        if obs[i]:
                            step = max(step, abs(ZN[i, k] - XI[i, k]) / SDZ[i, k])
                            XI[i, k] = ZN[i, k]
                    iters[k] = it
                    if step < tol:
                        conv[k] = True
                        active[k] = False
                    else:
                        n_active += 1
                if n_active == 0:
                    break
            # one more closed-form pass at the final points: results and statistics
            _solve(Y, VAR, V, W, PW, Pvol, Z, B, GS, GB, PG, S, L, R, WK, LAM, XN, ZN, A, good)
            _jacobian(V, W, J)
            _inverse(L, Li, Sinv)
            _var_z(VAR, Z, J, B, Sinv, G, Kz, VZ)
            _statistics(Y, VAR, A, W, Exi, obs, ZN, B, J, Sinv, R, LAM, SB, Mx, OBJ, VA, CN, ISD, IMB, ISC)
            _write(t0, kk, Y, VAR, obs, XN, ZN, VZ, OBJ, VA, CN, ISD, IMB, ISC, conv, iters, p,
                   x_out, z_out, var_x, var_adj, var_z, redundant, objective, dof,
                   imbalance, imbalance_sd, imbalance_scale, converged, iterations)
            for k in range(kk):
                ok[t0 + k] = good[k]
