"""Batched WLS with correlated measurement errors, by whitening (time-last layout).

With ``V_t = D_t R D_t`` (``D_t`` the standard deviations at step t, ``R = C C'`` a constant
correlation matrix with Cholesky factor ``C``) the substitution ``x = D_t C w`` turns

    minimise (y - x)' V_t^-1 (y - x)  subject to  A x + Az z = b

into the uncorrelated problem ``minimise |u - w|^2`` with ``u = C^-1 D_t^-1 y`` and
constraints ``(A D_t C) w + Az z = b``, which :func:`._kernel.wls_kernel` solves; the
results are mapped back (``Cov(x) = D C Cov(w) C' D``, ``Cov(adjustment) = V - Cov(x)``).
The objective (global-test statistic), the imbalances and the unmeasured estimates are
invariant under the substitution. This is the closed form of Kuehn & Davidson (1961),
``x = y - V A' (A V A')^-1 A y``, with a full ``V``.

Private; used by :func:`._patterns.solve_patterns` when a correlation matrix is given.
"""

from __future__ import annotations

import numpy as np
from scipy.linalg import solve_triangular

from ._kernel import wls_kernel

#: Relative variance of an adjustment below which a measurement counts as non-redundant. [-]
REDUNDANT_TOL = 1e-9


#: Steps whitened together (bounds the (n, n, k) temporaries of the covariance mapping).
BLOCK = 4096


def correlated_kernel(y, sd, R, A, Az=None, b=None, full_cov=False, minimal=False):
    """:func:`._kernel.wls_kernel` for correlated errors (same arguments and results, time last).

    ``y`` and ``sd`` (n, k) are the measurements and their standard deviations (> 0),
    ``R`` (n, n) their correlation matrix (positive definite). [units of y]
    Solved in blocks of :data:`BLOCK` steps (a loop over blocks, not over steps).
    """
    k = y.shape[1]
    if k <= BLOCK:
        return _whitened(y, sd, R, A, Az, b, full_cov, minimal)

    def part(a, sl):
        return a if a is None or a.shape[-1] == 1 else a[..., sl]

    parts = [_whitened(y[:, sl], sd[:, sl], R, part(A, sl), part(Az, sl), part(b, sl), full_cov, minimal)
             for sl in (slice(i, i + BLOCK) for i in range(0, k, BLOCK))]
    return {key: np.concatenate([p[key] for p in parts], axis=-1) for key in parts[0]}


def _whitened(y, sd, R, A, Az, b, full_cov, minimal):
    """One block of :func:`correlated_kernel`."""
    C = np.linalg.cholesky(R)
    u = solve_triangular(C, y / sd, lower=True)
    AG = np.einsum("mjk,ji->mik", A * sd[None], C)  # A D_t C, (m, n, k)
    res = wls_kernel(u, np.ones_like(u), AG, Az, b, full_cov=not minimal, minimal=minimal)
    out = dict(res)
    out["x"] = sd * (C @ res["x"])
    if minimal:
        return out
    cw = np.einsum("ia,abk->ibk", C, res["cov_x"])
    cov_x = np.einsum("ibk,jb->ijk", cw, C) * sd[:, None] * sd[None]
    var_x = np.einsum("iik->ik", cov_x).copy()
    var_adj = np.clip(sd * sd - var_x, 0.0, None)
    out.update(var_x=var_x, var_adj=var_adj, redundant=var_adj > REDUNDANT_TOL * sd * sd)
    if full_cov:
        out["cov_x"] = cov_x
        out["cov_zx"] = np.einsum("awk,jw->ajk", res["cov_zx"], C) * sd[None]
    else:
        for key in ("cov_x", "cov_z", "cov_zx"):
            out.pop(key, None)
    return out
