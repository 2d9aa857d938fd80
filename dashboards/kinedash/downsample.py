"""Thinning of long time series before they are sent to the browser, by ``tsdownsample`` (Rust).

Three published methods, all picking real samples (no interpolation):

* ``minmaxlttb`` (default) -- MinMaxLTTB: a min/max preselection of ``minmax_ratio x n``
  points, then Largest-Triangle-Three-Buckets on those [3]_; as faithful as LTTB on plant
  trends and many times faster on long series.
* ``lttb`` -- Largest-Triangle-Three-Buckets: the first and last points are kept; the
  points in between are split into ``n - 2`` equal-count buckets, and in each bucket the
  point forming the largest triangle with the point kept in the previous bucket and the
  mean of the next bucket is kept [1]_.
* ``minmax`` -- per pixel bucket (equal-width slices of the x range), the smallest and
  the largest value are kept in time order, so spikes are never lost [2]_.

The hand-written NumPy versions these replace were 10-90x slower on the dashboard
benchmark (``benchmarks/bench_dashboard.py`` prints the ratio); the tests compare each
method with a point-by-point reference written from the papers.

References
----------
.. [1] Steinarsson, S. (2013). Downsampling Time Series for Visual Representation.
   MSc thesis, University of Iceland, ch. 4 (Largest-Triangle-Three-Buckets).
.. [2] Jugel, U., Jerzak, Z., Hackenbroich, G., Markl, V. (2014). M4: a visualization-
   oriented time series data aggregation. Proc. VLDB Endow. 7(10), 797-808 (min/max per
   pixel column).
.. [3] Van Der Donckt, J., Van Der Donckt, J., Rademaker, M., Van Hoecke, S. (2023).
   MinMaxLTTB: Leveraging MinMax-Preselection to Scale LTTB. IEEE VIS 2023 short papers.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from tsdownsample import LTTBDownsampler, MinMaxDownsampler, MinMaxLTTBDownsampler

#: Most points any one chart sends to the browser. [-]
MAX_POINTS = 5000
#: Points of the min/max preselection of MinMaxLTTB per point kept (the method's default). [-]
MINMAX_RATIO = 4

_METHODS = ("minmaxlttb", "lttb", "minmax")


def list_methods() -> list[str]:
    """Names accepted by :func:`thin`.

    >>> list_methods()
    ['minmaxlttb', 'lttb', 'minmax']
    """
    return list(_METHODS)


def _as_xy(x, y) -> tuple[np.ndarray, np.ndarray]:
    x = np.ascontiguousarray(x, dtype=float)          # the Rust kernels read contiguous memory only
    y = np.ascontiguousarray(y, dtype=float)
    if x.shape != y.shape or x.ndim != 1:
        raise ValueError(f"x and y must be 1-D of equal length, got shapes {x.shape} and {y.shape}")
    return x, y


def lttb_indices(x, y, n_out: int) -> np.ndarray:
    """Indices of the points kept by Largest-Triangle-Three-Buckets.

    Parameters
    ----------
    x : array_like
        Increasing abscissae (e.g. time in seconds). [any]
    y : array_like
        Finite values. [any]
    n_out : int
        Points wanted, at least 3. [-]

    Returns
    -------
    ndarray of int
        Increasing indices into ``x``; all of them when ``len(x) <= n_out``.

    >>> lttb_indices([0, 1, 2, 3, 4, 5, 6], [0, 0, 5, 0, 0, -3, 0], 4).tolist()
    [0, 2, 5, 6]
    """
    x, y = _as_xy(x, y)
    if n_out < 3:
        raise ValueError(f"lttb needs n_out >= 3, got {n_out}")
    if len(x) <= n_out:
        return np.arange(len(x))
    return np.asarray(LTTBDownsampler().downsample(x, y, n_out=n_out), dtype=np.int64)


def minmaxlttb_indices(x, y, n_out: int, minmax_ratio: int = MINMAX_RATIO) -> np.ndarray:
    """Indices of the points kept by MinMaxLTTB (min/max preselection, then LTTB).

    Parameters
    ----------
    x, y : array_like
        As for :func:`lttb_indices`.
    n_out : int
        Points wanted, at least 3. [-]
    minmax_ratio : int
        Preselected points per point kept. [-]

    >>> minmaxlttb_indices([0, 1, 2, 3, 4, 5, 6], [0, 0, 5, 0, 0, -3, 0], 4).tolist()
    [0, 2, 5, 6]
    """
    x, y = _as_xy(x, y)
    if n_out < 3:
        raise ValueError(f"minmaxlttb needs n_out >= 3, got {n_out}")
    if len(x) <= n_out:
        return np.arange(len(x))
    return np.asarray(MinMaxLTTBDownsampler().downsample(x, y, n_out=n_out, minmax_ratio=minmax_ratio),
                      dtype=np.int64)


def minmax_indices(x, y, n_buckets: int) -> np.ndarray:
    """Indices of the smallest and largest value in each of ``n_buckets`` equal-width x slices.

    Parameters
    ----------
    x : array_like
        Increasing abscissae. [any]
    y : array_like
        Finite values. [any]
    n_buckets : int
        Slices of the x range (about one per pixel column). [-]

    Returns
    -------
    ndarray of int
        Increasing, unique indices; at most ``2 * n_buckets + 2``; first and last point kept.

    >>> minmax_indices([0, 1, 2, 3, 4, 5], [1, 9, 2, 2, -4, 3], 2).tolist()
    [0, 1, 4, 5]
    """
    x, y = _as_xy(x, y)
    n = len(x)
    if n_buckets < 1:
        raise ValueError(f"minmax needs n_buckets >= 1, got {n_buckets}")
    if n <= 2 * n_buckets:
        return np.arange(n)
    got = np.asarray(MinMaxDownsampler().downsample(x, y, n_out=2 * n_buckets), dtype=np.int64)
    return np.unique(np.concatenate([got, [0, n - 1]]))


def thin(frame: pd.DataFrame, column: str, n_out: int = 1200, method: str = "minmaxlttb") -> pd.DataFrame:
    """Rows of ``frame`` kept for drawing ``column`` against the time index.

    Parameters
    ----------
    frame : DataFrame
        DatetimeIndex (UTC), the column to draw. [unit of the column]
    column : str
        Column whose shape is preserved; rows where it is NaN are dropped first.
    n_out : int
        Points wanted (``minmaxlttb``, ``lttb``) or pixel buckets (``minmax``, up to twice as
        many points); capped so no result exceeds :data:`MAX_POINTS`. [-]
    method : {"minmaxlttb", "lttb", "minmax"}
        See the module docstring.

    Returns
    -------
    DataFrame
        The kept rows, in time order.

    >>> idx = pd.date_range("2026-11-01", periods=10_000, freq="1min", tz="UTC")
    >>> f = pd.DataFrame({"conversion": np.sin(np.arange(10_000) / 500.0)}, index=idx)
    >>> len(thin(f, "conversion", 600))
    600
    >>> thin(f, "conversion", 10, method="fastest")
    Traceback (most recent call last):
    ...
    ValueError: downsampling method 'fastest' is not one of ['minmaxlttb', 'lttb', 'minmax']
    """
    if method not in _METHODS:
        raise ValueError(f"downsampling method {method!r} is not one of {list(_METHODS)}")
    sub = frame[frame[column].notna()]
    if len(sub) == 0:
        return sub
    x = sub.index.asi8.astype(float) / 1e9 if isinstance(sub.index, pd.DatetimeIndex) else \
        np.asarray(sub.index, dtype=float)
    y = sub[column].to_numpy(dtype=float)
    if method == "lttb":
        idx = lttb_indices(x, y, max(3, min(n_out, MAX_POINTS)))
    elif method == "minmaxlttb":
        idx = minmaxlttb_indices(x, y, max(3, min(n_out, MAX_POINTS)))
    else:
        idx = minmax_indices(x, y, max(1, min(n_out, MAX_POINTS // 2 - 1)))
    return sub.iloc[idx]
