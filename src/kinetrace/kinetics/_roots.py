"""Vectorised bracketed root finding (grid scan + bisection over arrays).

Used where a closed form does not exist: many independent scalar equations
f_i(x_i) = 0, one per time step or scenario, each with its own bracket
[lo_i, hi_i]. A coarse grid locates sign changes (and counts them, which
flags multiple solutions), then bisection refines the chosen bracket. All
work is done on whole arrays; the only Python loop is over bisection steps.

References
----------
.. [1] Press, W. H. et al. (2007). Numerical Recipes, 3rd ed. Cambridge
   University Press, sec. 9.1 (bracketing and bisection).
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np

from kinetrace.errors import KinetraceError


def bracketed_root(
    func: Callable[[np.ndarray], np.ndarray],
    lo: np.ndarray,
    hi: np.ndarray,
    *,
    n_grid: int = 65,
    pick: str = "first",
    iterations: int = 100,
    xtol: float = 0.0,
) -> tuple[np.ndarray, np.ndarray]:
    """Roots of ``func`` in [lo, hi], one per column.

    Parameters
    ----------
    func : callable
        Maps x of shape (m, n) to f(x) of the same shape; column j is the
        equation with bracket [lo[j], hi[j]].
    lo, hi : ndarray, shape (n,)
        Bracket ends.
    n_grid : int
        Grid points used to find sign changes.
    pick : {"first", "last"}
        Which sign change to refine when there are several (lowest or highest x).
    iterations : int
        Bisection steps (each halves the bracket).
    xtol : float
        Stop early when every bracket is narrower than this.

    Returns
    -------
    root : ndarray, shape (n,)
        Root, NaN where no sign change was found (or inputs were NaN). An
        exact zero at a grid point is returned as is.
    n_roots : ndarray of int, shape (n,)
        Number of sign changes on the grid (more than one flags several roots).
    """
    lo = np.asarray(lo, dtype=float)
    hi = np.asarray(hi, dtype=float)
    frac = np.linspace(0.0, 1.0, n_grid)[:, None]
    grid = lo + frac * (hi - lo)
    f = np.asarray(func(grid), dtype=float)
    sign = np.sign(f)
    change = (sign[:-1] * sign[1:] < 0) | ((sign[:-1] == 0) & np.isfinite(f[1:]))
    exact_last = sign[-1] == 0
    n_roots = change.sum(axis=0) + exact_last
    any_change = change.any(axis=0)
    if pick == "first":
        pos = np.argmax(change, axis=0)
    elif pick == "last":
        pos = change.shape[0] - 1 - np.argmax(change[::-1], axis=0)
    else:
        raise KinetraceError(f"pick must be 'first' or 'last', got {pick!r}")
    cols = np.arange(lo.size)
    a = grid[pos, cols]
    b = grid[pos + 1, cols]
    fa = f[pos, cols]
    root = np.full(lo.shape, np.nan)
    exact = any_change & (fa == 0)
    root[exact] = a[exact]
    todo = any_change & ~exact
    a, b, fa = a[todo], b[todo], fa[todo]
    idx = np.flatnonzero(todo)
    for _ in range(iterations):
        mid = 0.5 * (a + b)
        full = np.full(lo.size, np.nan)
        full[idx] = mid
        fm = np.asarray(func(full[None, :]), dtype=float)[0, idx]
        left = np.sign(fm) == np.sign(fa)
        a = np.where(left, mid, a)
        fa = np.where(left, fm, fa)
        b = np.where(left, b, mid)
        if xtol > 0 and np.all(np.abs(b - a) < xtol):
            break
    root[idx] = 0.5 * (a + b)
    only_end = ~any_change & exact_last
    root[only_end] = hi[only_end]
    return root, n_roots.astype(int)
