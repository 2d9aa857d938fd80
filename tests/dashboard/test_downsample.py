"""Thinning of series for charts, checked against straightforward reference implementations."""

import numpy as np
import pandas as pd
import pytest

from kinedash.downsample import MAX_POINTS, list_methods, lttb_indices, minmax_indices, thin


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


@pytest.mark.parametrize("n,threshold,seed", [(10, 5, 0), (101, 7, 1), (1000, 100, 2), (5003, 300, 3),
                                              (20_000, 1000, 4)])
def test_lttb_matches_reference(n, threshold, seed):
    rng = np.random.default_rng(seed)
    x = np.cumsum(rng.uniform(0.5, 1.5, n))            # uneven spacing
    y = np.cumsum(rng.standard_normal(n))              # random walk
    got = lttb_indices(x, y, threshold).tolist()
    assert got == lttb_reference(x.tolist(), y.tolist(), threshold)


@pytest.mark.parametrize("n,buckets,seed", [(50, 4, 0), (999, 20, 1), (10_000, 600, 2)])
def test_minmax_matches_reference(n, buckets, seed):
    rng = np.random.default_rng(seed)
    x = np.cumsum(rng.uniform(0.5, 1.5, n))
    y = np.round(rng.standard_normal(n), 1)            # rounded: ties occur
    got = minmax_indices(x, y, buckets)
    ref = minmax_reference(x.tolist(), y.tolist(), buckets)
    # ties may pick another index of the same value; the kept values per bucket must agree
    span = x[-1] - x[0]
    bucket = np.minimum(((x - x[0]) / span * buckets).astype(int), buckets - 1)
    for b in range(buckets):
        g, r = got[bucket[got] == b], np.array(ref)[bucket[ref] == b]
        assert y[g].min() == y[r].min() and y[g].max() == y[r].max()
    assert len(got) <= 2 * buckets + 2


def test_spike_survives_minmax_but_count_bounded():
    # a single-sample spike in 100 000 points is kept by min/max (its purpose)
    y = np.zeros(100_000)
    y[61_234] = 9.0
    x = np.arange(100_000, dtype=float)
    keep = minmax_indices(x, y, 500)
    assert 61_234 in keep and len(keep) <= 1002


@pytest.mark.parametrize("kind", ["list", "ndarray", "series"])
def test_input_types(kind):
    x, y = list(range(100)), [float(i % 7) for i in range(100)]
    conv = {"list": list, "ndarray": np.asarray, "series": pd.Series}[kind]
    assert lttb_indices(conv(x), conv(y), 10).tolist() == lttb_reference(x, y, 10)


def test_thin_caps_points_and_drops_nan():
    idx = pd.date_range("2026-01-01", periods=60_000, freq="1min", tz="UTC")
    f = pd.DataFrame({"v": np.sin(np.arange(60_000) / 900.0)}, index=idx)
    f.iloc[100:200, 0] = np.nan
    for method in list_methods():
        out = thin(f, "v", 100_000, method=method)
        assert len(out) <= MAX_POINTS and out["v"].notna().all()
        assert out.index.is_monotonic_increasing
    assert len(thin(f.iloc[:50], "v", 1000)) == 50
    assert thin(f.iloc[100:200], "v").empty


def test_bad_arguments():
    with pytest.raises(ValueError, match="one of \\['lttb', 'minmax'\\]"):
        thin(pd.DataFrame({"v": [1.0]}), "v", method="every_tenth")
    with pytest.raises(ValueError, match="n_out >= 3"):
        lttb_indices([0, 1, 2, 3], [0, 1, 2, 3], 2)
    with pytest.raises(ValueError, match="equal length"):
        minmax_indices([0, 1], [0, 1, 2], 2)
