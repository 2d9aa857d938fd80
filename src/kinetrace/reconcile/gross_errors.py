"""Gross-error detection on reconciliation results: global test, measurement test
with Sidak correction, and serial elimination of suspect sensors."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import stats

from ._errors import ReconciliationError
from .results import Reconciliation


@dataclass(frozen=True)
class GlobalTest:
    """Chi-square global test per step.

    Attributes
    ----------
    statistic : ndarray (T,)
        Minimised objective gamma. [-]
    dof : ndarray (T,)
        Degrees of freedom (rank of the reduced constraints). [-]
    critical : ndarray (T,)
        ``chi2.ppf(1 - alpha, dof)``; NaN where dof = 0. [-]
    p_value : ndarray (T,)
        Upper-tail probability of ``statistic``; NaN where dof = 0. [-]
    reject : ndarray (T,) of bool
        Gross error indicated (never where dof = 0).
    alpha : float
        Level of significance.
    """

    statistic: np.ndarray
    dof: np.ndarray
    critical: np.ndarray
    p_value: np.ndarray
    reject: np.ndarray
    alpha: float


def _check_alpha(alpha):
    if not 0.0 < alpha < 1.0:
        raise ValueError(f"alpha must be in (0, 1); got {alpha!r}")


def global_test(result: Reconciliation, alpha: float = 0.05) -> GlobalTest:
    """Global (chi-square) test of the reconciliation objective at every step.

    Parameters
    ----------
    result : Reconciliation
        Output of a reconciliation.
    alpha : float
        Level of significance (probability of a false alarm per step). [-]

    Returns
    -------
    GlobalTest

    References
    ----------
    .. [1] Reilly, P. M., Carpani, R. E. (1963). Application of statistical theory of
       adjustment to material balances. 13th Can. Chem. Eng. Conf., Montreal.
    .. [2] Almasy, G. A., Sztano, T. (1975). Checking and correction of measurements on
       the basis of linear system model. Problems of Control and Information Theory 4, 57-69.

    Examples
    --------
    >>> from kinetrace.reconcile import reconcile_linear
    >>> r = reconcile_linear([10.0, 6.0, 3.0], 1.0, [[1.0, -1.0, -1.0]])
    >>> g = global_test(r)
    >>> round(float(g.critical[0]), 3), bool(g.reject[0])
    (3.841, False)
    """
    _check_alpha(alpha)
    dof = np.asarray(result.dof)
    stat = np.asarray(result.objective)
    has = dof > 0
    d = np.where(has, dof, 1)
    crit = np.where(has, stats.chi2.ppf(1.0 - alpha, d), np.nan)
    p = np.where(has, stats.chi2.sf(stat, d), np.nan)
    return GlobalTest(stat, dof, crit, p, has & (stat > np.nan_to_num(crit, nan=np.inf)), alpha)


def sidak_critical_value(alpha, n_tests):
    """Two-sided standard-normal critical value with the Sidak correction.

    ``beta = 1 - (1 - alpha)**(1/n)``, ``z = Phi^-1(1 - beta/2)``.

    Parameters
    ----------
    alpha : float
        Family-wise level of significance. [-]
    n_tests : int or array_like
        Number of simultaneous tests (redundant measurements). [-]

    Returns
    -------
    float or ndarray
        Critical value of ``|z|``; NaN where ``n_tests`` is 0. [-]

    References
    ----------
    .. [1] Sidak, Z. (1967). Rectangular confidence regions for the means of
       multivariate normal distributions. J. Amer. Statist. Assoc. 62, 626-633.

    Examples
    --------
    >>> round(float(sidak_critical_value(0.05, 6)), 4)
    2.631
    """
    _check_alpha(alpha)
    n = np.asarray(n_tests, dtype=float)
    beta = 1.0 - (1.0 - alpha) ** (1.0 / np.where(n > 0, n, 1.0))
    return np.where(n > 0, stats.norm.isf(beta / 2.0), np.nan)


@dataclass(frozen=True)
class MeasurementTest:
    """Measurement test per step and sensor.

    Attributes
    ----------
    z : ndarray (T, n)
        ``|adjustment| / sd(adjustment)``; NaN for non-redundant or unmeasured. [-]
    critical : ndarray (T,)
        Sidak-corrected critical value for the redundant measurements of that step. [-]
    flagged : ndarray (T, n) of bool
        ``z > critical``.
    alpha : float
        Family-wise level of significance.
    """

    z: np.ndarray
    critical: np.ndarray
    flagged: np.ndarray
    alpha: float


def measurement_test(result: Reconciliation, alpha: float = 0.05) -> MeasurementTest:
    """Measurement test on the standardised adjustments with Sidak correction.

    With diagonal measurement covariance this statistic is the maximum-power test of
    a bias in one sensor (Mah & Tamhane 1982).

    Parameters
    ----------
    result : Reconciliation
    alpha : float
        Family-wise level of significance per step. [-]

    Returns
    -------
    MeasurementTest

    References
    ----------
    .. [1] Mah, R. S. H., Tamhane, A. C. (1982). Detection of gross errors in process
       data. AIChE J. 28(5), 828-830. https://doi.org/10.1002/aic.690280519
    .. [2] Sidak, Z. (1967). J. Amer. Statist. Assoc. 62, 626-633.

    Examples
    --------
    >>> from kinetrace.reconcile import reconcile_linear
    >>> r = reconcile_linear([10.0, 6.0, 3.0], 1.0, [[1.0, -1.0, -1.0]])
    >>> measurement_test(r).z.round(3).tolist()
    [[0.577, 0.577, 0.577]]
    """
    _check_alpha(alpha)
    z = np.abs(result.standardized_adjustment)
    n = np.sum(np.isfinite(z), axis=1)
    crit = sidak_critical_value(alpha, n)
    return MeasurementTest(z, crit, np.nan_to_num(z) > np.nan_to_num(crit, nan=np.inf)[:, None], alpha)


@dataclass(frozen=True)
class SerialElimination:
    """Sensors identified as faulty by serial elimination.

    Attributes
    ----------
    suspect : ndarray (T, n) of bool
        Sensors removed at each step.
    bias : ndarray (T, n)
        Estimated bias ``y - x_hat`` of each removed sensor, ``x_hat`` estimated from the
        other measurements; NaN where not removed or not estimable. [units of y]
    bias_sd : ndarray (T, n)
        Standard deviation of that estimate, ``sqrt(sigma^2 + var(x_hat))``; with correlated
        measurement errors it leaves out the covariance of the removed reading with the
        others' estimate, so it is then only approximate. [units of y]
    x : ndarray (T, n)
        Reconciled values after removal. [units of y]
    objective, dof : ndarray (T,)
        Global-test statistic and degrees of freedom after removal.
    passed : ndarray (T,) of bool
        Global test passes after removal (with at least one degree of freedom left).
    not_testable : ndarray (T,) of bool
        No degree of freedom is left (from the start, or after the removals): nothing can
        be tested there, so neither "passed" nor "failed" holds; the sensors removed up to
        then stay suspect, but the last removal is not confirmed by a test.
    """

    suspect: np.ndarray
    bias: np.ndarray
    bias_sd: np.ndarray
    x: np.ndarray
    objective: np.ndarray
    dof: np.ndarray
    passed: np.ndarray
    not_testable: np.ndarray

    @property
    def status(self) -> np.ndarray:
        """Outcome per step: ``"passed"``, ``"failed"`` (still rejected when the removals
        stopped) or ``"not testable"`` (no degree of freedom left)."""
        return np.where(self.not_testable, "not testable", np.where(self.passed, "passed", "failed"))

    @property
    def n_removed(self) -> np.ndarray:
        """Sensors removed per step. [-]"""
        return self.suspect.sum(axis=1)


def serial_elimination(solve, y, alpha=0.05, max_eliminations=None) -> SerialElimination:
    """Identify faulty sensors by removing, one at a time, the largest measurement-test
    statistic until the global test passes.

    The removals stop with "not testable" at a step where no degree of freedom is left
    (each removal takes at least one away), since the global test can then neither pass
    nor fail.

    Parameters
    ----------
    solve : callable
        ``solve(y_sub, rows) -> Reconciliation``: reconciles the measurements ``y_sub``
        (NaN = unmeasured) of the time steps ``rows``; e.g.
        ``lambda ys, rows: reconcile_linear(ys, sigma, A)``.
    y : array_like (T, n)
        Measurements. [any]
    alpha : float
        Level of significance of the global test and of the Sidak-corrected
        measurement test. [-]
    max_eliminations : int, optional
        Most sensors removed per step (default: n).

    Returns
    -------
    SerialElimination

    References
    ----------
    .. [1] Ripps, D. L. (1965). Adjustment of experimental data. Chem. Eng. Prog. Symp.
       Ser. 61(55), 8-13.
    .. [2] Serth, R. W., Heenan, W. A. (1986). Gross error detection and data
       reconciliation in steam-metering systems. AIChE J. 32(5), 733-742.

    Examples
    --------
    Chain of four equal flows with a +5 bias on sensor 2 (sigma 1):

    >>> from kinetrace.reconcile import reconcile_linear
    >>> A = [[1.0, -1, 0, 0], [0, 1, -1, 0], [0, 0, 1, -1]]
    >>> se = serial_elimination(lambda ys, rows: reconcile_linear(ys, 1.0, A), [[10.0, 10.1, 15.0, 9.9]])
    >>> se.suspect.tolist(), round(float(se.bias[0, 2]), 2), se.status.tolist()
    ([[False, False, True, False]], 5.0, ['passed'])
    """
    _check_alpha(alpha)
    y = np.array(y, dtype=float)
    if y.ndim == 1:
        y = y[None]
    T, n = y.shape
    max_eliminations = n if max_eliminations is None else int(max_eliminations)
    work = y.copy()
    suspect = np.zeros((T, n), bool)
    x = np.full((T, n), np.nan)
    var_x = np.full((T, n), np.nan)
    objective, dof = np.zeros(T), np.zeros(T, int)
    passed = np.zeros(T, bool)
    active = np.arange(T)
    for round_ in range(max_eliminations + 1):  # loop over elimination rounds, not time
        res = solve(work[active], active)
        if len(res) != active.size:
            raise ReconciliationError(f"solve returned {len(res)} steps for {active.size} rows")
        if round_ == 0:
            sig = np.array(res.sigma)
        x[active], var_x[active] = res.x, res.var_x
        objective[active], dof[active] = res.objective, res.dof
        testable = np.asarray(res.dof) > 0
        ok = ~global_test(res, alpha).reject & testable
        passed[active] = ok
        zabs = np.abs(res.standardized_adjustment)
        can = np.any(np.isfinite(zabs), axis=1)
        go = ~ok & can & testable
        if round_ == max_eliminations or not go.any():
            break
        worst = np.argmax(np.nan_to_num(zabs[go], nan=-1.0), axis=1)
        rows = active[go]
        work[rows, worst] = np.nan
        suspect[rows, worst] = True
        active = rows
    bias = np.where(suspect, y - x, np.nan)
    bias_sd = np.where(suspect, np.sqrt(sig**2 + var_x), np.nan)
    return SerialElimination(suspect, bias, bias_sd, x, objective, dof, passed, dof == 0)
