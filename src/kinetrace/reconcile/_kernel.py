"""Batched linear WLS reconciliation kernel (one missing-value pattern at a time).

Solves, for every time step t at once,

    minimise  (y_t - x)' V_t^-1 (y_t - x)   subject to   A_t x + Az_t z = b_t

with the unmeasured z eliminated by a projection P_t (P_t Az_t = 0) taken from the
SVD of the column-equilibrated Az_t (Crowe, Garcia Campos & Hrymak 1983), then the
closed form of Kuehn & Davidson (1961) on the reduced constraints B_t = P_t A_t.
Matrices carry a leading axis of length 1 (shared by all steps) or T (one per step),
so that numpy broadcasting in ``matmul`` does the batching: there is no Python loop
over time steps, only over the few distinct ranks of Az_t.

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


def _take(a, idx):
    """Rows ``idx`` of a stacked array whose leading axis is 1 (shared) or T."""
    return a if a.shape[0] == 1 else a[idx]


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
        idx = slice(None) if L == 1 else np.flatnonzero(rank == r)
        ug, sg, vg, cg = u[idx], s[idx], vt[idx], cnorm[idx]
        P = _t(ug[:, :, r:])
        pinv = (_t(vg[:, :r, :]) / sg[:, None, :r]) @ _t(ug[:, :, :r])
        pinv = pinv / cg[:, :, None]
        null = vg[:, r:, :]  # (k, nz - r, nz)
        observable = np.all(np.abs(null) < NULL_TOL, axis=1) if nz - r else np.ones((len(vg), nz), bool)
        yield idx, P, pinv, observable


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


def _solve_sym(S, rhs):
    """Solve stacked SPD systems ``S lam = rhs``; pseudo-inverse where rank deficient."""
    k, p, _ = S.shape
    if p == 0:
        return np.zeros((k, 0))
    try:
        L = np.linalg.cholesky(S)
        ok = np.all(np.diagonal(L, axis1=1, axis2=2) ** 2 > RANK_TOL * np.diagonal(S, axis1=1, axis2=2))
    except np.linalg.LinAlgError:
        ok = False
    if ok:
        return np.linalg.solve(S, rhs[:, :, None])[..., 0]
    Sinv, _ = _pinv_sym(S)
    return np.einsum("kpq,kq->kp", Sinv, rhs)


def wls_kernel(y, var, A, Az=None, b=None, full_cov=False, minimal=False):
    """Reconcile stacked measurements with linear constraints ``A x + Az z = b``.

    Parameters
    ----------
    y : ndarray (T, n)
        Measurements, all finite. [any]
    var : ndarray (T, n)
        Measurement variances, all > 0. [unit of y squared]
    A : ndarray (m, n) or (T, m, n)
        Constraint coefficients of the measured variables.
    Az : ndarray (m, nz) or (T, m, nz), optional
        Constraint coefficients of the unmeasured variables.
    b : ndarray (m,) or (T, m), optional
        Right-hand side (default 0).
    full_cov : bool
        Also return full covariance matrices.
    minimal : bool
        Only ``x`` and ``z`` (fast path for the inner iterations of nonlinear problems).

    Returns
    -------
    dict of ndarray
        ``x, var_adj, var_x, z, var_z, observable, redundant, objective, dof,
        imbalance, imbalance_sd`` and, with ``full_cov``, ``cov_x, cov_z, cov_zx``.
    """
    T, n = y.shape
    A = A[None] if A.ndim == 2 else A
    m = A.shape[1]
    if Az is None:
        Az = np.zeros((1, m, 0))
    Az = Az[None] if Az.ndim == 2 else Az
    nz = Az.shape[2]
    b = np.zeros((1, m)) if b is None else (b[None] if b.ndim == 1 else b)

    # Row equilibration (numerical conditioning only; the solution does not depend on it).
    sig_ref = np.sqrt(np.median(var, axis=0))
    rs = np.linalg.norm(A[0] * sig_ref, axis=1)
    alt = np.linalg.norm(Az[0], axis=1)
    rs = np.where(rs > 0, rs, np.where(alt > 0, alt, 1.0))
    As, Azs, bs = A / rs[:, None], Az / rs[:, None], b / rs

    if minimal:
        out = {"x": np.empty((T, n)), "z": np.empty((T, nz))}
        for idx, P, pinv, obs in _projection(Azs):
            yk, vk = y[idx], var[idx]
            Ask, bsk = _take(As, idx), _take(bs, idx)
            B = P @ Ask
            rr = np.einsum("kpn,kn->kp", np.broadcast_to(B, (yk.shape[0],) + B.shape[1:]), yk)
            rr -= np.einsum("kpm,km->kp", np.broadcast_to(P, (yk.shape[0],) + P.shape[1:]),
                            np.broadcast_to(bsk, (yk.shape[0], m)))
            BV = B * vk[:, None, :]
            lam = _solve_sym(BV @ _t(B), rr)
            x = yk - np.einsum("kpn,kp->kn", BV, lam)
            rhs = bsk - np.einsum("kmn,kn->km", np.broadcast_to(Ask, (yk.shape[0],) + Ask.shape[1:]), x)
            z = np.einsum("kzm,km->kz", np.broadcast_to(pinv, (yk.shape[0],) + pinv.shape[1:]), rhs)
            out["x"][idx], out["z"][idx] = x, np.where(obs, z, np.nan)
        return out

    out = {
        "x": np.empty((T, n)), "var_adj": np.empty((T, n)), "var_x": np.empty((T, n)),
        "z": np.empty((T, nz)), "var_z": np.empty((T, nz)),
        "observable": np.empty((T, nz), bool), "redundant": np.empty((T, n), bool),
        "objective": np.empty(T), "dof": np.empty(T, int),
        "imbalance": np.empty((T, m)), "imbalance_sd": np.empty((T, m)),
    }
    if full_cov:
        out.update(cov_x=np.empty((T, n, n)), cov_z=np.empty((T, nz, nz)), cov_zx=np.empty((T, nz, n)))

    for idx, P, pinv, obs in _projection(Azs):
        yk, vk = y[idx], var[idx]
        Ak, Ask, bsk = _take(A, idx), _take(As, idx), _take(bs, idx)
        B = P @ Ask  # (L, p, n)
        rr = (B @ yk[:, :, None])[..., 0] - (P @ bsk[:, :, None])[..., 0]
        BV = B * vk[:, None, :]  # (k, p, n)
        S = BV @ _t(B)
        Sinv, rank = _pinv_sym(S)
        lam = (Sinv @ rr[:, :, None])[..., 0]
        x = yk - (_t(BV) @ lam[:, :, None])[..., 0]
        SB = Sinv @ B  # (k, p, n)
        h_diag = np.sum(B * SB, axis=1)  # diag(B' S^+ B)
        var_adj = vk * vk * h_diag
        colnorm = np.linalg.norm(B * np.sqrt(vk)[:, None, :], axis=1)
        redundant = colnorm > NULL_TOL * np.maximum(colnorm.max(axis=1, keepdims=True), 1e-300)

        # Unmeasured: z = Az^+ (b - A x), Cov(z) = G V G' - (G V B') S^+ (B V G')
        G = pinv @ Ask  # (L, nz, n)
        z = (pinv @ (bsk - (Ask @ x[:, :, None])[..., 0])[:, :, None])[..., 0]
        GV = G * vk[:, None, :]
        K = GV @ _t(B)
        cov_z = GV @ _t(G) - K @ Sinv @ _t(K)
        z = np.where(obs, z, np.nan)
        var_z = np.where(obs, np.diagonal(cov_z, axis1=1, axis2=2), np.nan)

        # Closure of the original rows at the raw data: e = A (y - x), Var(e) = diag(A V B' S^+ B V A')
        M = (Ak * vk[:, None, :]) @ _t(B)
        out["imbalance"][idx] = (Ak @ (yk - x)[:, :, None])[..., 0]
        out["imbalance_sd"][idx] = np.sqrt(np.maximum(np.sum((M @ Sinv) * M, axis=-1), 0.0))

        out["x"][idx], out["var_adj"][idx], out["var_x"][idx] = x, var_adj, vk - var_adj
        out["z"][idx], out["var_z"][idx] = z, var_z
        out["observable"][idx] = np.broadcast_to(obs, z.shape)
        out["redundant"][idx] = np.broadcast_to(redundant, x.shape)
        out["objective"][idx] = np.sum(rr * lam, axis=1)
        out["dof"][idx] = rank
        if full_cov:
            H = _t(B) @ SB  # (k, n, n)
            cov_x = -vk[:, :, None] * H * vk[:, None, :]
            cov_x[:, np.arange(n), np.arange(n)] += vk
            both = obs[:, :, None] & obs[:, None, :]
            out["cov_x"][idx] = cov_x
            out["cov_z"][idx] = np.where(both, cov_z, np.nan)
            out["cov_zx"][idx] = np.where(obs[:, :, None], -G @ cov_x, np.nan)
    return out
