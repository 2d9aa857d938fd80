"""The CSTR design equation: rates of reaction back-calculated from flows and concentrations.

For a CSTR at steady state the mole balance of species i is
``0 = Q_in C_i,in - Q_out C_i + V R_i`` with R_i the net rate of formation of i
(Fogler, Elements of Chemical Reaction Engineering, Ch. 1 and 2, the CSTR design
equation ``V = F_A0 X / (-r_A)``). Solved for the rate it gives
``R_i = (Q_out C_i - Q_in C_i,in) / V``; for the key reactant ``-r_A = F_A0 X / V``.
All functions take arrays in SI and are vectorised over time. The same balance per species,
with unequal flows, is :func:`kinetrace.kinetics.balances.consumption_rate_steady`.
"""

from __future__ import annotations

import numpy as np


def key_reactant_rate(molar_feed_rate, conversion, volume):
    """Consumption rate of the key reactant from the CSTR design equation, -r_A = F_A0 X / V.

    Parameters
    ----------
    molar_feed_rate : float or array_like
        Molar feed rate of the key reactant F_A0. [mol/s]
    conversion : float or array_like
        Conversion of the key reactant X. [-]
    volume : float or array_like
        Liquid volume V. [m^3]

    Returns
    -------
    float or ndarray
        -r_A. [mol/(m^3 s)]

    References
    ----------
    .. [1] Fogler, H. S. Elements of Chemical Reaction Engineering, Eq. 2-13 (CSTR design equation).

    >>> float(key_reactant_rate(2.0, 0.8, 4.0))
    0.4
    """
    v = np.asarray(volume, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.asarray(molar_feed_rate, dtype=float) * np.asarray(conversion, dtype=float) / np.where(v > 0, v, np.nan)


def residence_time(volume, flow_in):
    """Space time tau = V / Q_in. [s]

    >>> float(residence_time(10.0, 0.002))
    5000.0
    """
    q = np.asarray(flow_in, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.asarray(volume, dtype=float) / np.where(q > 0, q, np.nan)
