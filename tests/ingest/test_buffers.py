"""The per-tag reading buffers (growing memory-mapped arrays, compact time stamps) and the
sampling step taken from them.

Reference: numpy's own concatenation of the same chunks and its median (general-purpose library);
time stamps must come back to the nanosecond.
"""

import numpy as np
import pyarrow as pa
from hypothesis import given, settings
from hypothesis import strategies as st

from kinetrace.config.schema import Source, Tag
from kinetrace.ingest.collect import Collector
from kinetrace.ingest.growing import GrowingArray
from kinetrace.ingest.reader import _median_step

S = 10**9


def test_growing_array_equals_numpy_concatenate():
    rng = np.random.default_rng(4)
    chunks = [rng.normal(size=int(n)) for n in rng.integers(0, 3000, 40)]
    g = GrowingArray(np.float64, capacity=16)
    for c in chunks:
        g.append(c)
    assert len(g) == sum(map(len, chunks))
    np.testing.assert_array_equal(g.view(), np.concatenate(chunks))
    out = g.take()
    np.testing.assert_array_equal(out, np.concatenate(chunks))
    assert len(g) == 0 and out.flags.writeable


def test_growing_array_grows_by_copy_while_a_view_is_held():
    g = GrowingArray(np.int32, capacity=4)
    g.append(np.arange(4, dtype=np.int32))
    held = g.view()                       # the map cannot be resized in place now
    g.append(np.arange(4, 10, dtype=np.int32))
    assert held.tolist() == [0, 1, 2, 3] and g.take().tolist() == list(range(10))


def _collector():
    tag = Tag(tag="T1", role="temperature", unit="K")
    return Collector([tag], Source(kind="csv", path="x"), {"T1"})


def test_time_stamps_with_fractions_of_a_second_widen_the_buffer_without_loss():
    col = _collector()
    whole = ["2026-09-01T00:00:00Z", "2026-09-01T00:01:00Z"]
    frac = ["2026-09-01T00:02:00.250Z", "2030-01-01T00:00:00.000000001Z"]
    for texts in (whole, frac, whole):
        col.add("T1", pa.array(texts), pa.array([1.0] * len(texts)))
    assert col.buffers[0].ts.dtype == np.int64
    ts, val, fate, _ = col.arrays(0)
    # reference: pandas/numpy's own parse of the same ISO 8601 texts
    ref = np.array([np.datetime64(t.rstrip("Z"), "ns").astype(np.int64) for t in whole + frac + whole])
    assert ts.tolist() == ref.tolist() and val.tolist() == [1.0] * 6 and fate.tolist() == [0] * 6
    # handed over: the buffer is empty, its count of readings kept
    assert len(col.buffers[0].ts) == 0 and col.buffers[0].n == 6


@settings(max_examples=80, deadline=None)
@given(st.lists(st.sampled_from([0, 60, 60, 60, 61, 120, 3600]), min_size=1, max_size=3000),
       st.integers(0, 10))
def test_median_step_equals_numpy_median(steps, extra):
    """The hold limit's sampling step: numpy's median of the time differences (reference), exactly."""
    d = np.array(steps + [7] * extra, dtype=np.int64)
    ts = np.r_[0, np.cumsum(d)] * S
    assert _median_step(ts) == float(np.median(np.diff(ts)))
