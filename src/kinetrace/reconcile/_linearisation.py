"""Successive linearisation shared by the bilinear reconciliations (CSTR, flowsheet).

At each iterate the constraints are linearised and the linear WLS problem is solved in
closed form for all still-active steps at once; a step stops when no variable moves by
more than ``tol`` of its standard deviation (Crowe 1986). Vectorised over steps: the only
Python loop is over iterations.
"""

from __future__ import annotations

import numpy as np

from ._errors import ConvergenceError


def iterate(solve, v, xi, sigma, status, max_iter, tol):
    """Iterate ``solve`` to a fixed point.

    Parameters
    ----------
    solve : callable
        ``solve(active, v_active, minimal) -> dict`` with ``x`` (k, n) and ``z`` (k, nz)
        (and, when not ``minimal``, ``var_x``, ``var_z``): the problem linearised at
        ``v_active`` for the steps ``active``.
    v, xi : ndarray (T, n), (T, nz)
        Starting point (updated in place). [units of the variables]
    sigma : ndarray (T, n)
        Measurement standard deviations: the step scale of measured variables. [units of v]
    status : ndarray (T, n)
        0 measured, 1 missing, 2 fixed.
    max_iter : int
    tol : float
        Convergence threshold, in standard deviations. [-]

    Returns
    -------
    v, xi : ndarray
        Final iterate.
    converged : ndarray (T,) of bool
    iterations : ndarray (T,) of int
    """
    T = v.shape[0]
    conv = np.zeros(T, bool)
    iters = np.zeros(T, int)
    active = np.arange(T)
    sd_x = sd_z = None
    for it in range(1, max_iter + 1):
        va, xa = v[active], xi[active]
        o = solve(active, va, it > 1)
        if it == 1:  # step scales: sigma for measured, first-pass sd for the estimated
            # tiny negative variances from round-off are zero
            vx = np.sqrt(np.clip(np.nan_to_num(o["var_x"]), 0.0, None))
            sd_x = np.where(status == 0, sigma, np.where(vx > 0, vx, np.abs(va) + 1e-300))
            vz = np.sqrt(np.clip(np.nan_to_num(o["var_z"]), 0.0, None))
            sd_z = np.where(vz > 0, vz, np.abs(np.nan_to_num(o["z"])) + 1e-300)
        v_new = np.where(np.isfinite(o["x"]), o["x"], va)
        xi_new = np.where(np.isfinite(o["z"]), o["z"], xa)
        with np.errstate(over="ignore"):
            step = np.max(np.abs(v_new - va) / sd_x[active], axis=1, initial=0.0)
        step = np.maximum(step, np.max(np.abs(xi_new - xa) / sd_z[active], axis=1, initial=0.0))
        v[active], xi[active] = v_new, xi_new
        iters[active] = it
        done = step < tol
        conv[active[done]] = True
        active = active[~done]
        if active.size == 0:
            break
    return v, xi, conv, iters


def pop_convergence(out, nonconvergence, max_iter):
    """Take ``converged`` and ``iterations`` out of the result dict ``out``; with
    ``nonconvergence="raise"`` raise :class:`ConvergenceError` naming the first steps that
    did not converge."""
    conv, iters = out.pop("converged"), out.pop("iterations")
    if nonconvergence == "raise" and not conv.all():
        bad = np.flatnonzero(~conv)
        raise ConvergenceError(
            f"successive linearisation did not converge within {max_iter} iterations at "
            f"{bad.size} of {conv.size} steps (first: {bad[:5].tolist()})", bad)
    return conv, iters
