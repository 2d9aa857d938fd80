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
from ._correlated import correlated_kernel
from ._kernel import _mv, wls_kernel

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
    y = np.ascontiguousarray(y)
    sigma = np.ascontiguousarray(sigma)
    status, n_inf, n_bad = input_status(y, sigma)
    if n_inf:
        t, j = np.argwhere(np.isinf(y))[0]
        raise ReconciliationError(f"measurement of {names[j]!r} at step {t} is infinite; use NaN for missing")
    if n_bad:
        bad = np.isfinite(y) & ~(np.isfinite(sigma) & (sigma >= 0))
        t, j = np.argwhere(bad)[0]
        raise ReconciliationError(
            f"sigma of {names[j]!r} at step {t} is {sigma[t, j]!r}; allowed: finite and >= 0 "
            f"(0 = known exactly) [{n_bad} bad entries in all]"
        )
    return y, sigma, status


def input_status(y, sigma):
    """Status of every value (0 measured, 1 missing = NaN, 2 fixed = sigma 0), (T, n) int8, and
    the numbers of infinite values and of sigmas that are not finite and >= 0 where the value is
    finite (the caller reports them). Whole-array numpy: no compiler start-up on the paths that
    never reach the compiled kernel."""
    nan = np.isnan(y)
    inf = np.isinf(y)
    with np.errstate(invalid="ignore"):
        good = (sigma >= 0.0) & (sigma < np.inf)          # False for a NaN sigma
    status = np.where(nan | inf, np.int8(MISSING), np.where(good & (sigma == 0.0), np.int8(FIXED),
                                                            np.int8(MEASURED))).astype(np.int8, copy=False)
    return status, int(inf.sum()), int((~(nan | inf) & ~good).sum())


def _cols0(a, idx):
    """Rows ``idx`` (axis 0); a view when they are contiguous."""
    if idx.size and idx[-1] - idx[0] + 1 == idx.size:
        return a[idx[0]:idx[-1] + 1]
    return a[idx]


def _cols1(a, idx):
    """Columns ``idx`` (axis 1); a view when they are contiguous."""
    if idx.size and idx[-1] - idx[0] + 1 == idx.size:
        return a[:, idx[0]:idx[-1] + 1]
    return a[:, idx]


def group_patterns(status):
    """Distinct rows of ``status`` and the pattern number of every step."""
    n = status.shape[1]
    if n <= 39:  # one integer key per row (base 3) is much faster than unique rows
        key = status.astype(np.int64) @ (3 ** np.arange(n, dtype=np.int64))
        keys, first, inverse = np.unique(key, return_index=True, return_inverse=True)
        return status[first], inverse.reshape(-1)
    patterns, inverse = np.unique(status, axis=0, return_inverse=True)
    return patterns, inverse.reshape(-1)


def solve_patterns(y, sigma, status, A, Az, b, full_cov=False, groups=None, minimal=False, corr=None):
    """Reconcile every step, grouping steps by ``status`` pattern.

    ``y, sigma, status`` are (T, n). Constraint arrays have time LAST: ``A`` is (m, n) or
    (m, n, T), ``Az`` (m, nz), (m, nz, T) or None, ``b`` (m,), (m, T) or None.
    ``groups`` = :func:`group_patterns` of ``status`` if already known. ``corr`` (n, n): the
    correlation matrix of the measurement errors (None: uncorrelated); at each pattern the
    block of the measured variables is used. Returns a dict of
    full-size arrays with time FIRST (see :class:`.results.Reconciliation`).
    """
    T, n = y.shape
    A = A[..., None] if A.ndim == 2 else A
    m = A.shape[0]
    Az = np.zeros((m, 0, 1)) if Az is None else (Az[..., None] if Az.ndim == 2 else Az)
    nz = Az.shape[1]
    b = np.zeros((m, 1)) if b is None else (b[:, None] if np.ndim(b) == 1 else b)

    if minimal:
        out = {"x": np.full((T, n), np.nan), "z": np.full((T, nz), np.nan)}
    else:
        out = {
            "x": np.full((T, n), np.nan), "var_x": np.full((T, n), np.nan),
            "var_adj": np.full((T, n), np.nan), "z": np.full((T, nz), np.nan),
            "var_z": np.full((T, nz), np.nan), "redundant": np.zeros((T, n), bool),
            "observable_x": np.zeros((T, n), bool), "observable_z": np.zeros((T, nz), bool),
            "objective": np.zeros(T), "dof": np.zeros(T, int),
            "imbalance": np.zeros((T, m)), "imbalance_sd": np.zeros((T, m)),
        }
        if full_cov:
            out["cov_x"] = np.full((T, n, n), np.nan)
            out["cov_z"] = np.full((T, nz, nz), np.nan)

    patterns, inverse = group_patterns(status) if groups is None else groups
    for k, pat in enumerate(patterns):
        idx = np.flatnonzero(inverse == k) if len(patterns) > 1 else slice(None)
        if not isinstance(idx, slice) and idx.size == 0:
            continue
        M, U, F = (np.flatnonzero(pat == s) for s in (MEASURED, MISSING, FIXED))

        def sel(a):
            return a if a.shape[-1] == 1 else a[..., idx]

        Ak, bk = sel(A), sel(b)
        yk = y[idx]
        yT = yk.T
        if F.size:
            bk = bk - _mv(_cols1(Ak, F), _cols0(yT, F))
        Azk = np.concatenate(_stack_az(Ak[:, U], sel(Az)), axis=1) if U.size else sel(Az)
        var = np.ascontiguousarray(_cols0(sigma[idx].T, M)) ** 2
        RM = None if corr is None else corr[np.ix_(M, M)]
        if RM is not None and not np.array_equal(RM, np.eye(M.size)):
            res = correlated_kernel(np.ascontiguousarray(_cols0(yT, M)), np.sqrt(var), RM, _cols1(Ak, M),
                                    Azk, bk, full_cov and not minimal, minimal)
        else:
            res = wls_kernel(np.ascontiguousarray(_cols0(yT, M)), var, _cols1(Ak, M), Azk, bk,
                             full_cov and not minimal, minimal)
        nu = U.size
        kk = yk.shape[0]
        x = yk.copy()
        x[:, M], x[:, U] = res["x"].T, res["z"][:nu].T
        out["x"][idx], out["z"][idx] = x, res["z"][nu:].T
        if minimal:
            continue
        vx = np.zeros((kk, n))
        vx[:, M], vx[:, U] = res["var_x"].T, res["var_z"][:nu].T
        va = np.full((kk, n), np.nan)
        va[:, M] = res["var_adj"].T
        va[:, F] = 0.0
        red = np.zeros((kk, n), bool)
        red[:, M] = res["redundant"].T
        obs = np.ones((kk, n), bool)
        obs[:, U] = res["observable"][:nu].T
        out["var_x"][idx], out["var_adj"][idx] = vx, va
        out["redundant"][idx], out["observable_x"][idx] = red, obs
        out["var_z"][idx] = res["var_z"][nu:].T
        out["observable_z"][idx] = res["observable"][nu:].T
        for key in ("objective", "dof", "imbalance", "imbalance_sd"):
            out[key][idx] = res[key].T
        if full_cov:
            cx, cz, czx = (np.moveaxis(res[key], -1, 0) for key in ("cov_x", "cov_z", "cov_zx"))
            c = np.zeros((kk, n, n))
            c[:, M[:, None], M] = cx
            c[:, U[:, None], U] = cz[:, :nu, :nu]
            c[:, U[:, None], M] = czx[:, :nu]
            c[:, M[:, None], U] = np.swapaxes(czx[:, :nu], 1, 2)
            out["cov_x"][idx] = c
            out["cov_z"][idx] = cz[:, nu:, nu:]
    if minimal:
        return out
    xa = np.abs(np.nan_to_num(out["x"])).T
    za = np.abs(np.nan_to_num(out["z"])).T
    scale = _mv(np.abs(A), xa) + _mv(np.abs(Az), za)
    out["imbalance_scale"] = 0.5 * scale.T
    return out


def _stack_az(a, b):
    """Concatenate two (m, *, K) arrays along axis 1, broadcasting K."""
    k = max(a.shape[2], b.shape[2])
    return [np.broadcast_to(a, a.shape[:2] + (k,)), np.broadcast_to(b, b.shape[:2] + (k,))]
