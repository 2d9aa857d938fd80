"""Time derivatives of interval means for the accumulation terms of the balances."""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..kinetics.balances import savgol_derivative


def smoothed_derivative(x, sample_interval: float, window: int = 5) -> np.ndarray:
    """Savitzky-Golay first derivative of each column, across short gaps.

    Gaps of up to three intervals inside the record are bridged linearly; longer gaps are
    filled only to run the filter and come out NaN again, as do columns with fewer than
    ``window`` values.

    Parameters
    ----------
    x : array_like, shape (n,) or (n, m)
        Evenly spaced values, time along axis 0. [unit of x]
    sample_interval : float
        Spacing of the values. [s]
    window : int
        Odd filter window. [samples]

    Returns
    -------
    ndarray, same shape as ``x``
        dx/dt. [unit of x / s]

    References
    ----------
    .. [1] Savitzky, A., Golay, M. J. E. (1964). Anal. Chem. 36(8), 1627-1639.

    >>> t = np.arange(12) * 60.0
    >>> y = 2.0 + 0.5 * t
    >>> y[5] = np.nan
    >>> d = smoothed_derivative(y, 60.0)
    >>> bool(np.allclose(d, 0.5))
    True
    """
    arr = np.asarray(x, dtype=float)
    one = arr.ndim == 1
    arr = arr.reshape(len(arr), -1)
    frame = pd.DataFrame(arr).interpolate(limit=3, limit_area="inside")
    ok = frame.notna().to_numpy()
    filled = frame.interpolate(limit_direction="both").to_numpy()
    enough = ok.sum(axis=0) >= window
    out = np.full(arr.shape, np.nan)
    if len(arr) >= window and enough.any():
        out[:, enough] = savgol_derivative(filled[:, enough], sample_interval, window=window, polyorder=2)
    out[~ok] = np.nan
    return out[:, 0] if one else out
