"""Correlated measurement errors: correlation matrices from named pairs or full covariance
matrices, checked (symmetric, positive definite) with errors that name the tags.

Reconciliation functions take the standard deviations ``sigma`` and, optionally, a
correlation matrix ``R`` (unit diagonal), so that ``V = diag(sigma) R diag(sigma)``; this keeps
time-varying sigmas (and sigma 0 = known exactly) working with a constant correlation
structure. A full covariance matrix is split into both by :func:`split_covariance`.
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np

from ._errors import ReconciliationError

#: Tolerance of the symmetry and unit-diagonal checks. [-]
SYM_TOL = 1e-9


def _not_pd_tags(M, names):
    """Names of the variables carrying the direction of the smallest eigenvalue of ``M``."""
    w, Q = np.linalg.eigh(0.5 * (M + M.T))
    v = np.abs(Q[:, 0])
    return [names[j] for j in np.flatnonzero(v > 0.1 * v.max())], float(w[0])


def _square_symmetric(M, names, what):
    """``M`` as a float (n, n) array, checked square, finite and symmetric (relative to its
    diagonal scale); errors name the variables of the offending entry."""
    M = np.asarray(M, dtype=float)
    n = len(names)
    if M.shape != (n, n):
        raise ReconciliationError(f"{what} has shape {M.shape}; expected ({n}, {n}) for {n} variables")
    if not np.all(np.isfinite(M)):
        i, j = np.argwhere(~np.isfinite(M))[0]
        raise ReconciliationError(f"{what}: entry ({names[i]!r}, {names[j]!r}) is {M[i, j]!r}; must be finite")
    scale = np.sqrt(np.abs(np.diag(M)))
    asym = np.abs(M - M.T) / np.maximum(np.outer(scale, scale), 1e-300)
    if asym.max(initial=0.0) > SYM_TOL:
        i, j = np.unravel_index(np.argmax(asym), asym.shape)
        raise ReconciliationError(
            f"{what} is not symmetric: ({names[i]!r}, {names[j]!r}) = {M[i, j]:g} but "
            f"({names[j]!r}, {names[i]!r}) = {M[j, i]:g}")
    return M


def check_correlation(R, names, what="correlation matrix") -> np.ndarray:
    """Check that ``R`` is a valid correlation matrix: square, symmetric, unit diagonal,
    off-diagonal entries in (-1, 1) and positive definite.

    Parameters
    ----------
    R : array_like (n, n)
        Correlation coefficients. [-]
    names : sequence of str
        Variable (tag) names, used in the messages.
    what : str
        What to call the matrix in messages.

    Returns
    -------
    ndarray (n, n)
        ``R`` as a float array, exactly symmetrised. [-]

    Raises
    ------
    ReconciliationError
        Naming the tags of the first offending entry, or the tags spanning the
        direction in which ``R`` is not positive definite.

    Examples
    --------
    >>> check_correlation([[1.0, 0.5], [0.5, 1.0]], ["FI-1", "FI-2"]).tolist()
    [[1.0, 0.5], [0.5, 1.0]]
    """
    n = len(names)
    R = _square_symmetric(R, names, what)
    d = np.abs(np.diag(R) - 1.0)
    if d.max(initial=0.0) > SYM_TOL:
        j = int(np.argmax(d))
        raise ReconciliationError(f"{what}: diagonal entry of {names[j]!r} is {R[j, j]:g}; must be 1")
    off = np.abs(R - np.eye(n))
    if off.max(initial=0.0) >= 1.0:
        i, j = np.unravel_index(np.argmax(off), off.shape)
        raise ReconciliationError(
            f"{what}: correlation of {names[i]!r} and {names[j]!r} is {R[i, j]:g}; allowed: strictly "
            "between -1 and 1 (a correlation of +-1 means one meter: give it once)")
    R = 0.5 * (R + R.T)
    try:
        np.linalg.cholesky(R)
    except np.linalg.LinAlgError:
        tags, w = _not_pd_tags(R, names)
        raise ReconciliationError(
            f"{what} is not positive definite (smallest eigenvalue {w:.3g}); the correlations among "
            f"{', '.join(repr(t) for t in tags)} contradict each other") from None
    return R


def correlation_matrix(names, correlations) -> np.ndarray:
    """Correlation matrix of the variables ``names`` from named pairs.

    Parameters
    ----------
    names : sequence of str
        Variable (tag) names, in the order of the measurement vector.
    correlations : mapping or sequence
        ``{(name_a, name_b): rho}`` or ``[(name_a, name_b, rho), ...]``; pairs not given are
        uncorrelated. [-]

    Returns
    -------
    ndarray (n, n)
        Checked correlation matrix (see :func:`check_correlation`). [-]

    Examples
    --------
    Two flows derived from one differential-pressure cell (invented tags):

    >>> correlation_matrix(["FI-1", "FI-2", "FI-3"], {("FI-1", "FI-2"): 0.6}).tolist()
    [[1.0, 0.6, 0.0], [0.6, 1.0, 0.0], [0.0, 0.0, 1.0]]
    """
    names = [str(s) for s in names]
    pos = {s: j for j, s in enumerate(names)}
    items = correlations.items() if isinstance(correlations, Mapping) else (
        ((a, b), r) for a, b, r in correlations)
    R = np.eye(len(names))
    for (a, b), rho in items:
        for t in (a, b):
            if t not in pos:
                raise ReconciliationError(f"correlation ({a!r}, {b!r}): {t!r} is not one of the variables "
                                          f"({', '.join(names)})")
        if a == b:
            raise ReconciliationError(f"correlation ({a!r}, {b!r}): a variable is not correlated with itself")
        i, j = pos[a], pos[b]
        if R[i, j] != 0.0 and R[i, j] != rho:
            raise ReconciliationError(f"correlation of {a!r} and {b!r} is given twice ({R[i, j]:g} and {rho:g})")
        R[i, j] = R[j, i] = float(rho)
    return check_correlation(R, names)


def split_covariance(cov, names) -> tuple[np.ndarray, np.ndarray]:
    """Standard deviations and correlation matrix of a full covariance matrix.

    Parameters
    ----------
    cov : array_like (n, n)
        Measurement-error covariance matrix, symmetric positive definite.
        [product of the variables' units]
    names : sequence of str
        Variable (tag) names, used in the messages.

    Returns
    -------
    sigma : ndarray (n,)
        ``sqrt(diag(cov))``. [units of the variables]
    R : ndarray (n, n)
        ``cov / (sigma sigma')``. [-]

    Raises
    ------
    ReconciliationError
        If ``cov`` is not symmetric or not positive definite, naming the tags.

    Examples
    --------
    >>> s, R = split_covariance([[4.0, 1.0], [1.0, 1.0]], ["a", "b"])
    >>> s.tolist(), R.tolist()
    ([2.0, 1.0], [[1.0, 0.5], [0.5, 1.0]])
    """
    names = [str(s) for s in names]
    V = _square_symmetric(cov, names, "covariance matrix")
    bad = np.flatnonzero(~(np.diag(V) > 0))
    if bad.size:
        raise ReconciliationError(
            f"covariance matrix is not positive definite: the variance of "
            f"{', '.join(repr(names[j]) for j in bad)} is {V[bad[0], bad[0]]:g}; must be > 0 "
            "(give a variable known exactly through sigma = 0 instead)")
    sigma = np.sqrt(np.diag(V))
    R = V / np.outer(sigma, sigma)
    np.fill_diagonal(R, 1.0)
    try:
        np.linalg.cholesky(0.5 * (R + R.T))
    except np.linalg.LinAlgError:
        tags, w = _not_pd_tags(R, names)
        raise ReconciliationError(
            f"covariance matrix is not positive definite (smallest eigenvalue of its correlation matrix "
            f"{w:.3g}); the covariances among {', '.join(repr(t) for t in tags)} contradict each other") from None
    return sigma, 0.5 * (R + R.T)


def resolve_correlation(correlation, names) -> np.ndarray | None:
    """A checked (n, n) correlation matrix from a matrix, named pairs or None; None when it
    is the identity (so the uncorrelated fast paths are kept)."""
    if correlation is None:
        return None
    pairs = isinstance(correlation, Mapping) or (
        isinstance(correlation, (list, tuple)) and len(correlation) > 0
        and isinstance(correlation[0], (list, tuple)) and len(correlation[0]) == 3
        and isinstance(correlation[0][0], str))
    R = correlation_matrix(names, correlation) if pairs else check_correlation(correlation, list(names))
    return None if np.array_equal(R, np.eye(len(names))) else R


def resolve_covariance(sigma, covariance, correlation, names):
    """``(sigma, R)`` from either sigma (+ correlation) or a full covariance matrix."""
    if covariance is None:
        return sigma, resolve_correlation(correlation, names)
    if sigma is not None or correlation is not None:
        raise ReconciliationError("give either covariance, or sigma with an optional correlation, not both")
    s, R = split_covariance(covariance, names)
    return s, (None if np.array_equal(R, np.eye(len(names))) else R)
