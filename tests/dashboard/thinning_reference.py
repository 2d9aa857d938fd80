"""Reference thinning for the tests and the benchmark: point-by-point versions written from the papers,
and the vectorised NumPy LTTB the dashboard used before tsdownsample (the benchmark's baseline)."""

import numpy as np


def lttb_reference(x, y, threshold):
    """Largest-Triangle-Three-Buckets written point by point after the pseudo-code of
    Steinarsson (2013), MSc thesis, University of Iceland, ch. 4.1 (algorithm 4.1), with the
    buckets of the middle points bounded by floor(i * (n - 2) / (threshold - 2)) + 1."""
    n = len(x)
    if threshold >= n:
        return list(range(n))
    nb = threshold - 2
    bounds = [1 + (i * (n - 2)) // nb for i in range(nb + 1)]
    kept, a = [0], 0
    for i in range(nb):
        lo, hi = bounds[i], bounds[i + 1]
        if i + 1 < nb:
            nlo, nhi = bounds[i + 1], bounds[i + 2]
        else:
            nlo, nhi = n - 1, n
        avg_x = sum(x[nlo:nhi]) / (nhi - nlo)
        avg_y = sum(y[nlo:nhi]) / (nhi - nlo)
        best, best_area = lo, -1.0
        for j in range(lo, hi):
            area = abs((x[a] - avg_x) * (y[j] - y[a]) - (x[a] - x[j]) * (avg_y - y[a])) * 0.5
            if area > best_area:
                best, best_area = j, area
        kept.append(best)
        a = best
    kept.append(n - 1)
    return kept


def minmax_reference(x, y, n_buckets):
    """Smallest and largest value of each equal-width x slice, by a loop over the points
    (Jugel et al. 2014, M4, min/max per pixel column); first minimum / first maximum win ties."""
    n = len(x)
    if n <= 2 * n_buckets:
        return list(range(n))
    span = x[-1] - x[0]
    best = {}
    for i in range(n):
        b = min(int((x[i] - x[0]) / span * n_buckets), n_buckets - 1)
        lo, hi = best.get(b, (i, i))
        if y[i] < y[lo]:
            lo = i
        if y[i] >= y[hi]:
            hi = i
        best[b] = (lo, hi)
    return sorted({0, n - 1} | {i for pair in best.values() for i in pair})


def numpy_lttb_indices(x, y, n_out: int) -> np.ndarray:
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

    """
    x, y = np.asarray(x, dtype=float), np.asarray(y, dtype=float)
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
