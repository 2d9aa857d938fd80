"""Propagation of measurement uncertainty to apparent rate constants.

Two methods for a result y_t = f(x_t) computed at each time t from measured
inputs x_t with covariance Sigma (constant, or one matrix per time):

* :func:`delta_method` - first-order (linearised) propagation,
  Var(y_t) = J_t Sigma_t J_t', J by central finite differences (2 m
  evaluations of f over the whole record for m inputs);
* :func:`monte_carlo` - sampling x from a multivariate normal distribution and
  taking the spread of f (the GUM Supplement 1 approach), to check the
  linearisation where f is strongly nonlinear (e.g. low conversion, where
  the rate is a small difference of two large concentrations).

:func:`k_ref_from_steady_balance` is the usual f: the steady balance
r = Q (C_in - C) / V (per unit stoichiometric coefficient of the key
reactant), the rate law solved for k, and the Arrhenius move to T_ref.

References
----------
.. [1] JCGM 100:2008. Evaluation of measurement data - Guide to the expression
   of uncertainty in measurement (GUM), sec. 5 (law of propagation of uncertainty).
.. [2] JCGM 101:2008. Supplement 1 to the GUM - Propagation of distributions
   using a Monte Carlo method.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from typing import Any

import numpy as np

from kinetrace.errors import KinetraceError
from kinetrace.kinetics._arrays import as_float_array
from kinetrace.kinetics.activity import apparent_reference_rate_constant

__all__ = ["delta_method", "monte_carlo", "k_ref_from_steady_balance", "STEADY_BALANCE_INPUTS"]

STEADY_BALANCE_INPUTS = ("c_in", "c_out", "flow", "volume", "temperature")


def _prepare(values: Mapping[str, Any], covariance) -> tuple[list[str], np.ndarray, np.ndarray]:
    names = list(values)
    arrays = [as_float_array(values[k]) for k in names]
    shape = np.broadcast_shapes(*[a.shape for a in arrays])
    n = int(np.prod(shape)) if shape else 1
    x = np.stack([np.broadcast_to(a, shape).ravel() for a in arrays], axis=-1)  # (n, m)
    m = len(names)
    if isinstance(covariance, Mapping):
        unknown = sorted(set(covariance) - set(names))
        if unknown:
            raise KinetraceError(f"standard deviations given for unknown input(s) {unknown}; inputs are {names}")
        sd = np.stack([np.broadcast_to(as_float_array(covariance.get(k, 0.0)), shape).ravel() for k in names], -1)
        cov = np.einsum("ni,ij->nij", sd**2, np.eye(m))
    else:
        cov = np.asarray(covariance, dtype=float)
        if cov.shape == (m, m):
            cov = np.broadcast_to(cov, (n, m, m))
        elif cov.shape != (n, m, m):
            raise KinetraceError(
                f"covariance must be ({m}, {m}) or ({n}, {m}, {m}) for inputs {names}, got {cov.shape}"
            )
    return names, x, cov


def _call(func, names, x, shape=None):
    kwargs = {k: x[..., i] for i, k in enumerate(names)}
    return np.asarray(func(**kwargs), dtype=float)


def delta_method(func: Callable[..., Any], values: Mapping[str, Any], covariance, *, rel_step: float = 1e-6):
    """Linearised propagation of input covariance through ``func``, per time step.

    Parameters
    ----------
    func : callable
        ``func(**inputs)`` returning an array of shape (n,), vectorised over time.
    values : Mapping[str, array_like]
        Measured inputs by name, each of shape (n,) or scalar. [units of each]
    covariance : array (m, m), array (n, m, m) or Mapping[str, float or array]
        Input covariance in the order of ``values``; a mapping gives standard
        deviations of independent inputs (missing names: exact). [units^2 / units]
    rel_step : float
        Relative finite-difference step. [-]

    Returns
    -------
    value : ndarray, shape (n,)
        f at the measured inputs. [unit of f]
    std : ndarray, shape (n,)
        Standard uncertainty of f. [unit of f]

    References
    ----------
    .. [1] JCGM 100:2008 (GUM), eq. 13.

    Examples
    --------
    Uncertainty of a ratio a/b with 1 % and 2 % independent errors: about 2.24 %.

    >>> v, s = delta_method(lambda a, b: a / b, {"a": 10.0, "b": 5.0}, {"a": 0.1, "b": 0.1})
    >>> round(float(s[0] / v[0]), 4)
    0.0224
    """
    names, x, cov = _prepare(values, covariance)
    y = _call(func, names, x).ravel()
    n, m = x.shape
    jac = np.empty((n, m))
    for i in range(m):  # loop over inputs, not time steps
        h = rel_step * np.maximum(np.abs(x[:, i]), 1e-12)
        xp, xm = x.copy(), x.copy()
        xp[:, i] += h
        xm[:, i] -= h
        jac[:, i] = (_call(func, names, xp).ravel() - _call(func, names, xm).ravel()) / (2 * h)
    var = np.einsum("ni,nij,nj->n", jac, cov, jac)
    return y, np.sqrt(np.clip(var, 0.0, None))


def monte_carlo(func: Callable[..., Any], values: Mapping[str, Any], covariance, *, n_draws: int = 2000, seed=None):
    """Monte Carlo propagation of normally distributed input errors, per time step.

    Parameters
    ----------
    func, values, covariance
        As in :func:`delta_method`.
    n_draws : int
        Draws per time step (memory n_draws x n x m floats).
    seed : int or numpy Generator, optional
        Random seed.

    Returns
    -------
    mean : ndarray, shape (n,)
        Mean of f over the draws (NaN draws ignored). [unit of f]
    std : ndarray, shape (n,)
        Standard deviation of f over the draws. [unit of f]
    n_valid : ndarray of int, shape (n,)
        Draws that gave a finite f (non-physical draws give NaN and are counted out).

    References
    ----------
    .. [1] JCGM 101:2008 (GUM Supplement 1), sec. 7.

    Examples
    --------
    >>> mean, sd, ok = monte_carlo(lambda a, b: a / b, {"a": 10.0, "b": 5.0},
    ...                            {"a": 0.1, "b": 0.1}, n_draws=20000, seed=1)
    >>> bool(abs(sd[0] / mean[0] - 0.0224) < 0.001), int(ok[0])
    (True, 20000)
    """
    names, x, cov = _prepare(values, covariance)
    rng = np.random.default_rng(seed)
    n, m = x.shape
    # Cholesky of each covariance (eigen fallback for singular ones, e.g. exact inputs)
    w, v = np.linalg.eigh(cov)
    factor = v * np.sqrt(np.clip(w, 0.0, None))[:, None, :]  # (n, m, m), factor @ factor.T = cov
    z = rng.standard_normal((n_draws, n, m))
    draws = x[None, :, :] + np.einsum("nij,dnj->dni", factor, z)
    y = _call(func, names, draws).reshape(n_draws, n)
    finite = np.isfinite(y)
    with np.errstate(invalid="ignore"):
        mean = np.nanmean(np.where(finite, y, np.nan), axis=0)
        std = np.nanstd(np.where(finite, y, np.nan), axis=0, ddof=1)
    return mean, std, finite.sum(axis=0)


def k_ref_from_steady_balance(
    c_in,
    c_out,
    flow,
    volume,
    temperature,
    *,
    method: str,
    key: str,
    activation_energy: float,
    reference_temperature: float,
    key_coefficient: float = -1.0,
    other_conc: Mapping[str, Any] | None = None,
    law_params: Mapping[str, Any] | None = None,
    **params,
):
    """Apparent k at T_ref from one steady-state balance on the key reactant.

    r = Q (C_in - C) / (V |nu_key|);  k = r / g(C, T);  k_ref = k exp[(Ea/R)(1/T - 1/T_ref)]

    Parameters
    ----------
    c_in, c_out : array_like
        Feed and reactor concentration of the key reactant. [mol/m^3]
    flow : array_like
        Volumetric flow through the reactor. [m^3/s]
    volume : array_like
        Liquid holdup. [m^3]
    temperature : array_like
        Reactor temperature. [K]
    method : str
        Rate law.
    key : str
        Key reactant species name in the rate law.
    activation_energy : float
        Ea. [J/mol]
    reference_temperature : float
        T_ref. [K]
    key_coefficient : float
        Stoichiometric coefficient of the key reactant (negative). [-]
    other_conc : Mapping[str, array_like], optional
        Concentrations of the other species in the rate law (taken as exact). [mol/m^3]
    law_params : Mapping, optional
        Rate-law parameters, merged with ``**params``; needed for names that
        clash with this function's own arguments (the van 't Hoff
        ``reference_temperature`` of ``reversible``).
    **params
        Rate-law parameters.

    Returns
    -------
    ndarray
        k_ref. [(mol/m^3)^(1-n)/s]

    References
    ----------
    .. [1] Levenspiel, O. (1999). Chemical Reaction Engineering, 3rd ed., ch. 5.

    Examples
    --------
    >>> k = k_ref_from_steady_balance(1000.0, 200.0, 1e-3, 2.0, 350.0, method="power_law",
    ...     key="A", activation_energy=0.0, reference_temperature=350.0, orders={"A": 1})
    >>> round(float(k), 6)
    0.002
    """
    params = {**(law_params or {}), **params}
    rate = as_float_array(flow) * (as_float_array(c_in) - as_float_array(c_out)) / (
        as_float_array(volume) * abs(float(key_coefficient))
    )
    conc = {key: as_float_array(c_out)}
    for s, v in (other_conc or {}).items():
        conc[s] = as_float_array(v)
    k_ref = apparent_reference_rate_constant(
        method, rate, conc, as_float_array(temperature),
        activation_energy=activation_energy, reference_temperature=reference_temperature, **params,
    )
    return np.asarray(k_ref, dtype=float)
