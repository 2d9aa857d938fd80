"""Steady-state ideal CSTR with one reaction: outlet composition and what-if inverses.

Liquid phase, constant density, perfect mixing. With the extent per unit
volume xi = (C_j - C_j0) / nu_j (the same for every species j, nu signed:
negative for reactants) the design equation is

    xi = tau * r(C(xi), T),   C_j(xi) = C_j0 + nu_j xi

so that C_B = C_B0 - (nu_B/nu_A)(C_A0 - C_A) for any co-reactant or product B
of the key reactant A. Closed forms are used where they exist:

* power law first order in the key reactant:  C_A = C_A0 / (1 + Da)
* power law second order in the key reactant: C_A = 2 C_A0 / (1 + sqrt(1 + 4 Da C_A0))
* power law first order in A and first order in a co-reactant B
  (quadratic in C_A)
* saturating, first order in A over (1 + sum K_j C_j) with every C_j linear
  in C_A and not rising as A is consumed (quadratic in C_A)

with Da = -nu_A k tau. Every other case is solved by a vectorised bracketed
root search on xi (grid scan and bisection). When the grid finds more than
one solution (multiple steady states, possible for self-inhibited saturating
laws with exponent 2 or autocatalytic orders) ``branch`` picks the
high- or low-conversion one and ``multiple`` flags it. The search grid has
65 points over the feasible extent range, so two solutions closer together
than about 1/64 of that range may be seen as one.

Caution
-------
The inverse functions (:func:`required_rate_constant`,
:func:`required_residence_time`, :func:`temperature_for_conversion`) answer
"what would it take" questions. A higher temperature or throughput changes
heat release and pressure; any change must be checked against the unit's safe
operating limits, relief and runaway studies and site management-of-change,
and defers to local codes and licensed engineering practice.
:func:`temperature_for_conversion` searches only inside the safe range it is
given and returns NaN when the target cannot be reached there.

References
----------
.. [1] Fogler, H. S. (2016). Elements of Chemical Reaction Engineering, 5th ed.
   Prentice Hall, ch. 2-5 (CSTR design equation, stoichiometric tables,
   Damkohler number).
.. [2] Levenspiel, O. (1999). Chemical Reaction Engineering, 3rd ed. Wiley,
   ch. 5 (mixed flow reactor performance equations).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np

from kinetrace.errors import KinetraceError
from kinetrace.kinetics._arrays import as_float_array, first_index, wrap
from kinetrace.kinetics._roots import bracketed_root
from kinetrace.kinetics.arrhenius import at_temperature
from kinetrace.kinetics.ratelaws import driving_force, rate

__all__ = [
    "CSTRSolution",
    "solve_cstr",
    "required_rate_constant",
    "required_residence_time",
    "temperature_for_conversion",
]


@dataclass(frozen=True)
class CSTRSolution:
    """Steady outlet of a CSTR (see :func:`solve_cstr`).

    Attributes
    ----------
    concentrations : dict of str to float, ndarray or Series
        Outlet (= reactor) concentration of every species in the feed or the
        stoichiometry. [mol/m^3]
    conversion : float, ndarray or Series
        Fractional conversion of the key reactant, 1 - C_A / C_A0. [-]
    extent : float, ndarray or Series
        Extent per unit volume of reactor effluent, xi. [mol/m^3]
    multiple : bool or ndarray of bool
        True where more than one steady state was found.
    solver : str
        ``closed_form`` or ``bisection``.
    """

    concentrations: dict[str, Any]
    conversion: Any
    extent: Any
    multiple: Any
    solver: str


def _stoich(stoichiometry: Mapping[str, float], key: str) -> dict[str, float]:
    if not isinstance(stoichiometry, Mapping) or key not in stoichiometry:
        raise KinetraceError(
            f"stoichiometry must be a mapping species -> coefficient holding the key reactant {key!r}; "
            f"got {stoichiometry!r}"
        )
    nu = {s: float(v) for s, v in stoichiometry.items()}
    if not nu[key] < 0:
        raise KinetraceError(f"key reactant {key!r} must have a negative coefficient, got {nu[key]}")
    return nu


def _species_in_law(params: Mapping[str, Any]) -> set[str]:
    names: set[str] = set()
    for p in ("orders", "reverse_orders", "adsorption"):
        names |= set(params.get(p, {}) or {})
    return names


def _feed_arrays(feed_conc, nu, params, shape):
    species = set(feed_conc) | set(nu) | _species_in_law(params)
    missing = sorted(s for s in species if s not in feed_conc and s not in nu)
    if missing:
        raise KinetraceError(
            f"species {missing} appear in the rate law but neither in feed_conc nor in the stoichiometry"
        )
    return {s: np.broadcast_to(as_float_array(feed_conc.get(s, 0.0)), shape).ravel() for s in sorted(species)}


def _closed_form(method, params, nu, key, feed, k, tau):
    """C_A by a closed form, or None when the case has none."""
    orders = dict(params.get("orders", {}))
    c_a0 = feed[key]
    da = -nu[key] * k * tau
    s = {j: nu.get(j, 0.0) / nu[key] for j in feed}  # C_j = C_j0 - s_j (C_A0 - C_A)
    if method == "power_law":
        order_a = float(orders.get(key, 0.0))
        others = {j: float(o) for j, o in orders.items() if j != key and float(o) != 0.0}
        if order_a == 1.0 and not others:
            return c_a0 / (1.0 + da)
        if order_a == 2.0 and not others:
            return 2.0 * c_a0 / (1.0 + np.sqrt(1.0 + 4.0 * da * c_a0))
        if order_a == 1.0 and len(others) == 1 and list(others.values())[0] == 1.0:
            (b,) = others
            if s[b] < 0:  # product-accelerated: several solutions possible
                return None
            m = feed[b] - s[b] * c_a0
            bq = da * m + 1.0
            with np.errstate(invalid="ignore", divide="ignore"):
                return 2.0 * c_a0 / (bq + np.sqrt(bq * bq + 4.0 * da * s[b] * c_a0))
        return None
    if method == "saturating":
        if {j: float(o) for j, o in orders.items() if float(o) != 0.0} != {key: 1.0}:
            return None
        if float(params.get("denominator_exponent", 1.0)) != 1.0:
            return None
        ads = {j: float(v) for j, v in params["adsorption"].items()}
        beta = sum(kj * s[j] for j, kj in ads.items())
        if beta < 0:
            return None
        alpha = 1.0 + sum(kj * (feed[j] - s[j] * c_a0) for j, kj in ads.items())
        # beta C^2 + (alpha + Da - beta C_A0) C - alpha C_A0 = 0, root in [0, C_A0]
        bq = alpha + da - beta * c_a0
        with np.errstate(invalid="ignore", divide="ignore"):
            return 2.0 * alpha * c_a0 / (bq + np.sqrt(bq * bq + 4.0 * beta * alpha * c_a0))
    return None


def _extent_bounds(nu, feed, reversible):
    """Extent range keeping every concentration non-negative (lo < 0 only if reversible)."""
    ref = next(iter(feed.values()))
    hi = np.full_like(ref, np.inf)
    for j, v in nu.items():
        if v < 0:
            hi = np.minimum(hi, feed[j] / -v)
    lo = np.full_like(ref, -np.inf) if reversible else np.zeros_like(ref)
    if reversible:
        for j, v in nu.items():
            if v > 0:
                lo = np.maximum(lo, -feed[j] / v)
    return lo, hi


def solve_cstr(
    method: str,
    residence_time,
    feed_conc: Mapping[str, Any],
    k,
    *,
    key: str,
    stoichiometry: Mapping[str, float],
    temperature=None,
    branch: str = "high",
    solver: str = "auto",
    **params,
) -> CSTRSolution:
    """Steady outlet concentrations and conversion of an ideal CSTR.

    Parameters
    ----------
    method : str
        Rate law (see :func:`kinetrace.kinetics.ratelaws.list_methods`).
    residence_time : float, ndarray or Series
        tau = V / Q. [s]
    feed_conc : Mapping[str, array_like]
        Feed concentration of each species (species of the stoichiometry not
        given are taken as absent from the feed). [mol/m^3]
    k : float, ndarray or Series
        Rate constant at the reactor temperature. [(mol/m^3)^(1-n)/s]
    key : str
        Key reactant (conversion is reported for it).
    stoichiometry : Mapping[str, float]
        Stoichiometric coefficients, negative for reactants; the rate law's r
        is the rate of this reaction. Species not listed are inert. [-]
    temperature : float, ndarray or Series, optional
        Reactor temperature (``reversible`` only). [K]
    branch : {"high", "low"}
        Steady state returned when several exist.
    solver : {"auto", "closed_form", "bisection"}
        ``auto`` uses a closed form where one exists.
    **params
        Rate-law parameters.

    Returns
    -------
    CSTRSolution
        Outlet concentrations, conversion, extent, multiple-solution flag.
        NaN where inputs are NaN. A law with zero order in the limiting
        reactant that cannot satisfy the balance gives complete conversion.

    References
    ----------
    .. [1] Fogler, H. S. (2016). Elements of Chemical Reaction Engineering,
       5th ed., ch. 5 (CSTR, first and second order, Damkohler number).
    .. [2] Levenspiel, O. (1999). Chemical Reaction Engineering, 3rd ed., ch. 5.

    Examples
    --------
    First order, k tau = 4: X = 4 / 5.

    >>> sol = solve_cstr("power_law", 400.0, {"A": 1000.0}, 0.01, key="A",
    ...                  stoichiometry={"A": -1, "P": 1}, orders={"A": 1})
    >>> round(sol.conversion, 6), round(sol.concentrations["P"], 6)
    (0.8, 800.0)
    """
    if branch not in ("high", "low"):
        raise KinetraceError(f"branch must be 'high' or 'low', got {branch!r}")
    if solver not in ("auto", "closed_form", "bisection"):
        raise KinetraceError(f"solver must be 'auto', 'closed_form' or 'bisection', got {solver!r}")
    nu = _stoich(stoichiometry, key)
    driving_force(method, {s: 1.0 for s in set(feed_conc) | set(nu) | _species_in_law(params)},
                  temperature=temperature if temperature is not None else 300.0, **params)  # validate
    index = first_index(residence_time, k, temperature, *feed_conc.values())
    shape = np.broadcast_shapes(
        np.shape(as_float_array(residence_time)),
        np.shape(as_float_array(k)),
        np.shape(as_float_array(temperature if temperature is not None else 0.0)),
        *[np.shape(as_float_array(v)) for v in feed_conc.values()],
    )
    tau = np.broadcast_to(as_float_array(residence_time), shape).ravel()
    kk = np.broadcast_to(as_float_array(k), shape).ravel()
    temp = None if temperature is None else np.broadcast_to(as_float_array(temperature), shape).ravel()
    feed = _feed_arrays(feed_conc, nu, params, shape)
    c_a = None if solver == "bisection" else _closed_form(method, params, nu, key, feed, kk, tau)
    if c_a is None and solver == "closed_form":
        raise KinetraceError(f"no closed form for rate law {method!r} with these orders; use solver='auto'")
    multiple = np.zeros(tau.shape, dtype=bool)
    if c_a is not None:
        xi = (feed[key] - c_a) / -nu[key]
        used = "closed_form"
    else:
        xi, multiple = _solve_numeric(method, params, nu, feed, kk, tau, temp, branch)
        used = "bisection"
    bad = ~(np.isfinite(tau) & np.isfinite(kk) & np.all([np.isfinite(v) for v in feed.values()], axis=0))
    if temp is not None:
        bad |= ~np.isfinite(temp)
    xi = np.where(bad, np.nan, xi)
    conc = {j: feed[j] + nu.get(j, 0.0) * xi for j in feed}
    with np.errstate(invalid="ignore", divide="ignore"):
        conversion = 1.0 - conc[key] / feed[key]

    def out(v):
        return wrap(np.asarray(v).reshape(shape), index)

    mult = multiple.reshape(shape)
    return CSTRSolution(
        concentrations={j: out(v) for j, v in conc.items()},
        conversion=out(conversion),
        extent=out(xi),
        multiple=bool(mult) if mult.ndim == 0 else mult,
        solver=used,
    )


def _solve_numeric(method, params, nu, feed, k, tau, temp, branch):
    reversible = method == "reversible"
    lo, hi = _extent_bounds(nu, feed, reversible)
    lo = np.where(np.isfinite(lo), lo, 0.0)
    hi = np.where(np.isfinite(hi), hi, np.nan)

    def balance(xi):
        conc = {j: feed[j] + nu.get(j, 0.0) * xi for j in feed}
        with np.errstate(invalid="ignore"):
            conc = {j: np.where(np.abs(c) < 1e-12 * (1.0 + np.abs(feed[j])), 0.0, c) for j, c in conc.items()}
        r = rate(method, conc, k, temperature=temp, **params)
        return tau * np.asarray(r) - xi

    root, n_roots = bracketed_root(balance, lo, hi, pick="last" if branch == "high" else "first")
    # no sign change: balance positive at the upper bound -> complete conversion
    f_hi = balance(hi[None, :])[0]
    root = np.where(np.isnan(root) & (f_hi > 0), hi, root)
    return root, n_roots > 1


def _target_state(feed_conc, conversion, key, nu, params):
    feed = {s: as_float_array(v) for s, v in feed_conc.items()}
    for s in set(nu) | _species_in_law(params):
        feed.setdefault(s, np.asarray(0.0))
    x = as_float_array(conversion)
    xi = x * feed[key] / -nu[key]
    conc = {j: feed[j] + nu.get(j, 0.0) * xi for j in feed}
    return xi, conc


def _design_quotient(method, other, feed_conc, conversion, key, stoichiometry, temperature, params):
    """xi / (other * g(C_target)): k from tau, or tau from k (design equation is tau k g = xi)."""
    nu = _stoich(stoichiometry, key)
    xi, conc = _target_state(feed_conc, conversion, key, nu, params)
    g = as_float_array(driving_force(method, conc, temperature=temperature, **params))
    index = first_index(other, conversion, temperature, *feed_conc.values())
    with np.errstate(divide="ignore", invalid="ignore"):
        out = np.where(g > 0, xi / (as_float_array(other) * np.where(g > 0, g, 1.0)), np.nan)
    return wrap(out, index)


def required_rate_constant(
    method, residence_time, feed_conc, conversion, *, key, stoichiometry, temperature=None, **params
):
    """Rate constant that gives a target conversion at a given residence time.

    k = xi / (tau g(C)), from the design equation with C at the target
    conversion (exact, no iteration).

    Parameters
    ----------
    method : str
        Rate law.
    residence_time : float, ndarray or Series
        tau. [s]
    feed_conc : Mapping[str, array_like]
        Feed concentrations. [mol/m^3]
    conversion : float, ndarray or Series
        Target conversion of the key reactant, 0..1. [-]
    key, stoichiometry, temperature, **params
        As in :func:`solve_cstr`.

    Returns
    -------
    float, ndarray or Series
        Required k. [(mol/m^3)^(1-n)/s] NaN where the target is at or beyond
        equilibrium (driving force not positive) or the inputs are non-physical.

    References
    ----------
    .. [1] Fogler, H. S. (2016). Elements of Chemical Reaction Engineering, 5th ed., ch. 2.

    Examples
    --------
    >>> round(required_rate_constant("power_law", 400.0, {"A": 1000.0}, 0.8, key="A",
    ...       stoichiometry={"A": -1}, orders={"A": 1}), 6)
    0.01
    """
    return _design_quotient(method, residence_time, feed_conc, conversion, key, stoichiometry, temperature, params)


def required_residence_time(method, k, feed_conc, conversion, *, key, stoichiometry, temperature=None, **params):
    """Residence time that gives a target conversion, tau = xi / (k g(C)).

    Parameters
    ----------
    method : str
        Rate law.
    k : float, ndarray or Series
        Rate constant at the reactor temperature. [(mol/m^3)^(1-n)/s]
    feed_conc : Mapping[str, array_like]
        Feed concentrations. [mol/m^3]
    conversion : float, ndarray or Series
        Target conversion of the key reactant. [-]
    key, stoichiometry, temperature, **params
        As in :func:`solve_cstr`.

    Returns
    -------
    float, ndarray or Series
        tau. [s] Multiply by the volumetric flow for the volume. NaN where the
        target cannot be reached (at or beyond equilibrium).

    References
    ----------
    .. [1] Fogler, H. S. (2016). Elements of Chemical Reaction Engineering, 5th ed., ch. 2.

    Examples
    --------
    >>> round(required_residence_time("power_law", 0.01, {"A": 1000.0}, 0.8, key="A",
    ...       stoichiometry={"A": -1}, orders={"A": 1}), 6)
    400.0
    """
    return _design_quotient(method, k, feed_conc, conversion, key, stoichiometry, temperature, params)


def temperature_for_conversion(
    method,
    residence_time,
    feed_conc,
    conversion,
    *,
    k_ref,
    activation_energy,
    reference_temperature,
    safe_range,
    key,
    stoichiometry,
    law_params: Mapping[str, Any] | None = None,
    **params,
):
    """Lowest temperature inside ``safe_range`` that gives a target conversion.

    Solves tau k(T) g(C_target, T) = xi_target for T by a bracketed search
    restricted to ``safe_range`` (the unit's configured safe operating limits).

    Parameters
    ----------
    method : str
        Rate law.
    residence_time : float or ndarray
        tau. [s]
    feed_conc : Mapping[str, array_like]
        Feed concentrations. [mol/m^3]
    conversion : float or ndarray
        Target conversion of the key reactant. [-]
    k_ref : float or ndarray
        Rate constant at ``reference_temperature`` (activity included). [(mol/m^3)^(1-n)/s]
    activation_energy : float
        Ea. [J/mol]
    reference_temperature : float
        T_ref. [K]
    safe_range : tuple of float
        (T_min, T_max) from the unit's configuration. [K] Required: the search
        never leaves it.
    law_params : Mapping, optional
        Rate-law parameters, merged with ``**params``; needed for names that
        clash with this function's own arguments (the van 't Hoff
        ``reference_temperature`` of ``reversible``).
    key, stoichiometry, **params
        As in :func:`solve_cstr`.

    Returns
    -------
    float or ndarray
        Temperature. [K] NaN when the target is not reachable inside the safe
        range. Any change of set point must still be checked against the
        unit's relief and runaway studies and site management-of-change, and
        defers to local codes and licensed practice.

    References
    ----------
    .. [1] Fogler, H. S. (2016). Elements of Chemical Reaction Engineering, 5th ed., ch. 3-5.

    Examples
    --------
    First order, Ea = 80 kJ/mol, k(350 K) = 0.01 1/s, tau = 400 s: X = 0.8 at 350 K.

    >>> round(temperature_for_conversion("power_law", 400.0, {"A": 1000.0}, 0.8,
    ...       k_ref=0.01, activation_energy=80e3, reference_temperature=350.0,
    ...       safe_range=(320.0, 360.0), key="A", stoichiometry={"A": -1},
    ...       orders={"A": 1}), 3)
    350.0
    >>> import math
    >>> math.isnan(temperature_for_conversion("power_law", 400.0, {"A": 1000.0}, 0.99,
    ...       k_ref=0.01, activation_energy=80e3, reference_temperature=350.0,
    ...       safe_range=(320.0, 360.0), key="A", stoichiometry={"A": -1},
    ...       orders={"A": 1}))
    True
    """
    params = {**(law_params or {}), **params}
    try:
        t_min, t_max = (float(v) for v in safe_range)
    except (TypeError, ValueError):
        raise KinetraceError(f"safe_range must be (T_min, T_max) in K, got {safe_range!r}") from None
    if not (0.0 < t_min < t_max and np.isfinite(t_max)):
        raise KinetraceError(f"safe_range must satisfy 0 < T_min < T_max, got {safe_range!r}")
    nu = _stoich(stoichiometry, key)
    xi, conc = _target_state(feed_conc, conversion, key, nu, params)
    shape = np.broadcast_shapes(np.shape(xi), np.shape(as_float_array(residence_time)),
                                np.shape(as_float_array(k_ref)), *[np.shape(c) for c in conc.values()])
    xi_f = np.broadcast_to(xi, shape).ravel()
    tau_f = np.broadcast_to(as_float_array(residence_time), shape).ravel()
    kref_f = np.broadcast_to(as_float_array(k_ref), shape).ravel()
    conc_f = {j: np.broadcast_to(c, shape).ravel() for j, c in conc.items()}

    def residual(t):
        k = at_temperature(kref_f, t, activation_energy, reference_temperature)
        g = driving_force(method, conc_f, temperature=t, **params)
        return tau_f * np.asarray(k) * np.asarray(g) - xi_f

    n = xi_f.size
    root, _ = bracketed_root(residual, np.full(n, t_min), np.full(n, t_max), pick="first")
    root = root.reshape(shape)
    return float(root) if root.ndim == 0 else root
