"""Extents of reaction, conversion, yield and selectivity from component flows.

All functions are vectorised over time: molar-flow arrays have shape
(n_times, n_species), with NaN where a species is not measured at a time.

For an open system at steady state the component balances are
``F_out,i - F_in,i = sum_j nu_ij xi_j`` with xi_j the extent rate of reaction j
[mol/s] (Aris 1965; Fogler, Elements of Chemical Reaction Engineering, Ch. 3
on stoichiometric tables). With more measured species than reactions the
extents follow by ordinary least squares; with fewer, they are not
determined and come out NaN.
"""

from __future__ import annotations

import numpy as np


def extents_from_flows(flow_in, flow_out, nu) -> np.ndarray:
    """Extent rates of reaction from inlet and outlet component molar flows.

    Parameters
    ----------
    flow_in, flow_out : array_like, shape (n_times, n_species)
        Component molar flows in and out. NaN marks an unmeasured species. [mol/s]
    nu : array_like, shape (n_species, n_reactions)
        Stoichiometric matrix.

    Returns
    -------
    ndarray, shape (n_times, n_reactions)
        Extent rates xi. [mol/s] NaN where the measured species do not determine
        every extent (the measured rows of nu lack full column rank).

    Notes
    -----
    Solved by least squares on the measured rows, one solve per distinct pattern of
    missing species (a handful), not per time step.

    References
    ----------
    .. [1] Aris, R. (1965). Introduction to the Analysis of Chemical Reactors. Prentice-Hall.

    >>> nu = np.array([[-1.0, -2.0], [1.0, 0.0], [0.0, 1.0]])   # A -> P ; 2 A -> D
    >>> f_in = np.array([[10.0, 0.0, 0.0]])
    >>> f_out = np.array([[3.0, 5.0, 1.0]])
    >>> extents_from_flows(f_in, f_out, nu).round(12).tolist()
    [[5.0, 1.0]]
    """
    f_in = np.atleast_2d(np.asarray(flow_in, dtype=float))
    f_out = np.atleast_2d(np.asarray(flow_out, dtype=float))
    nu = np.asarray(nu, dtype=float)
    delta = f_out - f_in
    n_t, n_s = delta.shape
    n_r = nu.shape[1]
    out = np.full((n_t, n_r), np.nan)
    measured = np.isfinite(delta)
    patterns, inverse = np.unique(measured, axis=0, return_inverse=True)
    inverse = np.asarray(inverse).reshape(-1)
    for p, mask in enumerate(patterns):
        rows = np.flatnonzero(inverse == p)
        sub = nu[mask]
        if sub.shape[0] < n_r or np.linalg.matrix_rank(sub) < n_r:
            continue
        out[rows] = delta[np.ix_(rows, np.flatnonzero(mask))] @ np.linalg.pinv(sub).T
    return out


def conversion(flow_in_key, flow_out_key):
    """Fractional conversion of the key reactant, X = (F_A,in - F_A,out) / F_A,in.

    Parameters
    ----------
    flow_in_key, flow_out_key : float or array_like
        Molar flow of the key reactant in and out. [mol/s]

    Returns
    -------
    float or ndarray
        Conversion X. [-] NaN where the inlet flow is not positive.

    References
    ----------
    .. [1] Fogler, H. S. Elements of Chemical Reaction Engineering, Ch. 2 (definition of X).

    >>> float(conversion(10.0, 2.0))
    0.8
    """
    f_in = np.asarray(flow_in_key, dtype=float)
    f_out = np.asarray(flow_out_key, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        x = np.where(f_in > 0, (f_in - f_out) / np.where(f_in > 0, f_in, 1.0), np.nan)
    return x


def product_yield(flow_in_key, flow_in_product, flow_out_product, nu_key: float, nu_product: float):
    """Yield of product P on key reactant A fed, corrected for stoichiometry.

    ``Y = (F_P,out - F_P,in) / F_A,in * |nu_A| / nu_P``: the fraction of the
    A fed that became P (Levenspiel 1999, Ch. 7, overall yield on A fed).

    Parameters
    ----------
    flow_in_key : float or array_like
        Molar flow of A in. [mol/s]
    flow_in_product, flow_out_product : float or array_like
        Molar flow of P in and out. [mol/s]
    nu_key, nu_product : float
        Stoichiometric coefficients of A (negative) and P (positive) in the main reaction.

    Returns
    -------
    float or ndarray
        Yield. [-]

    >>> float(product_yield(10.0, 0.0, 6.0, -1.0, 1.0))
    0.6
    """
    f_a = np.asarray(flow_in_key, dtype=float)
    formed = np.asarray(flow_out_product, dtype=float) - np.asarray(flow_in_product, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(f_a > 0, formed / np.where(f_a > 0, f_a, 1.0) * abs(nu_key) / nu_product, np.nan)


def selectivity(flow_in_key, flow_out_key, flow_in_product, flow_out_product, nu_key: float, nu_product: float):
    """Overall fractional yield (selectivity) of P: the fraction of the A *consumed* that became P.

    ``S = (F_P,out - F_P,in) / (F_A,in - F_A,out) * |nu_A| / nu_P``
    (Levenspiel 1999, Ch. 7, overall fractional yield Phi). Equals yield / conversion.

    Returns
    -------
    float or ndarray
        Selectivity. [-] NaN where no A was consumed.

    >>> float(selectivity(10.0, 2.0, 0.0, 6.0, -1.0, 1.0))
    0.75
    """
    consumed = np.asarray(flow_in_key, dtype=float) - np.asarray(flow_out_key, dtype=float)
    formed = np.asarray(flow_out_product, dtype=float) - np.asarray(flow_in_product, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(consumed > 0, formed / np.where(consumed > 0, consumed, 1.0) * abs(nu_key) / nu_product, np.nan)
