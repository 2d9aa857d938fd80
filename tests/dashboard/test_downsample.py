"""Thinning of series for charts (tsdownsample), checked against point-by-point references written
from the papers (tests/dashboard/thinning_reference.py)."""

import numpy as np
import pandas as pd
import pytest

from kinedash.downsample import MAX_POINTS, list_methods, lttb_indices, minmax_indices, minmaxlttb_indices, thin

from .thinning_reference import lttb_reference, minmax_reference, numpy_lttb_indices


@pytest.mark.parametrize("n,threshold,seed", [(10, 5, 0), (101, 7, 1), (1000, 100, 2), (5003, 300, 3),
                                              (20_000, 1000, 4)])
def test_lttb_matches_reference_on_a_regular_grid(n, threshold, seed):
    # results are on a regular grid (1 min, 1 h): there the library picks exactly the points of
    # Steinarsson (2013), algorithm 4.1
    rng = np.random.default_rng(seed)
    x = 60.0 * np.arange(n)
    y = np.cumsum(rng.standard_normal(n))              # random walk
    got = lttb_indices(x, y, threshold).tolist()
    assert got == lttb_reference(x.tolist(), y.tolist(), threshold)
    assert got == numpy_lttb_indices(x, y, threshold).tolist()      # and the NumPy version it replaces


def test_lttb_on_an_uneven_grid_nearly_matches_reference():
    # rows dropped (NaN, steady-only) make the spacing uneven: the library's floating-point bucket
    # arithmetic may pick a neighbouring point in a few buckets; the kept triangles must stay as large
    rng = np.random.default_rng(5)
    x = np.cumsum(rng.uniform(0.5, 1.5, 20_000))
    y = np.cumsum(rng.standard_normal(20_000))
    got = lttb_indices(x, y, 1000)
    ref = np.array(lttb_reference(x.tolist(), y.tolist(), 1000))
    assert np.mean(got == ref) >= 0.97
    assert np.abs(np.interp(x, x[got], y[got]) - np.interp(x, x[ref], y[ref])).mean() < 0.05 * np.std(y)


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


def test_minmaxlttb_keeps_the_shape_of_lttb():
    rng = np.random.default_rng(6)
    n = 100_000
    x = 60.0 * np.arange(n)
    y = np.cumsum(rng.standard_normal(n))
    y[61_234] += 80.0                                   # a one-sample spike
    got = minmaxlttb_indices(x, y, 1000)
    assert len(got) == 1000 and got[0] == 0 and got[-1] == n - 1 and np.all(np.diff(got) > 0)
    assert 61_234 in got                                # the spike survives the preselection and LTTB
    ref = np.array(lttb_reference(x.tolist(), y.tolist(), 1000))
    # drawn as lines, the two selections differ by a small fraction of the signal's spread
    err = np.abs(np.interp(x, x[got], y[got]) - np.interp(x, x[ref], y[ref]))
    assert err.mean() < 0.02 * np.ptp(y)


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


def test_strided_columns_are_accepted():
    # a column of a wide frame is a strided view; the library needs contiguous memory
    idx = pd.date_range("2026-01-01", periods=30_000, freq="1min", tz="UTC")
    wide = pd.DataFrame(np.random.default_rng(7).standard_normal((30_000, 3)).cumsum(axis=0), index=idx,
                        columns=["a", "b", "c"])
    y = np.ascontiguousarray(wide.to_numpy())[:, 1]
    assert not y.flags["C_CONTIGUOUS"]
    for method in list_methods():
        out = thin(wide[["b"]], "b", 1000, method=method)
        assert 1000 <= len(out) <= 2002
    assert lttb_indices(np.arange(30_000.0), y, 500).tolist() == \
        lttb_reference(list(range(30_000)), y.tolist(), 500)


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
    with pytest.raises(ValueError, match="one of \\['minmaxlttb', 'lttb', 'minmax'\\]"):
        thin(pd.DataFrame({"v": [1.0]}), "v", method="every_tenth")
    with pytest.raises(ValueError, match="n_out >= 3"):
        lttb_indices([0, 1, 2, 3], [0, 1, 2, 3], 2)
    with pytest.raises(ValueError, match="equal length"):
        minmax_indices([0, 1], [0, 1, 2], 2)
