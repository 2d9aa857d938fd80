"""Arrhenius temperature dependence of rate constants.

The rate constant is written in the reference-temperature form

    k(T) = k_ref * exp[-(Ea/R) (1/T - 1/T_ref)]

which is the Arrhenius law k = A exp(-Ea/(R T)) with A = k_ref exp(Ea/(R T_ref)).
The reference form keeps k_ref and Ea nearly uncorrelated when T_ref lies inside
the data, which matters for fits and for normalising plant data to one
temperature.

References
----------
.. [1] Arrhenius, S. (1889). Uber die Reaktionsgeschwindigkeit bei der Inversion
   von Rohrzucker durch Sauren. Z. Phys. Chem. 4, 226-248.
.. [2] Fogler, H. S. (2016). Elements of Chemical Reaction Engineering, 5th ed.
   Prentice Hall, ch. 3.
.. [3] Tiesinga, E. et al. (2021). CODATA recommended values of the fundamental
   physical constants: 2018. Rev. Mod. Phys. 93, 025010.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
from scipy import stats

from kinetrace.errors import DataQualityError, KinetraceError
from kinetrace.kinetics._arrays import as_float_array, first_index, wrap

__all__ = [
    "R_GAS",
    "ArrheniusFit",
    "normalise_to_reference",
    "at_temperature",
    "fit_arrhenius",
]

R_GAS = 8.314462618  # J/(mol K), CODATA 2018 (exact in the 2019 SI)


def _check_positive_scalar(value: float, name: str) -> float:
    value = float(value)
    if not np.isfinite(value) or value <= 0.0:
        raise KinetraceError(f"{name} must be a finite positive number, got {value!r}")
    return value


def _arrhenius_factor(temperature, activation_energy, reference_temperature):
    """exp[(Ea/R)(1/T - 1/T_ref)] as an ndarray; T <= 0 gives NaN."""
    t = as_float_array(temperature)
    ea = as_float_array(activation_energy)
    t_ref = as_float_array(reference_temperature)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        t = np.where(t > 0.0, t, np.nan)
        t_ref = np.where(t_ref > 0.0, t_ref, np.nan)
        return np.exp(ea / R_GAS * (1.0 / t - 1.0 / t_ref))


def normalise_to_reference(k, temperature, activation_energy, reference_temperature):
    """Rate constant measured at ``temperature``, moved to ``reference_temperature``.

    k_ref = k * exp[(Ea/R) (1/T - 1/T_ref)]

    Parameters
    ----------
    k : float, ndarray or Series
        Rate constant at the measured temperature. [any unit; kept]
    temperature : float, ndarray or Series
        Temperature at which ``k`` was measured. [K]
    activation_energy : float or array_like
        Activation energy Ea. [J/mol]
    reference_temperature : float or array_like
        Reference temperature T_ref. [K]

    Returns
    -------
    float, ndarray or Series
        Rate constant at T_ref, same unit as ``k``. A Series input keeps its
        index. NaN propagates; a non-positive temperature gives NaN.

    References
    ----------
    .. [1] Fogler, H. S. (2016). Elements of Chemical Reaction Engineering,
       5th ed., eq. 3-21.

    Examples
    --------
    A reaction with Ea = 50 kJ/mol runs about 1.9 times slower at 300 K
    than at 310 K:

    >>> round(normalise_to_reference(1.0, 300.0, 50e3, 310.0), 4)
    1.9091
    """
    index = first_index(k, temperature)
    factor = _arrhenius_factor(temperature, activation_energy, reference_temperature)
    return wrap(as_float_array(k) * factor, index, getattr(k, "name", None))


def at_temperature(k_ref, temperature, activation_energy, reference_temperature):
    """Rate constant at ``temperature`` from its value at ``reference_temperature``.

    k(T) = k_ref * exp[-(Ea/R) (1/T - 1/T_ref)]  (inverse of
    :func:`normalise_to_reference`).

    Parameters
    ----------
    k_ref : float, ndarray or Series
        Rate constant at T_ref. [any unit; kept]
    temperature : float, ndarray or Series
        Temperature wanted. [K]
    activation_energy : float or array_like
        Activation energy Ea. [J/mol]
    reference_temperature : float or array_like
        Reference temperature T_ref. [K]

    Returns
    -------
    float, ndarray or Series
        Rate constant at T, same unit as ``k_ref``; Series keep their index;
        NaN propagates; a non-positive temperature gives NaN.

    References
    ----------
    .. [1] Fogler, H. S. (2016). Elements of Chemical Reaction Engineering,
       5th ed., eq. 3-21.

    Examples
    --------
    >>> round(at_temperature(1.9091, 300.0, 50e3, 310.0), 3)
    1.0
    """
    index = first_index(k_ref, temperature)
    factor = _arrhenius_factor(temperature, activation_energy, reference_temperature)
    return wrap(as_float_array(k_ref) / factor, index, getattr(k_ref, "name", None))


@dataclass(frozen=True)
class ArrheniusFit:
    """Result of an ordinary least-squares Arrhenius fit.

    Attributes
    ----------
    activation_energy : float
        Ea. [J/mol]
    activation_energy_se : float
        Standard error of Ea. [J/mol]
    activation_energy_ci95 : tuple of float
        95 % confidence interval of Ea (Student t, n - 2 dof). [J/mol]
    k_ref : float
        Rate constant at ``reference_temperature``. [unit of k]
    k_ref_se : float
        Standard error of k_ref by the delta method, k_ref * se(ln k_ref). [unit of k]
    k_ref_ci95 : tuple of float
        95 % interval of k_ref, exp of the interval of ln k_ref (asymmetric). [unit of k]
    pre_exponential : float
        A = k_ref exp(Ea / (R T_ref)). [unit of k]
    ln_pre_exponential_se : float
        Standard error of ln A. [-]
    reference_temperature : float
        T_ref used. [K]
    correlation : float
        Correlation coefficient between the estimates of ln k_ref and Ea. [-]
    residual_std : float
        Standard deviation of the ln k residuals (n - 2 dof). [-]
    r_squared : float
        Coefficient of determination of the ln k on 1/T regression. [-]
    n_used : int
        Points used.
    excluded : ndarray of bool
        Points not used because k or T was NaN or not positive (flagged, counted).
    """

    activation_energy: float
    activation_energy_se: float
    activation_energy_ci95: tuple[float, float]
    k_ref: float
    k_ref_se: float
    k_ref_ci95: tuple[float, float]
    pre_exponential: float
    ln_pre_exponential_se: float
    reference_temperature: float
    correlation: float
    residual_std: float
    r_squared: float
    n_used: int
    excluded: np.ndarray = field(repr=False)

    @property
    def n_excluded(self) -> int:
        """Number of points excluded (NaN or non-positive k or T)."""
        return int(np.count_nonzero(self.excluded))


def fit_arrhenius(temperature, k, reference_temperature=None) -> ArrheniusFit:
    """Fit Ea and k_ref by ordinary least squares of ln k on 1/T.

    ln k = ln k_ref - (Ea/R) (1/T - 1/T_ref)

    Parameters
    ----------
    temperature : array_like or Series
        Temperatures of the measurements. [K]
    k : array_like or Series
        Rate constants (any one unit, all positive). [unit of k]
    reference_temperature : float, optional
        T_ref. [K] Default: 1 / mean(1/T) of the points used, which makes the
        estimates of ln k_ref and Ea uncorrelated.

    Returns
    -------
    ArrheniusFit
        Estimates with standard errors, 95 % intervals and diagnostics. Points
        where k or T is NaN or not positive are excluded and counted
        (``excluded``, ``n_excluded``).

    Raises
    ------
    DataQualityError
        Fewer than three usable points, or all at one temperature.

    References
    ----------
    .. [1] Fogler, H. S. (2016). Elements of Chemical Reaction Engineering,
       5th ed., sec. 3.3.
    .. [2] Draper, N. R., Smith, H. (1998). Applied Regression Analysis, 3rd ed.
       Wiley, ch. 1 (straight-line fit, standard errors).

    Examples
    --------
    Data of Fogler's Example 3-1 (benzene diazonium chloride):

    >>> fit = fit_arrhenius([313, 319, 323, 328, 333],
    ...                     [0.00043, 0.00103, 0.00180, 0.00355, 0.00717])
    >>> round(fit.activation_energy / 1e3, 1)
    121.5
    """
    t = as_float_array(temperature).ravel()
    kk = as_float_array(k).ravel()
    if t.shape != kk.shape:
        raise KinetraceError(
            f"temperature and k must have the same length, got {t.size} and {kk.size}"
        )
    with np.errstate(invalid="ignore"):
        excluded = ~(np.isfinite(t) & np.isfinite(kk) & (t > 0.0) & (kk > 0.0))
    use = ~excluded
    n = int(np.count_nonzero(use))
    if n < 3:
        raise DataQualityError(
            f"Arrhenius fit needs at least 3 points with finite positive k and T; "
            f"{n} of {t.size} usable ({int(excluded.sum())} excluded)"
        )
    inv_t = 1.0 / t[use]
    y = np.log(kk[use])
    if np.ptp(inv_t) == 0.0:
        raise DataQualityError("Arrhenius fit needs at least two different temperatures")
    if reference_temperature is None:
        t_ref = 1.0 / float(np.mean(inv_t))
    else:
        t_ref = _check_positive_scalar(reference_temperature, "reference_temperature")
    x = inv_t - 1.0 / t_ref
    design = np.column_stack([np.ones(n), x])
    coef, *_ = np.linalg.lstsq(design, y, rcond=None)
    resid = y - design @ coef
    dof = n - 2
    s2 = float(resid @ resid) / dof
    cov = s2 * np.linalg.inv(design.T @ design)
    ln_k_ref, slope = float(coef[0]), float(coef[1])
    se_ln_k_ref, se_slope = float(np.sqrt(cov[0, 0])), float(np.sqrt(cov[1, 1]))
    t_crit = float(stats.t.ppf(0.975, dof))
    ea = -slope * R_GAS
    ea_se = se_slope * R_GAS
    k_ref = float(np.exp(ln_k_ref))
    # ln A = ln k_ref + (Ea/R)/T_ref = ln k_ref - slope / T_ref
    var_ln_a = cov[0, 0] + cov[1, 1] / t_ref**2 - 2.0 * cov[0, 1] / t_ref
    denom = np.sqrt(cov[0, 0] * cov[1, 1])
    corr = float(-cov[0, 1] / denom) if denom > 0 else 0.0  # sign: Ea = -R * slope
    ss_tot = float(np.sum((y - y.mean()) ** 2))
    return ArrheniusFit(
        activation_energy=ea,
        activation_energy_se=ea_se,
        activation_energy_ci95=(ea - t_crit * ea_se, ea + t_crit * ea_se),
        k_ref=k_ref,
        k_ref_se=k_ref * se_ln_k_ref,
        k_ref_ci95=(
            float(np.exp(ln_k_ref - t_crit * se_ln_k_ref)),
            float(np.exp(ln_k_ref + t_crit * se_ln_k_ref)),
        ),
        pre_exponential=float(np.exp(ln_k_ref - slope / t_ref)),
        ln_pre_exponential_se=float(np.sqrt(max(var_ln_a, 0.0))),
        reference_temperature=t_ref,
        correlation=corr,
        residual_std=float(np.sqrt(s2)),
        r_squared=1.0 - float(resid @ resid) / ss_tot if ss_tot > 0 else float("nan"),
        n_used=n,
        excluded=excluded,
    )
