"""Result containers of :mod:`kinetrace.reconcile`.

All arrays carry a leading time axis of length T, even for a single time step.
Units are those of the inputs (SI inside kinetrace: m^3/s, mol/m^3, mol/s).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np


@dataclass(frozen=True)
class Reconciliation:
    """Reconciled values of one batch of time steps.

    Attributes
    ----------
    y : ndarray (T, n)
        Measurements as given; NaN where missing. [input units]
    sigma : ndarray (T, n)
        Measurement standard deviations used. [input units]
    x : ndarray (T, n)
        Reconciled values. Where a measurement was missing this is the estimate from
        the balances, NaN if that variable is unobservable at that step. [input units]
    var_x : ndarray (T, n)
        Variance of ``x``. [input units squared]
    adjustment : ndarray (T, n)
        ``x - y``; NaN where not measured. [input units]
    var_adjustment : ndarray (T, n)
        Variance of the adjustment under the no-gross-error hypothesis; zero for
        non-redundant measurements, NaN where not measured. [input units squared]
    z : ndarray (T, nz)
        Estimates of the unmeasured variables; NaN where unobservable. [their units]
    var_z : ndarray (T, nz)
        Variance of ``z``. [their units squared]
    measured : ndarray (T, n) of bool
        Whether each variable was measured (finite value, sigma > 0) at each step.
    missing : ndarray (T, n) of bool
        Value was NaN at that step (treated as unmeasured there; never dropped).
    redundant : ndarray (T, n) of bool
        Measured and redundant (its column of P A_y is non-zero).
    observable_x : ndarray (T, n) of bool
        Value is determined (measured, or missing but observable).
    observable_z : ndarray (T, nz) of bool
        Unmeasured variable is observable.
    objective : ndarray (T,)
        Minimised weighted sum of squares, equal to the global-test statistic. [-]
    dof : ndarray (T,) of int
        Degrees of freedom (rank of the reduced constraints). [-]
    imbalance : ndarray (T, m)
        Imbalance of each constraint at the raw measurements with the unmeasured at
        their estimates. [constraint units]
    imbalance_sd : ndarray (T, m)
        Its expected standard deviation from the measurement uncertainties. [constraint units]
    imbalance_scale : ndarray (T, m)
        Throughput of each constraint (half the sum of the absolute terms) used for the
        relative imbalance. [constraint units]
    converged : ndarray (T,) of bool
        Solution converged (always True for linear problems).
    iterations : ndarray (T,) of int
        Linearisations used (1 for linear problems).
    sigma_source : str
        ``"given"`` or a description of how sigma was estimated.
    names, unknown_names, constraint_names : tuple of str
        Labels of the variables, unmeasured unknowns and constraints.
    cov_x, cov_z : ndarray or None
        Full covariance matrices (T, n, n) and (T, nz, nz) when requested.
    """

    y: np.ndarray
    sigma: np.ndarray
    x: np.ndarray
    var_x: np.ndarray
    adjustment: np.ndarray
    var_adjustment: np.ndarray
    z: np.ndarray
    var_z: np.ndarray
    measured: np.ndarray
    missing: np.ndarray
    redundant: np.ndarray
    observable_x: np.ndarray
    observable_z: np.ndarray
    objective: np.ndarray
    dof: np.ndarray
    imbalance: np.ndarray
    imbalance_sd: np.ndarray
    imbalance_scale: np.ndarray
    converged: np.ndarray
    iterations: np.ndarray
    sigma_source: str = "given"
    names: tuple = ()
    unknown_names: tuple = ()
    constraint_names: tuple = ()
    cov_x: np.ndarray | None = None
    cov_z: np.ndarray | None = None
    extra: dict = field(default_factory=dict)

    @property
    def standardized_adjustment(self) -> np.ndarray:
        """Adjustment divided by its standard deviation, ``(x - y) / sd``; NaN where
        not measured or not redundant. [-]"""
        sd = np.sqrt(self.var_adjustment)
        ok = self.redundant & (sd > 0)
        return np.where(ok, self.adjustment / np.where(ok, sd, 1.0), np.nan)

    @property
    def relative_imbalance(self) -> np.ndarray:
        """Imbalance divided by the throughput of each constraint. [-]"""
        s = self.imbalance_scale
        return np.where(s > 0, self.imbalance / np.where(s > 0, s, 1.0), np.nan)

    @property
    def standardized_imbalance(self) -> np.ndarray:
        """Imbalance divided by its expected standard deviation; NaN where that is zero. [-]"""
        s = self.imbalance_sd
        return np.where(s > 0, self.imbalance / np.where(s > 0, s, 1.0), np.nan)

    @property
    def missing_counts(self) -> dict:
        """Number of missing steps per variable name (only those with any). [-]"""
        counts = self.missing.sum(axis=0)
        return {nm: int(c) for nm, c in zip(self.names, counts) if c}

    def __len__(self) -> int:
        return self.x.shape[0]
