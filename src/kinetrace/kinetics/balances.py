"""Reaction rates back-calculated from reactor material balances.

Species balance on a stirred tank of holdup V (perfect mixing, liquid phase):

    d(V C_A)/dt = Q_in C_A,in - Q_out C_A + r_A V

so the consumption rate of A is

    -r_A = (Q_in C_A,in - Q_out C_A) / V - dC_A/dt - (C_A / V) dV/dt   (dynamic form)
    -r_A = (Q_in C_A,in - Q_out C_A) / V                                (steady form)

and the steady form with Q_in = Q_out = Q is the CSTR design equation
-r_A = (C_A,in - C_A) / tau. With several reactions the rate of reaction j
follows from its extent rate: r_j = xi_j / V.

Derivatives are taken with a Savitzky-Golay filter (local least-squares
polynomial of order ``polyorder`` over ``window`` samples). Window length
trades noise against lag and bias: the noise of the derivative falls roughly
as window^-1.5 (white measurement noise), while a longer window smooths
real fast changes (a feed step is spread over about one window, and at the
end of the record the derivative comes from a polynomial fitted to the last
window, i.e. it lags). A window of a fraction of the residence time is a
sensible start; check it on a simulated step (see tests/kinetics).

References
----------
.. [1] Fogler, H. S. (2016). Elements of Chemical Reaction Engineering, 5th ed.,
   ch. 1 (general mole balance) and ch. 13 (unsteady CSTR operation).
.. [2] Savitzky, A., Golay, M. J. E. (1964). Smoothing and differentiation of
   data by simplified least squares procedures. Anal. Chem. 36(8), 1627-1639.
   https://doi.org/10.1021/ac60214a047
.. [3] Aris, R. (1965). Introduction to the Analysis of Chemical Reactors.
   Prentice-Hall (extents of reaction).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from scipy import signal

from kinetrace.errors import DataQualityError, KinetraceError
from kinetrace.kinetics._arrays import as_float_array, first_index

__all__ = [
    "sample_interval_of",
    "savgol_derivative",
    "consumption_rate_steady",
    "consumption_rate_dynamic",
    "rates_from_extents",
]


def _column(value, n_cols):
    """Broadcast a per-time quantity against a (n, m) block."""
    arr = as_float_array(value)
    return arr[:, None] if (arr.ndim == 1 and n_cols is not None) else arr


def _wrap_like(result, *inputs):
    """Return ``result`` as DataFrame/Series when one of the inputs is one."""
    result = np.asarray(result, dtype=float)
    for v in inputs:
        if isinstance(v, pd.DataFrame) and result.ndim == 2 and result.shape == v.shape:
            return pd.DataFrame(result, index=v.index, columns=v.columns)
    index = first_index(*inputs)
    if index is not None and result.ndim == 1 and result.shape[0] == len(index):
        return pd.Series(result, index=index)
    return float(result) if result.ndim == 0 else result


def sample_interval_of(index, rtol: float = 0.01) -> float:
    """Sampling interval of an evenly spaced DatetimeIndex.

    Parameters
    ----------
    index : DatetimeIndex
        Time stamps, increasing.
    rtol : float
        Allowed relative spread of the intervals. [-]

    Returns
    -------
    float
        Interval. [s]

    Raises
    ------
    DataQualityError
        Fewer than two stamps, or intervals not even within ``rtol`` (the
        message gives the first uneven position).

    Examples
    --------
    >>> sample_interval_of(pd.date_range("2026-01-01", periods=4, freq="30s"))
    30.0
    """
    if not isinstance(index, pd.DatetimeIndex) or len(index) < 2:
        raise DataQualityError("need a DatetimeIndex with at least two time stamps to find the sampling interval")
    dt = np.diff(np.asarray((index - index[0]).total_seconds(), dtype=float))
    med = float(np.median(dt))
    bad = np.flatnonzero(np.abs(dt - med) > rtol * med)
    if med <= 0 or bad.size:
        where = index[bad[0] + 1] if bad.size else index[0]
        raise DataQualityError(
            f"samples are not evenly spaced (median interval {med} s); first uneven step ends at {where}; "
            "resample to an even grid before differentiating"
        )
    return med


def savgol_derivative(x, sample_interval: float | None = None, *, window: int = 11, polyorder: int = 2):
    """First time derivative by a Savitzky-Golay filter.

    Parameters
    ----------
    x : array_like, Series or DataFrame
        Evenly sampled signal(s), time along axis 0. [unit of x]
    sample_interval : float, optional
        Sampling interval. [s] Default: from the DatetimeIndex of ``x``.
    window : int
        Odd window length, > polyorder. [samples]
    polyorder : int
        Order of the local polynomial.

    Returns
    -------
    ndarray, Series or DataFrame
        dx/dt. [unit of x / s] NaN spreads over the window around a NaN sample.

    References
    ----------
    .. [1] Savitzky, A., Golay, M. J. E. (1964). Anal. Chem. 36(8), 1627-1639.

    Examples
    --------
    >>> t = np.arange(20) * 10.0
    >>> savgol_derivative(3.0 + 0.5 * t, 10.0, window=5).round(12)[[0, 10, 19]].tolist()
    [0.5, 0.5, 0.5]
    """
    if sample_interval is None:
        if not isinstance(x, (pd.Series, pd.DataFrame)):
            raise KinetraceError("savgol_derivative: give sample_interval [s] or a Series with a DatetimeIndex")
        sample_interval = sample_interval_of(x.index)
    window = int(window)
    if window % 2 == 0 or window <= polyorder:
        raise KinetraceError(f"savgol window must be odd and larger than polyorder ({polyorder}), got {window}")
    arr = np.asarray(x, dtype=float)
    if arr.shape[0] < window:
        raise DataQualityError(f"savgol window {window} is longer than the record ({arr.shape[0]} samples)")
    d = signal.savgol_filter(arr, window, polyorder, deriv=1, delta=float(sample_interval), axis=0, mode="interp")
    return _wrap_like(d, x)


def consumption_rate_steady(c_in, c_out, volume, flow_in, flow_out=None):
    """Consumption rate of a species from the steady balance (design equation form).

    -r_A = (Q_in C_A,in - Q_out C_A) / V

    Parameters
    ----------
    c_in : array_like, Series or DataFrame
        Feed concentration. [mol/m^3]
    c_out : array_like, Series or DataFrame
        Reactor (= outlet) concentration. [mol/m^3]
    volume : float or array_like
        Liquid holdup V. [m^3]
    flow_in : float or array_like
        Feed volumetric flow Q_in. [m^3/s]
    flow_out : float or array_like, optional
        Outlet flow Q_out. [m^3/s] Default Q_in (constant density and level).

    Returns
    -------
    float, ndarray, Series or DataFrame
        -r_A: positive for a reactant consumed, negative for a product
        formed. [mol/(m^3 s)]

    References
    ----------
    .. [1] Levenspiel, O. (1999). Chemical Reaction Engineering, 3rd ed., eq. 5.11.

    Examples
    --------
    Levenspiel (1999) Example 5.1 (from memory): 1 L/min through 1 L, A falls from
    0.10 to 0.02 mol/L: -r_A = 0.08 mol/(L min).

    >>> round(consumption_rate_steady(100.0, 20.0, 1e-3, 1e-3 / 60) * 60 / 1e3, 6)
    0.08
    """
    n_cols = c_out.shape[1] if np.ndim(c_out) == 2 else None
    q_in = _column(flow_in, n_cols)
    q_out = q_in if flow_out is None else _column(flow_out, n_cols)
    v = _column(volume, n_cols)
    with np.errstate(divide="ignore", invalid="ignore"):
        out = (q_in * as_float_array(c_in) - q_out * as_float_array(c_out)) / np.where(v > 0, v, np.nan)
    return _wrap_like(out, c_out, c_in)


def consumption_rate_dynamic(
    c_in,
    c_out,
    volume,
    flow_in,
    flow_out=None,
    *,
    sample_interval: float | None = None,
    window: int = 11,
    polyorder: int = 2,
):
    """Consumption rate of a species from the unsteady balance.

    -r_A = (Q_in C_A,in - Q_out C_A) / V - dC_A/dt - (C_A / V) dV/dt

    Parameters
    ----------
    c_in : array_like, Series or DataFrame
        Feed concentration. [mol/m^3]
    c_out : array_like, Series or DataFrame
        Reactor concentration, evenly sampled. [mol/m^3]
    volume : float or array_like
        Liquid holdup V (a constant means dV/dt = 0). [m^3]
    flow_in : float or array_like
        Feed flow. [m^3/s]
    flow_out : float or array_like, optional
        Outlet flow. [m^3/s] Default Q_in.
    sample_interval : float, optional
        Sampling interval. [s] Default: from the DatetimeIndex of ``c_out``.
    window, polyorder : int
        Savitzky-Golay window [samples] and order (see the module notes on the
        noise/lag trade-off).

    Returns
    -------
    ndarray, Series or DataFrame
        -r_A. [mol/(m^3 s)]

    References
    ----------
    .. [1] Fogler, H. S. (2016). Elements of Chemical Reaction Engineering, 5th ed., ch. 13.
    .. [2] Savitzky, A., Golay, M. J. E. (1964). Anal. Chem. 36(8), 1627-1639.

    Examples
    --------
    Batch-like check: no flow, C falling at 0.1 mol/(m^3 s):

    >>> c = 50.0 - 0.1 * np.arange(30.0)
    >>> consumption_rate_dynamic(0.0, c, 2.0, 0.0, sample_interval=1.0).round(12)[[0, 15]].tolist()
    [0.1, 0.1]
    """
    if sample_interval is None:
        for candidate in (c_out, c_in):
            if isinstance(candidate, (pd.Series, pd.DataFrame)):
                sample_interval = sample_interval_of(candidate.index)
                break
        else:
            raise KinetraceError("consumption_rate_dynamic: give sample_interval [s] or Series with a DatetimeIndex")
    steady_part = as_float_array(consumption_rate_steady(c_in, c_out, volume, flow_in, flow_out))
    c = np.asarray(c_out, dtype=float)
    dcdt = np.asarray(savgol_derivative(c, sample_interval, window=window, polyorder=polyorder))
    out = steady_part - dcdt
    v = as_float_array(volume)
    if v.ndim >= 1 and v.size > 1:
        dvdt = np.asarray(savgol_derivative(v, sample_interval, window=window, polyorder=polyorder))
        n_cols = c.shape[1] if c.ndim == 2 else None
        with np.errstate(divide="ignore", invalid="ignore"):
            out = out - c / _column(np.where(v > 0, v, np.nan), n_cols) * _column(dvdt, n_cols)
    return _wrap_like(out, c_out, c_in)


def rates_from_extents(extent_rates, volume):
    """Rates of reaction from extent rates, r_j = xi_j / V.

    Parameters
    ----------
    extent_rates : array_like (n_times, n_reactions) or DataFrame
        Extent rate of each reaction (e.g. from
        ``kinetrace.chemistry.extents.extents_from_flows``). [mol/s]
    volume : float or array_like (n_times,)
        Liquid holdup. [m^3]

    Returns
    -------
    ndarray or DataFrame
        r_j. [mol/(m^3 s)] NaN where V is not positive.

    References
    ----------
    .. [1] Aris, R. (1965). Introduction to the Analysis of Chemical Reactors. Prentice-Hall.

    Examples
    --------
    >>> rates_from_extents(np.array([[5.0, 1.0]]), 2.0).tolist()
    [[2.5, 0.5]]
    """
    xi = np.asarray(extent_rates, dtype=float)
    if xi.ndim == 1:
        xi = xi[:, None] if np.ndim(volume) == 1 else xi[None, :]
    v = as_float_array(volume)
    v = v[:, None] if v.ndim == 1 else v
    with np.errstate(divide="ignore", invalid="ignore"):
        out = xi / np.where(v > 0, v, np.nan)
    return _wrap_like(out, extent_rates)
