"""Rate laws for a single reaction, chosen by name (``method=``).

Every law here is linear in the rate constant, r = k * g(C, T), so the same
driving force g serves both directions: :func:`rate` multiplies by k and
:func:`apparent_rate_constant` divides a measured rate by g.

``r`` is the rate of the reaction [mol/(m^3 s)], i.e. the consumption rate of a
reactant with stoichiometric coefficient -1. ``k`` is in SI,
[(mol/m^3)^(1-n)/s] with n the overall order of the numerator.

Methods
-------
``power_law``
    r = k prod_i C_i^a_i. Params: ``orders={species: a_i}``.
``saturating``
    r = k prod_i C_i^a_i / (1 + sum_j K_j C_j)^m  (Langmuir-Hinshelwood /
    Hougen-Watson form). Params: ``orders``, ``adsorption={species: K_j}``
    [m^3/mol], ``denominator_exponent=m`` (default 1).
``reversible``
    r = k (prod_i C_i^a_i - prod_j C_j^b_j / K_eq(T)) with the van 't Hoff
    equation K_eq(T) = K_eq,ref exp[-(dH_r/R)(1/T - 1/T_ref)].
    Params: ``orders``, ``reverse_orders``, ``equilibrium_constant`` (K_eq at
    T_ref, in [(mol/m^3)^(sum b - sum a)]), ``reaction_enthalpy`` [J/mol]
    (default 0), ``reference_temperature`` [K]; ``temperature`` is required.

Non-physical inputs
-------------------
A negative concentration (analyser noise around zero) gives NaN for that
sample, as does a non-positive temperature, and :func:`apparent_rate_constant`
gives NaN where the driving force is zero (k undefined). NaN is returned
silently (no RuntimeWarning); callers count NaN to see how many samples were
unusable. A negative apparent k (measured rate and driving force of opposite
sign, e.g. noise near equilibrium) is returned as is, so that it can be seen
and flagged downstream.

References
----------
.. [1] Fogler, H. S. (2016). Elements of Chemical Reaction Engineering, 5th ed.
   Prentice Hall, ch. 3 (power laws, reversible reactions) and ch. 10
   (Langmuir-Hinshelwood rate laws).
.. [2] Hougen, O. A., Watson, K. M. (1947). Chemical Process Principles,
   Part III: Kinetics and Catalysis. Wiley.
.. [3] Levenspiel, O. (1999). Chemical Reaction Engineering, 3rd ed. Wiley,
   ch. 2-3 (van 't Hoff equation, reversible kinetics).
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np

from kinetrace.errors import KinetraceError
from kinetrace.kinetics._arrays import as_float_array, first_index, wrap
from kinetrace.kinetics.arrhenius import at_temperature

__all__ = [
    "list_methods",
    "rate",
    "apparent_rate_constant",
    "driving_force",
    "equilibrium_constant_at",
]


@dataclass(frozen=True)
class _RateLaw:
    name: str
    description: str
    required: tuple[str, ...]
    optional: Mapping[str, Any]
    needs_temperature: bool
    driving: Callable[..., np.ndarray]


def _conc_array(conc: Mapping[str, Any], species: str, method: str) -> np.ndarray:
    try:
        value = conc[species]
    except KeyError:
        raise KinetraceError(
            f"rate law {method!r} needs the concentration of {species!r}; "
            f"conc holds {sorted(conc)}"
        ) from None
    c = as_float_array(value)
    with np.errstate(invalid="ignore"):
        return np.where(c >= 0.0, c, np.nan)  # negative conc from noise -> NaN


def _product(conc, orders: Mapping[str, float], method: str) -> np.ndarray:
    """prod_i C_i^a_i (1.0 when ``orders`` is empty); negative C -> NaN."""
    out = np.asarray(1.0)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        for species, order in orders.items():
            out = out * _conc_array(conc, species, method) ** float(order)
    return out


def _check_orders(orders, name: str, method: str) -> Mapping[str, float]:
    if not isinstance(orders, Mapping) or (name == "orders" and not orders):
        raise KinetraceError(
            f"rate law {method!r}: {name} must be a non-empty mapping species -> order, "
            f"got {orders!r}"
        )
    for species, order in orders.items():
        if not np.isfinite(float(order)):
            raise KinetraceError(f"rate law {method!r}: {name}[{species!r}] = {order!r} is not finite")
    return orders


def _power_law(conc, temperature, *, orders):
    return _product(conc, _check_orders(orders, "orders", "power_law"), "power_law")


def _saturating(conc, temperature, *, orders, adsorption, denominator_exponent=1.0):
    num = _product(conc, _check_orders(orders, "orders", "saturating"), "saturating")
    if not isinstance(adsorption, Mapping):
        raise KinetraceError(
            f"rate law 'saturating': adsorption must be a mapping species -> K [m^3/mol], "
            f"got {adsorption!r}"
        )
    denom = np.asarray(1.0)
    for species, k_ads in adsorption.items():
        if not float(k_ads) >= 0.0:
            raise KinetraceError(
                f"rate law 'saturating': adsorption[{species!r}] = {k_ads!r} must be >= 0 [m^3/mol]"
            )
        denom = denom + float(k_ads) * _conc_array(conc, species, "saturating")
    with np.errstate(invalid="ignore", over="ignore"):
        return num / denom ** float(denominator_exponent)


def equilibrium_constant_at(
    equilibrium_constant, temperature, reaction_enthalpy, reference_temperature
):
    """Equilibrium constant at T by the integrated van 't Hoff equation.

    K_eq(T) = K_eq,ref * exp[-(dH_r/R) (1/T - 1/T_ref)]

    Parameters
    ----------
    equilibrium_constant : float
        K_eq at T_ref. [(mol/m^3)^(sum of product orders - sum of reactant orders)]
    temperature : float, ndarray or Series
        Temperature. [K]
    reaction_enthalpy : float
        Standard reaction enthalpy dH_r, taken constant. [J/mol]
    reference_temperature : float
        T_ref. [K]

    Returns
    -------
    float, ndarray or Series
        K_eq(T), same unit as ``equilibrium_constant``; T <= 0 gives NaN.

    References
    ----------
    .. [1] Levenspiel, O. (1999). Chemical Reaction Engineering, 3rd ed., eq. 2.34
       (van 't Hoff equation, from memory).

    Examples
    --------
    An exothermic reaction (dH = -50 kJ/mol) has a smaller K at higher T:

    >>> round(equilibrium_constant_at(10.0, 320.0, -50e3, 300.0), 3)
    2.857
    """
    # van 't Hoff has the Arrhenius form with Ea -> dH_r
    return at_temperature(equilibrium_constant, temperature, reaction_enthalpy, reference_temperature)


def _reversible(
    conc,
    temperature,
    *,
    orders,
    reverse_orders,
    equilibrium_constant,
    reference_temperature,
    reaction_enthalpy=0.0,
):
    fwd = _product(conc, _check_orders(orders, "orders", "reversible"), "reversible")
    rev = _product(conc, _check_orders(reverse_orders, "reverse_orders", "reversible"), "reversible")
    k_eq_ref = float(equilibrium_constant)
    if not (np.isfinite(k_eq_ref) and k_eq_ref > 0.0):
        raise KinetraceError(
            f"rate law 'reversible': equilibrium_constant must be finite and > 0, got {equilibrium_constant!r}"
        )
    t_ref = float(reference_temperature)
    if not (np.isfinite(t_ref) and t_ref > 0.0):
        raise KinetraceError(
            f"rate law 'reversible': reference_temperature must be finite and > 0 [K], got {reference_temperature!r}"
        )
    k_eq = as_float_array(
        equilibrium_constant_at(k_eq_ref, as_float_array(temperature), float(reaction_enthalpy), t_ref)
    )
    with np.errstate(invalid="ignore", divide="ignore"):
        return fwd - rev / k_eq


_LAWS: dict[str, _RateLaw] = {
    law.name: law
    for law in (
        _RateLaw("power_law", "r = k prod C_i^a_i", ("orders",), {}, False, _power_law),
        _RateLaw(
            "saturating",
            "r = k prod C_i^a_i / (1 + sum K_j C_j)^m (Langmuir-Hinshelwood / Hougen-Watson)",
            ("orders", "adsorption"),
            {"denominator_exponent": 1.0},
            False,
            _saturating,
        ),
        _RateLaw(
            "reversible",
            "r = k (prod C_i^a_i - prod C_j^b_j / K_eq(T)), van 't Hoff K_eq(T)",
            ("orders", "reverse_orders", "equilibrium_constant", "reference_temperature"),
            {"reaction_enthalpy": 0.0},
            True,
            _reversible,
        ),
    )
}


def list_methods() -> list[str]:
    """Names of the available rate laws.

    Returns
    -------
    list of str
        Method names accepted by :func:`rate` and :func:`apparent_rate_constant`.

    Examples
    --------
    >>> list_methods()
    ['power_law', 'reversible', 'saturating']
    """
    return sorted(_LAWS)


def _get_law(method: str) -> _RateLaw:
    try:
        return _LAWS[method]
    except (KeyError, TypeError):
        raise KinetraceError(
            f"unknown rate law method {method!r}; allowed: {', '.join(list_methods())}"
        ) from None


def driving_force(method: str, conc: Mapping[str, Any], *, temperature=None, **params):
    """Driving force g(C, T) of a rate law, so that r = k * g.

    Parameters
    ----------
    method : str
        Rate-law name, see :func:`list_methods`.
    conc : Mapping[str, array_like]
        Species name -> concentration. [mol/m^3]
    temperature : float, ndarray or Series, optional
        Reactor temperature, needed by ``reversible``. [K]
    **params
        Parameters of the method (see module docstring).

    Returns
    -------
    float, ndarray or Series
        g. [(mol/m^3)^n], n the overall numerator order. NaN for negative
        concentrations.

    References
    ----------
    .. [1] Fogler, H. S. (2016). Elements of Chemical Reaction Engineering,
       5th ed., ch. 3.

    Examples
    --------
    >>> driving_force("power_law", {"A": 2.0, "B": 3.0}, orders={"A": 1, "B": 2})
    18.0
    """
    law = _get_law(method)
    allowed = set(law.required) | set(law.optional)
    unknown = sorted(set(params) - allowed)
    missing = [p for p in law.required if p not in params]
    if unknown or missing:
        raise KinetraceError(
            f"rate law {method!r}: "
            + (f"unknown parameter(s) {unknown}; " if unknown else "")
            + (f"missing parameter(s) {missing}; " if missing else "")
            + f"required {list(law.required)}, optional {sorted(law.optional)}"
        )
    if law.needs_temperature and temperature is None:
        raise KinetraceError(f"rate law {method!r} needs temperature= [K]")
    kwargs = {**law.optional, **params}
    index = first_index(temperature, *conc.values())
    return wrap(law.driving(conc, temperature, **kwargs), index)


def rate(method: str, conc: Mapping[str, Any], k, *, temperature=None, **params):
    """Rate of reaction from a named rate law.

    Parameters
    ----------
    method : str
        ``power_law``, ``saturating`` or ``reversible`` (see :func:`list_methods`).
    conc : Mapping[str, array_like]
        Species name -> concentration in the reactor. [mol/m^3]
    k : float, ndarray or Series
        Rate constant at the reactor temperature. [(mol/m^3)^(1-n)/s]
    temperature : float, ndarray or Series, optional
        Reactor temperature (``reversible`` only). [K]
    **params
        Parameters of the method (module docstring).

    Returns
    -------
    float, ndarray or Series
        Rate of reaction r. [mol/(m^3 s)] NaN where a concentration is
        negative. Series inputs give a Series with the same index.

    Raises
    ------
    KinetraceError
        Unknown method (the message lists the allowed ones), unknown or missing
        parameter, species missing from ``conc``.

    References
    ----------
    .. [1] Fogler, H. S. (2016). Elements of Chemical Reaction Engineering,
       5th ed., ch. 3 and 10.
    .. [2] Hougen, O. A., Watson, K. M. (1947). Chemical Process Principles,
       Part III. Wiley.

    Examples
    --------
    Second order in A, k = 1e-4 m^3/(mol s), C_A = 100 mol/m^3:

    >>> rate("power_law", {"A": 100.0}, 1e-4, orders={"A": 2})
    1.0

    Saturating in A, K_A = 0.01 m^3/mol:

    >>> rate("saturating", {"A": 100.0}, 0.02, orders={"A": 1}, adsorption={"A": 0.01})
    1.0
    """
    g = driving_force(method, conc, temperature=temperature, **params)
    index = first_index(g, k)
    return wrap(as_float_array(k) * as_float_array(g), index)


def apparent_rate_constant(method: str, rate, conc: Mapping[str, Any], *, temperature=None, **params):
    """Rate constant solved from a measured rate, k = r / g(C, T).

    Parameters
    ----------
    method : str
        Rate-law name (see :func:`list_methods`).
    rate : float, ndarray or Series
        Measured rate of reaction. [mol/(m^3 s)]
    conc : Mapping[str, array_like]
        Species name -> concentration in the reactor. [mol/m^3]
    temperature : float, ndarray or Series, optional
        Reactor temperature (``reversible`` only). [K]
    **params
        Parameters of the method.

    Returns
    -------
    float, ndarray or Series
        Apparent rate constant. [(mol/m^3)^(1-n)/s] NaN where a concentration
        is negative or the driving force is zero; no warnings are emitted.

    References
    ----------
    .. [1] Fogler, H. S. (2016). Elements of Chemical Reaction Engineering,
       5th ed., ch. 5 (analysis of rate data).

    Examples
    --------
    >>> apparent_rate_constant("power_law", 1.0, {"A": 100.0}, orders={"A": 2})
    0.0001
    >>> import math
    >>> math.isnan(apparent_rate_constant("power_law", 1.0, {"A": 0.0}, orders={"A": 1}))
    True
    """
    g = as_float_array(driving_force(method, conc, temperature=temperature, **params))
    index = first_index(rate, temperature, *conc.values())
    with np.errstate(divide="ignore", invalid="ignore"):
        k = np.where(g != 0.0, as_float_array(rate) / np.where(g != 0.0, g, 1.0), np.nan)
    k = np.where(np.isnan(g), np.nan, k)
    return wrap(k, index)
