"""Thinning of long time series before they are sent to the browser.

Two published methods, both picking real samples (no interpolation):

* ``lttb`` -- Largest-Triangle-Three-Buckets: the first and last points are kept; the
  points in between are split into ``n - 2`` equal-count buckets, and in each bucket the
  point forming the largest triangle with the point kept in the previous bucket and the
  mean of the next bucket is kept [1]_.
* ``minmax`` -- per pixel bucket (equal-width slices of the x range), the smallest and
  the largest value are kept in time order, so spikes are never lost [2]_.

Both are vectorised over the samples; LTTB loops only over its output buckets (its
choice in one bucket depends on the previous one, by definition).

References
----------
.. [1] Steinarsson, S. (2013). Downsampling Time Series for Visual Representation.
   MSc thesis, University of Iceland, ch. 4 (Largest-Triangle-Three-Buckets).
.. [2] Jugel, U., Jerzak, Z., Hackenbroich, G., Markl, V. (2014). M4: a visualization-
   oriented time series data aggregation. Proc. VLDB Endow. 7(10), 797-808 (min/max per
   pixel column).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

#: Most points any one chart sends to the browser. [-]
MAX_POINTS = 5000

_METHODS = ("lttb", "minmax")


def list_methods() -> list[str]:
    """Names accepted by :func:`thin`.

    >>> list_methods()
    ['lttb', 'minmax']
    """
    return list(_METHODS)


def _as_xy(x, y) -> tuple[np.ndarray, np.ndarray]:
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
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

    References
    ----------
    Steinarsson (2013), ch. 4, see the module docstring.

    >>> lttb_indices([0, 1, 2, 3, 4, 5, 6], [0, 0, 5, 0, 0, -3, 0], 4).tolist()
    [0, 2, 5, 6]
    """
    x, y = _as_xy(x, y)
    n = len(x)
    if n_out < 3:
        raise ValueError(f"lttb needs n_out >= 3, got {n_out}")
    if n <= n_out:
        return np.arange(n)
    nb = n_out - 2
    # bucket b (0..nb-1) holds points 1 + floor(b*(n-2)/nb) .. 1 + floor((b+1)*(n-2)/nb) - 1
    edges = 1 + (np.arange(nb + 1) * (n - 2)) // nb
    lengths = np.diff(edges)
    width = int(lengths.max())
    cols = edges[:-1, None] + np.arange(width)[None, :]
    valid = np.arange(width)[None, :] < lengths[:, None]
    cols = np.where(valid, cols, edges[:-1, None])
    bx, by = x[cols], y[cols]
    # mean of the next bucket; the last bucket looks at the last point
    csx, csy = np.concatenate([[0.0], np.cumsum(x)]), np.concatenate([[0.0], np.cumsum(y)])
    nxt_lo = np.append(edges[1:-1], n - 1)
    nxt_hi = np.append(edges[2:], n)
    cnt = nxt_hi - nxt_lo
    cx = (csx[nxt_hi] - csx[nxt_lo]) / cnt
    cy = (csy[nxt_hi] - csy[nxt_lo]) / cnt
    out = np.empty(n_out, dtype=np.int64)
    out[0], out[-1] = 0, n - 1
    a = 0
    for b in range(nb):
        ax, ay = x[a], y[a]
        area = np.abs((ax - cx[b]) * (by[b] - ay) - (ax - bx[b]) * (cy[b] - ay))
        area = np.where(valid[b], area, -1.0)
        a = int(cols[b, int(np.argmax(area))])
        out[b + 1] = a
    return out


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
        Increasing, unique indices; at most ``2 * n_buckets``; first and last point kept.

    References
    ----------
    Jugel et al. (2014), see the module docstring.

    >>> minmax_indices([0, 1, 2, 3, 4, 5], [1, 9, 2, 2, -4, 3], 2).tolist()
    [0, 1, 4, 5]
    """
    x, y = _as_xy(x, y)
    n = len(x)
    if n_buckets < 1:
        raise ValueError(f"minmax needs n_buckets >= 1, got {n_buckets}")
    if n <= 2 * n_buckets:
        return np.arange(n)
    span = x[-1] - x[0]
    bucket = np.zeros(n, dtype=np.int64) if span <= 0 else \
        np.minimum(((x - x[0]) / span * n_buckets).astype(np.int64), n_buckets - 1)
    order = np.lexsort((np.arange(n), y, bucket))          # by bucket, then value, then position
    sb = bucket[order]
    first = np.flatnonzero(np.r_[True, sb[1:] != sb[:-1]])
    last = np.r_[first[1:] - 1, n - 1]
    keep = np.unique(np.concatenate([order[first], order[last], [0, n - 1]]))
    return keep


def thin(frame: pd.DataFrame, column: str, n_out: int = 1200, method: str = "lttb") -> pd.DataFrame:
    """Rows of ``frame`` kept for drawing ``column`` against the time index.

    Parameters
    ----------
    frame : DataFrame
        DatetimeIndex (UTC), the column to draw. [unit of the column]
    column : str
        Column whose shape is preserved; rows where it is NaN are dropped first.
    n_out : int
        Points wanted (``lttb``) or pixel buckets (``minmax``, up to twice as many points);
        capped so no result exceeds :data:`MAX_POINTS`. [-]
    method : {"lttb", "minmax"}
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
    ValueError: downsampling method 'fastest' is not one of ['lttb', 'minmax']
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
    else:
        idx = minmax_indices(x, y, max(1, min(n_out, MAX_POINTS // 2)))
    return sub.iloc[idx]
