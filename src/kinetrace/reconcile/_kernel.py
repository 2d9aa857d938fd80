"""Batched linear WLS reconciliation kernel (one missing-value pattern at a time).

Solves, for every time step t at once,

    minimise  (y_t - x)' V_t^-1 (y_t - x)   subject to   A_t x + Az_t z = b_t

with the unmeasured z eliminated by a projection P_t (P_t Az_t = 0) taken from the
SVD of the column-equilibrated Az_t (Crowe, Garcia Campos & Hrymak 1983), then the
closed form of Kuehn & Davidson (1961) on the reduced constraints B_t = P_t A_t.

Layout: time is the LAST axis ("structure of arrays"): vectors are (n, K), matrices
(a, b, K), with K = 1 for a matrix shared by all steps. Every elementwise operation then
runs over long contiguous vectors, products with shared matrices are single BLAS calls,
and the small p x p systems are solved by a Cholesky factorisation written out over the
(few) matrix indices, each operation vectorised over time. There is no Python loop over
time steps, only over matrix indices and over the few distinct ranks of Az_t.

This module is private; the public entry points are in :mod:`.linear` and :mod:`.cstr`.
"""

from __future__ import annotations

import numpy as np

#: Relative singular-value threshold used for rank decisions.
RANK_TOL = 1e-10
#: Relative threshold below which a null-space component is taken as zero.
NULL_TOL = 1e-8


def _t(a):
    """Transpose the last two axes."""
    return np.swapaxes(a, -1, -2)


def _projection(azs):
    """Projection data of column-equilibrated ``azs`` (L, m, nz), grouped by rank.

    Yields ``(idx, P, pinv, observable)`` with ``idx`` the steps (or ``slice(None)``
    if L == 1), ``P`` (k, m - r, m) with orthonormal rows spanning the left null space,
    ``pinv`` (k, nz, m) the pseudo-inverse in unscaled z, and ``observable`` (k, nz).
    """
    L, m, nz = azs.shape
    if nz == 0:
        yield slice(None), np.eye(m)[None], np.zeros((1, 0, m)), np.ones((1, 0), bool)
        return
    cnorm = np.linalg.norm(azs, axis=1)  # (L, nz)
    cnorm = np.where(cnorm > 0, cnorm, 1.0)
    azn = azs / cnorm[:, None, :]
    u, s, vt = np.linalg.svd(azn, full_matrices=True)
    rank = np.sum(s > RANK_TOL * np.maximum(s[:, :1], 1e-300), axis=1) if s.shape[1] else np.zeros(L, int)
    for r in np.unique(rank):
        idx = slice(None) if L == 1 or rank.min() == rank.max() else np.flatnonzero(rank == r)
        ug, sg, vg, cg = u[idx], s[idx], vt[idx], cnorm[idx]
        P = _t(ug[:, :, r:])
        pinv = (_t(vg[:, :r, :]) / sg[:, None, :r]) @ _t(ug[:, :, :r])
        pinv = pinv / cg[:, :, None]
        null = vg[:, r:, :]  # (k, nz - r, nz)
        observable = np.all(np.abs(null) < NULL_TOL, axis=1) if nz - r else np.ones((len(vg), nz), bool)
        yield idx, P, pinv, observable


def row_scale(A, Az, sig_ref):
    """Scale of each constraint row, for conditioning only (the solution does not depend on
    it): the norm of its measured coefficients times typical sigmas ``sig_ref``, else of its
    unmeasured coefficients, else 1. ``A`` (m, n), ``Az`` (m, nz), ``sig_ref`` (n,)."""
    rs = np.linalg.norm(A * sig_ref, axis=1)
    alt = np.linalg.norm(Az, axis=1)
    return np.where(rs > 0, rs, np.where(alt > 0, alt, 1.0))


_CACHE: dict = {}


def _projection_cached(azs):
    """:func:`_projection` of (m, nz, K) ``azs``; memoised when shared by all steps (K = 1),
    as in the inner iterations of the CSTR problem where it is the same for every call."""
    if azs.shape[2] != 1:
        return list(_projection(np.moveaxis(azs, 2, 0)))
    key = (azs.shape, azs.tobytes())
    hit = _CACHE.get(key)
    if hit is None:
        if len(_CACHE) > 64:
            _CACHE.clear()
        hit = _CACHE[key] = list(_projection(np.moveaxis(azs, 2, 0)))
    return hit


def _pinv_sym(S):
    """Inverse (or pseudo-inverse for rank-deficient steps) of stacked SPD ``S`` and its rank."""
    k, p, _ = S.shape
    if p == 0:
        return S.copy(), np.zeros(k, int)
    try:
        L = np.linalg.cholesky(S)
        ok = np.all(np.diagonal(L, axis1=1, axis2=2) ** 2 > RANK_TOL * np.diagonal(S, axis1=1, axis2=2), axis=1)
    except np.linalg.LinAlgError:
        ok = np.zeros(k, bool)
    Sinv = np.empty_like(S)
    rank = np.full(k, p)
    if ok.all():
        return np.linalg.inv(S), rank
    good = np.flatnonzero(ok)
    bad = np.flatnonzero(~ok)
    if good.size:
        Sinv[good] = np.linalg.inv(S[good])
    w, Q = np.linalg.eigh(S[bad])
    keep = w > RANK_TOL * np.maximum(w[:, -1:], 1e-300)
    winv = np.where(keep, 1.0 / np.where(keep, w, 1.0), 0.0)
    Sinv[bad] = (Q * winv[:, None, :]) @ _t(Q)
    rank[bad] = keep.sum(axis=1)
    return Sinv, rank


def _mm(X, Y):
    """Stacked product (a, b, Kx) @ (b, c, Ky) -> (a, c, K), K = max(Kx, Ky)."""
    kx, ky = X.shape[2], Y.shape[2]
    if kx == 1 and ky == 1:
        return (X[..., 0] @ Y[..., 0])[..., None]
    if kx == 1:
        return np.tensordot(X[..., 0], Y, axes=(1, 0))
    if ky == 1:
        return np.einsum("abk,bc->ack", X, Y[..., 0])
    # batched small products over the steps (faster than a loop of whole-array passes), back
    # to the time-last layout
    out = np.matmul(np.moveaxis(X, 2, 0), np.moveaxis(Y, 2, 0))
    return np.ascontiguousarray(np.moveaxis(out, 0, 2))


def _mv(X, v):
    """Stacked matrix-vector product (a, b, Kx) @ (b, K) -> (a, K)."""
    if X.shape[2] == 1:
        return X[..., 0] @ v
    return np.einsum("abk,bk->ak", X, np.broadcast_to(v, X.shape[1:]))


def _gram(B, v):
    """S[p, q] = sum_j B[p, j] B[q, j] v[j] -> (p, p, k)."""
    p, n, kb = B.shape
    if p == 0:
        return np.zeros((0, 0, v.shape[1]))
    if kb == 1:
        Bpq = (B[:, None, :, 0] * B[None, :, :, 0]).reshape(p * p, n)
        return (Bpq @ v).reshape(p, p, -1)
    BV = B * v[None]
    S = np.empty((p, p, v.shape[1]))
    for i in range(p):
        for j in range(i + 1):
            S[i, j] = S[j, i] = np.einsum("nk,nk->k", BV[i], B[j])
    return S


def _cholesky(S):
    """Lower Cholesky factor of stacked (p, p, k) matrices and a per-step full-rank flag."""
    p, _, k = S.shape
    L = np.zeros_like(S)
    ok = np.ones(k, bool)
    for i in range(p):
        d = S[i, i] - np.sum(L[i, :i] ** 2, axis=0)
        ok &= d > RANK_TOL * np.abs(S[i, i])
        L[i, i] = np.sqrt(np.where(ok, d, 1.0))
        for j in range(i + 1, p):
            L[j, i] = (S[j, i] - np.sum(L[j, :i] * L[i, :i], axis=0)) / L[i, i]
    return L, ok


def _chol_solve(L, r):
    """Solve L L' lam = r for stacked (p, p, k) factors and (p, k) right sides."""
    p = L.shape[0]
    w = np.empty_like(r)
    for i in range(p):
        w[i] = (r[i] - np.sum(L[i, :i] * w[:i], axis=0)) / L[i, i]
    lam = np.empty_like(r)
    for i in reversed(range(p)):
        lam[i] = (w[i] - np.sum(L[i + 1:, i] * lam[i + 1:], axis=0)) / L[i, i]
    return lam


def _chol_inverse(L):
    """(L L')^-1 for stacked (p, p, k) lower factors."""
    p = L.shape[0]
    Li = np.zeros_like(L)
    for i in range(p):
        Li[i, i] = 1.0 / L[i, i]
        for j in range(i + 1, p):
            Li[j, i] = -np.sum(L[j, i:j] * Li[i:j, i], axis=0) / L[j, j]
    Sinv = np.empty_like(L)
    for a in range(p):
        for b in range(a + 1):
            Sinv[a, b] = Sinv[b, a] = np.sum(Li[a:, a] * Li[a:, b], axis=0)
    return Sinv


def _inverse(S, need_inverse):
    """Factor stacked S (p, p, k); return (L, ok, Sinv or None, rank) with a pseudo-inverse
    (eigen-decomposition) for rank-deficient steps."""
    p, _, k = S.shape
    L, ok = _cholesky(S)
    rank = np.full(k, p)
    Sinv = _chol_inverse(L) if (need_inverse or not ok.all()) else None
    if not ok.all():
        bad = np.flatnonzero(~ok)
        pinv, rk = _pinv_sym(np.moveaxis(S[:, :, bad], 2, 0))
        Sinv[:, :, bad] = np.moveaxis(pinv, 0, 2)
        rank[bad] = rk
    return L, ok, Sinv, rank


def wls_kernel(y, var, A, Az=None, b=None, full_cov=False, minimal=False):
    """Reconcile measurements with linear constraints ``A x + Az z = b`` (time-last layout).

    Parameters
    ----------
    y : ndarray (n, k)
        Measurements, all finite. [any]
    var : ndarray (n, k)
        Measurement variances, all > 0. [unit of y squared]
    A : ndarray (m, n, K)
        Constraint coefficients of the measured variables, K = 1 (shared) or k.
    Az : ndarray (m, nz, K), optional
        Constraint coefficients of the unmeasured variables.
    b : ndarray (m, K), optional
        Right-hand side (default 0).
    full_cov : bool
        Also return full covariance matrices.
    minimal : bool
        Only ``x`` and ``z`` (fast path for the inner iterations of nonlinear problems).

    Returns
    -------
    dict of ndarray (time last)
        ``x, z`` and unless ``minimal``: ``var_adj, var_x, var_z, observable, redundant,
        objective, dof, imbalance, imbalance_sd``; with ``full_cov`` also ``cov_x, cov_z,
        cov_zx``.
    """
    n, k = y.shape
    m = A.shape[0]
    Az = np.zeros((m, 0, 1)) if Az is None else Az
    nz = Az.shape[1]
    b = np.zeros((m, 1)) if b is None else b

    # Row equilibration (numerical conditioning only; the solution does not depend on it).
    rs = row_scale(A[:, :, 0], Az[:, :, 0], np.sqrt(var.mean(axis=1)))
    As, Azs, bs = A / rs[:, None, None], Az / rs[:, None, None], b / rs[:, None]

    keys = ("x", "z") if minimal else (
        "x", "z", "var_adj", "var_x", "var_z", "observable", "redundant", "objective", "dof",
        "imbalance", "imbalance_sd") + (("cov_x", "cov_z", "cov_zx") if full_cov else ())
    shapes = {"x": (n,), "z": (nz,), "var_adj": (n,), "var_x": (n,), "var_z": (nz,),
              "observable": (nz,), "redundant": (n,), "objective": (), "dof": (),
              "imbalance": (m,), "imbalance_sd": (m,), "cov_x": (n, n), "cov_z": (nz, nz),
              "cov_zx": (nz, n)}
    dtypes = {"observable": bool, "redundant": bool, "dof": int}
    out = {key: np.empty(shapes[key] + (k,), dtypes.get(key, float)) for key in keys}

    for idx, P, pinv, obs in _projection_cached(Azs):
        P, pinv, obs = np.moveaxis(P, 0, 2), np.moveaxis(pinv, 0, 2), np.moveaxis(obs, 0, 1)
        sel = (lambda a: a if a.shape[-1] == 1 else a[..., idx])
        yk, vk = y[:, idx], var[:, idx]
        kk = yk.shape[1]
        Ak, Ask, bsk = sel(A), sel(As), np.broadcast_to(sel(bs), (m, kk))
        B = _mm(P, Ask)  # (p, n, K)
        p = B.shape[0]
        rr = _mv(B, yk) - _mv(P, bsk)
        S = _gram(B, vk)
        L, ok, Sinv, rank = _inverse(S, need_inverse=not minimal)
        if ok.all():
            lam = _chol_solve(L, rr) if p else rr
        else:
            lam = np.einsum("pqk,qk->pk", Sinv, rr)
        BtL = B[..., 0].T @ lam if B.shape[2] == 1 else np.einsum("pnk,pk->nk", B, lam)
        x = yk - vk * BtL
        z = _mv(pinv, bsk - _mv(Ask, x))
        z = np.where(obs, z, np.nan)
        o = {"x": x, "z": z}
        if not minimal:
            Bb = np.broadcast_to(B, (p, n, kk))
            SB = np.einsum("pqk,qnk->pnk", Sinv, Bb)
            var_adj = vk * vk * np.einsum("pnk,pnk->nk", Bb, SB)
            colnorm = np.sqrt(np.einsum("pnk,pnk->nk", Bb, Bb) * vk)
            G = np.broadcast_to(_mm(pinv, Ask), (nz, n, kk))
            GV = G * vk[None]
            Kz = np.einsum("ank,pnk->apk", GV, Bb)
            cov_z = np.einsum("ank,bnk->abk", GV, G) - np.einsum(
                "aqk,bqk->abk", np.einsum("apk,pqk->aqk", Kz, Sinv), Kz)
            Ab = np.broadcast_to(Ak, (m, n, kk))
            Mx = np.einsum("mnk,pnk->mpk", Ab * vk[None], Bb)
            o.update(
                var_adj=var_adj, var_x=vk - var_adj,
                var_z=np.where(obs, np.einsum("aak->ak", cov_z), np.nan),
                observable=np.broadcast_to(obs, (nz, kk)),
                redundant=colnorm > NULL_TOL * np.maximum(colnorm.max(axis=0, keepdims=True, initial=0.0), 1e-300),
                objective=np.sum(rr * lam, axis=0), dof=rank,
                imbalance=_mv(Ak, yk - x),
                imbalance_sd=np.sqrt(np.maximum(np.einsum(
                    "mqk,mqk->mk", np.einsum("mpk,pqk->mqk", Mx, Sinv), Mx), 0.0)))
            if full_cov:
                H = np.einsum("pnk,pjk->njk", Bb, SB)
                cov_x = -vk[:, None] * H * vk[None]
                cov_x[np.arange(n), np.arange(n)] += vk
                both = obs[:, None] & obs[None, :]
                o.update(cov_x=cov_x, cov_z=np.where(both, cov_z, np.nan),
                         cov_zx=np.where(obs[:, None], -np.einsum("ank,njk->ajk", G, cov_x), np.nan))
        for key in keys:
            out[key][..., idx] = o[key]
    return out
