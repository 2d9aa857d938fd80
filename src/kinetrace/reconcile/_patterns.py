"""Split time steps by their pattern of measured / missing / fixed variables.

A variable is *measured* at a step when its value is finite and its sigma > 0,
*missing* when its value is NaN (it joins the unmeasured unknowns for that step), and
*fixed* when its sigma is 0 (its value is known exactly and moves to the right-hand
side). The few distinct patterns are looped over; the steps inside a pattern are
solved together by :func:`._kernel.wls_kernel`.
"""

from __future__ import annotations

import numpy as np

from ._errors import ReconciliationError
from ._kernel import _take, wls_kernel

MEASURED, MISSING, FIXED = 0, 1, 2


def check_inputs(y, sigma, names):
    """Validate measurements and sigmas; return float arrays (T, n) and the status array."""
    y = np.asarray(y, dtype=float)
    if y.ndim == 1:
        y = y[None, :]
    if y.ndim != 2:
        raise ReconciliationError(f"measurements must be 1-D (n,) or 2-D (T, n); got shape {y.shape}")
    T, n = y.shape
    try:
        sigma = np.broadcast_to(np.asarray(sigma, dtype=float), (T, n))
    except ValueError:
        raise ReconciliationError(
            f"sigma of shape {np.shape(sigma)} does not match measurements of shape {(T, n)}"
        ) from None
    finite_y = np.isfinite(y)
    if np.any(np.isinf(y)):
        t, j = np.argwhere(np.isinf(y))[0]
        raise ReconciliationError(f"measurement of {names[j]!r} at step {t} is infinite; use NaN for missing")
    bad = finite_y & ~(np.isfinite(sigma) & (sigma >= 0))
    if bad.any():
        t, j = np.argwhere(bad)[0]
        raise ReconciliationError(
            f"sigma of {names[j]!r} at step {t} is {sigma[t, j]!r}; allowed: finite and >= 0 "
            f"(0 = known exactly) [{int(bad.sum())} bad entries in all]"
        )
    status = np.where(~finite_y, MISSING, np.where(sigma == 0, FIXED, MEASURED)).astype(np.int8)
    return y, np.array(sigma), status


def _cols(a, idx):
    """Columns ``idx`` of the last axis; a view when they are contiguous."""
    if idx.size and idx[-1] - idx[0] + 1 == idx.size:
        return a[..., idx[0]:idx[-1] + 1]
    return a[..., idx]


def group_patterns(status):
    """Distinct rows of ``status`` and the pattern number of every step."""
    n = status.shape[1]
    if n <= 39:  # one integer key per row (base 3) is much faster than unique rows
        key = status.astype(np.int64) @ (3 ** np.arange(n, dtype=np.int64))
        keys, first, inverse = np.unique(key, return_index=True, return_inverse=True)
        return status[first], inverse.reshape(-1)
    patterns, inverse = np.unique(status, axis=0, return_inverse=True)
    return patterns, inverse.reshape(-1)


def solve_patterns(y, sigma, status, A, Az, b, full_cov=False, groups=None, minimal=False):
    """Reconcile every step, grouping steps by ``status`` pattern.

    ``A`` is (m, n) or (T, m, n), ``Az`` (m, nz), (T, m, nz) or None, ``b`` (m,), (T, m)
    or None. ``groups`` = :func:`group_patterns` of ``status`` if already known. Returns a dict of full-size arrays (see :class:`.results.Reconciliation`).
    """
    T, n = y.shape
    A = A[None] if A.ndim == 2 else A
    m = A.shape[1]
    Az = np.zeros((1, m, 0)) if Az is None else (Az[None] if Az.ndim == 2 else Az)
    nz = Az.shape[2]
    b = np.zeros((1, m)) if b is None else (b[None] if np.ndim(b) == 1 else b)

    out = {"x": np.full((T, n), np.nan), "z": np.full((T, nz), np.nan)} if minimal else {
        "x": np.full((T, n), np.nan), "var_x": np.full((T, n), np.nan),
        "var_adj": np.full((T, n), np.nan), "z": np.full((T, nz), np.nan),
        "var_z": np.full((T, nz), np.nan), "redundant": np.zeros((T, n), bool),
        "observable_x": np.zeros((T, n), bool), "observable_z": np.zeros((T, nz), bool),
        "objective": np.zeros(T), "dof": np.zeros(T, int),
        "imbalance": np.zeros((T, m)), "imbalance_sd": np.zeros((T, m)),
    }
    if full_cov and not minimal:
        out["cov_x"] = np.full((T, n, n), np.nan)
        out["cov_z"] = np.full((T, nz, nz), np.nan)

    patterns, inverse = group_patterns(status) if groups is None else groups
    for k, pat in enumerate(patterns):
        idx = np.flatnonzero(inverse == k) if len(patterns) > 1 else slice(None)
        if not isinstance(idx, slice) and idx.size == 0:
            continue
        M, U, F = (np.flatnonzero(pat == s) for s in (MEASURED, MISSING, FIXED))
        Ak = _take(A, idx)
        bk = _take(b, idx)
        yk = y[idx]
        if F.size:
            bk = bk - np.einsum("kmf,kf->km", np.broadcast_to(_cols(Ak, F), (yk.shape[0], m, F.size)),
                                _cols(yk, F))
        Azk = np.concatenate([Ak[:, :, U], _take(Az, idx)], axis=2) if U.size else _take(Az, idx)
        res = wls_kernel(_cols(yk, M), _cols(sigma[idx], M) ** 2, _cols(Ak, M), Azk, bk, full_cov, minimal)
        nu = U.size
        if minimal:
            x = yk.copy()
            x[:, M], x[:, U] = res["x"], res["z"][:, :nu]
            out["x"][idx], out["z"][idx] = x, res["z"][:, nu:]
            continue
        x = np.empty((yk.shape[0], n))
        vx = np.zeros((yk.shape[0], n))
        x[:, M], vx[:, M] = res["x"], res["var_x"]
        x[:, U], vx[:, U] = res["z"][:, :nu], res["var_z"][:, :nu]
        x[:, F] = yk[:, F]
        va = np.full((yk.shape[0], n), np.nan)
        va[:, M] = res["var_adj"]
        va[:, F] = 0.0
        red = np.zeros((yk.shape[0], n), bool)
        red[:, M] = res["redundant"]
        obs = np.ones((yk.shape[0], n), bool)
        obs[:, U] = res["observable"][:, :nu]
        out["x"][idx], out["var_x"][idx], out["var_adj"][idx] = x, vx, va
        out["redundant"][idx], out["observable_x"][idx] = red, obs
        out["z"][idx], out["var_z"][idx] = res["z"][:, nu:], res["var_z"][:, nu:]
        out["observable_z"][idx] = res["observable"][:, nu:]
        for key in ("objective", "dof", "imbalance", "imbalance_sd"):
            out[key][idx] = res[key]
        if full_cov:
            c = np.zeros((yk.shape[0], n, n))
            c[:, M[:, None], M] = res["cov_x"]
            c[:, U[:, None], U] = res["cov_z"][:, :nu, :nu]
            c[:, U[:, None], M] = res["cov_zx"][:, :nu]
            c[:, M[:, None], U] = np.swapaxes(res["cov_zx"][:, :nu], 1, 2)
            out["cov_x"][idx] = c
            out["cov_z"][idx] = res["cov_z"][:, nu:, nu:]
    if minimal:
        return {"x": out["x"], "z": out["z"]}
    xa = np.abs(np.nan_to_num(out["x"]))[:, :, None]
    za = np.abs(np.nan_to_num(out["z"]))[:, :, None]
    out["imbalance_scale"] = 0.5 * ((np.abs(A) @ xa)[..., 0] + (np.abs(Az) @ za)[..., 0])
    return out
