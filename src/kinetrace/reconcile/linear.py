"""Linear data reconciliation by weighted least squares, batched over time."""

from __future__ import annotations

import numpy as np

from ._errors import ReconciliationError
from ._patterns import check_inputs, solve_patterns
from .results import Reconciliation
from .covariance import resolve_covariance
from .uncertainty import resolve_sigma

_COV = ("diag", "full")


def _labels(given, n, stem):
    if given is None:
        return tuple(f"{stem}[{j}]" for j in range(n))
    given = tuple(str(g) for g in given)
    if len(given) != n:
        raise ReconciliationError(f"{len(given)} {stem} names given for {n} entries")
    return given


def build_result(y, sigma, status, out, names, unknown_names, constraint_names,
                 source, converged=None, iterations=None, extra=None) -> Reconciliation:
    """Wrap the arrays of :func:`._patterns.solve_patterns` in a :class:`Reconciliation`."""
    T = y.shape[0]
    measured = status == 0
    adj = np.where(measured | (status == 2), out["x"] - y, np.nan)
    return Reconciliation(
        y=y, sigma=sigma, x=out["x"], var_x=out["var_x"], adjustment=adj,
        var_adjustment=out["var_adj"], z=out["z"], var_z=out["var_z"], measured=measured,
        missing=status == 1,
        redundant=out["redundant"], observable_x=out["observable_x"],
        observable_z=out["observable_z"], objective=out["objective"], dof=out["dof"],
        imbalance=out["imbalance"], imbalance_sd=out["imbalance_sd"],
        imbalance_scale=out["imbalance_scale"],
        converged=np.ones(T, bool) if converged is None else converged,
        iterations=np.ones(T, int) if iterations is None else iterations,
        sigma_source=source, names=names, unknown_names=unknown_names,
        constraint_names=constraint_names, cov_x=out.get("cov_x"), cov_z=out.get("cov_z"),
        extra=extra or {},
    )


def reconcile_linear(y, sigma, A_y, A_z=None, b=None, *, cov="diag", names=None,
                     unknown_names=None, constraint_names=None, correlation=None,
                     covariance=None) -> Reconciliation:
    """Reconcile measurements against linear constraints ``A_y x + A_z z = b``.

    Minimises ``(y - x)' V^-1 (y - x)`` at every time step subject to the constraints, in
    closed form, with ``V = diag(sigma) R diag(sigma)`` (``R`` = identity unless a
    ``correlation`` or a full ``covariance`` is given). Unmeasured variables ``z`` are eliminated by a
    projection ``P`` with ``P A_z = 0`` and estimated afterwards where observable.
    A NaN in ``y`` makes that variable unmeasured at that step only; a sigma of 0 makes
    it known exactly.

    Parameters
    ----------
    y : array_like (n,) or (T, n)
        Measurements; NaN = missing at that step. [any consistent units]
    sigma : array_like (n,) or (T, n), or SigmaEstimate, or None
        Standard deviations of the measurement errors, > 0, or 0 for exact values; None
        when ``covariance`` is given. [units of y]
    A_y : array_like (m, n)
        Constraint coefficients of the measured variables. [constraint unit / unit of y]
    A_z : array_like (m, nz), optional
        Constraint coefficients of the unmeasured variables.
    b : array_like (m,) or (T, m), optional
        Right-hand side, default 0. [constraint unit]
    cov : {"diag", "full"}
        Return only variances (default) or also full covariance matrices.
    names, unknown_names, constraint_names : sequence of str, optional
        Labels used in results and messages.
    correlation : array_like (n, n), or mapping ``{(name_a, name_b): rho}``, optional
        Correlation matrix of the measurement errors, or named correlated pairs (the rest
        uncorrelated); checked symmetric positive definite (errors name the variables). [-]
    covariance : array_like (n, n), optional
        Full covariance matrix of the measurement errors, instead of ``sigma`` and
        ``correlation``. [units of y squared]

    Returns
    -------
    Reconciliation
        Reconciled values, adjustments, variances, unmeasured estimates, objective
        (global-test statistic) and degrees of freedom per step.

    References
    ----------
    .. [1] Kuehn, D. R., Davidson, H. (1961). Computer control II. Mathematics of
       control. Chem. Eng. Prog. 57(6), 44-47.
    .. [2] Crowe, C. M., Garcia Campos, Y. A., Hrymak, A. (1983). Reconciliation of
       process flow rates by matrix projection. Part I: linear case. AIChE J. 29(6),
       881-888. https://doi.org/10.1002/aic.690290602

    Examples
    --------
    Splitter F1 = F2 + F3, all measured with equal sigma:

    >>> r = reconcile_linear([10.0, 6.0, 3.0], 1.0, [[1.0, -1.0, -1.0]])
    >>> r.x.round(4).tolist()
    [[9.6667, 6.3333, 3.3333]]
    >>> round(float(r.objective[0]), 4), int(r.dof[0])
    (0.3333, 1)

    The two outlet meters share a transmitter, errors correlated 0.5:

    >>> rc = reconcile_linear([10.0, 6.0, 3.0], 1.0, [[1.0, -1.0, -1.0]], names=["F1", "F2", "F3"],
    ...                       correlation={("F2", "F3"): 0.5})
    >>> rc.x.round(4).tolist()
    [[9.75, 6.375, 3.375]]
    """
    if cov not in _COV:
        raise ValueError(f"unknown cov {cov!r}; allowed: {', '.join(_COV)}")
    sigma, source = resolve_sigma(sigma)
    A_y = np.asarray(A_y, dtype=float)
    if A_y.ndim != 2:
        raise ReconciliationError(f"A_y must be 2-D (m, n); got shape {A_y.shape}")
    m, n = A_y.shape
    names = _labels(names, n, "x")
    sigma, corr = resolve_covariance(sigma, covariance, correlation, names)
    y, sigma, status = check_inputs(y, sigma, names)
    if y.shape[1] != n:
        raise ReconciliationError(f"y has {y.shape[1]} variables but A_y has {n} columns")
    if A_z is not None:
        A_z = np.asarray(A_z, dtype=float)
        if A_z.ndim != 2 or A_z.shape[0] != m:
            raise ReconciliationError(f"A_z must be ({m}, nz); got shape {A_z.shape}")
    nz = 0 if A_z is None else A_z.shape[1]
    if b is not None:
        b = np.asarray(b, dtype=float)
        if b.shape[-1] != m or b.ndim > 2 or (b.ndim == 2 and b.shape[0] != y.shape[0]):
            raise ReconciliationError(f"b must be ({m},) or ({y.shape[0]}, {m}); got {b.shape}")
    b_tl = None if b is None else (b if b.ndim == 1 else b.T)  # kernel layout: time last
    out = solve_patterns(y, sigma, status, A_y, A_z, b_tl, full_cov=cov == "full", corr=corr)
    return build_result(y, sigma, status, out, names, _labels(unknown_names, nz, "z"),
                        _labels(constraint_names, m, "balance"), source,
                        extra=None if corr is None else {"correlation": corr})
