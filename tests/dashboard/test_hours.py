"""Chart buckets of whole hours from the store's hourly summary equal buckets of the rows themselves.

Reference: pandas over the rows read back with Store.series, grouped into the same buckets (whole
UTC hours from the hour holding the range's start, the first and last bucket cut at the range's
ends): min, max and count exactly, sums to 1e-12 relative (order of addition), on SQLite and on
PostgreSQL, for ranges that start and end inside hours, on hours, and inside one hour.
"""

import numpy as np
import pandas as pd
import pytest

from kinedash.source import bucket_stats, _key_ids
from kinetrace.store import open_store
from kinetrace.store.rollup import HOUR_US, ceil_hour, floor_hour
from tests.pg_server import pg_url  # noqa: F401  (fixture)
from tests.store.conftest import pg_db_url  # noqa: F401  (fixture)

W0, W1 = pd.Timestamp("2026-11-01T00:00Z"), pd.Timestamp("2026-11-11T00:00Z")


@pytest.fixture(params=["sqlite", pytest.param("postgresql", marks=pytest.mark.postgres)])
def filled(request, tmp_path):
    url = f"sqlite:///{tmp_path / 'r.sqlite'}" if request.param == "sqlite" else request.getfixturevalue("pg_db_url")
    idx = pd.date_range(W0, W1, freq="1min", tz="UTC", inclusive="left")
    rng = np.random.default_rng(9)
    x = pd.Series(np.cumsum(rng.normal(0, 0.01, len(idx))) + 0.8, index=idx)
    x[rng.random(len(idx)) < 0.03] = np.nan
    x.iloc[2000:2300] = np.nan                   # five hours without a value
    store = open_store(url)
    with store.write_run((W0, W1), config_fingerprint="sha256:test") as run:
        run.write_series("R-210", pd.DataFrame({"conversion": x}))
    yield store
    store.close()


def _reference(raw: pd.Series, start, end, n):
    s_us, e_us = start.value // 1000, end.value // 1000
    width = ceil_hour(-(-(e_us - s_us) // n))
    origin = floor_hour(s_us)
    t = raw.index.as_unit("us").asi8
    b = (t - origin) // width
    return raw.groupby(b).agg(["min", "max", "sum", "count"]), width


@pytest.mark.parametrize("start, end, n", [
    ("2026-11-01T00:00Z", "2026-11-11T00:00Z", 100),          # on hours
    ("2026-11-01T03:17Z", "2026-11-10T22:41Z", 77),           # inside hours at both ends
    ("2026-11-02T05:59Z", "2026-11-04T00:01Z", 20),
])
def test_hour_buckets_equal_buckets_of_the_rows(filled, start, end, n):
    start, end = pd.Timestamp(start), pd.Timestamp(end)
    raw = filled.series("R-210", ["conversion"], start, end)["conversion"].dropna()
    key = _key_ids(filled, "R-210", ["conversion"])["conversion"]
    got = bucket_stats(filled, key, start, end, n, how="hours")
    ref, width = _reference(raw, start, end, n)
    assert width >= 2 * HOUR_US and len(got) == len(ref) > 0
    np.testing.assert_array_equal(got["lo"].to_numpy(), ref["min"].to_numpy())
    np.testing.assert_array_equal(got["hi"].to_numpy(), ref["max"].to_numpy())
    np.testing.assert_allclose(got["total"].to_numpy(), ref["sum"].to_numpy(), rtol=1e-12)
    assert got["count"].tolist() == ref["count"].tolist()
    assert got.index[0] >= start and got.index.is_monotonic_increasing
    assert got["t_first"].iloc[0] == raw.index[0]
    # the default picks the hourly summary for buckets of 2 h and more, with the same result
    pd.testing.assert_frame_equal(bucket_stats(filled, key, start, end, n), got)
    # a series without the summary is read from its rows into the same buckets (a chart's series align)
    for how in ("ranges", "group_by"):
        rows = bucket_stats(filled, key, start, end, n, how=how)
        assert rows.index.equals(got.index) and rows["count"].tolist() == got["count"].tolist()
        np.testing.assert_array_equal(rows["lo"].to_numpy(), got["lo"].to_numpy())
        np.testing.assert_allclose(rows["total"].to_numpy(), got["total"].to_numpy(), rtol=1e-12)


def test_a_range_inside_one_hour_reads_the_rows(filled):
    start, end = pd.Timestamp("2026-11-03T10:05Z"), pd.Timestamp("2026-11-03T10:55Z")
    key = _key_ids(filled, "R-210", ["conversion"])["conversion"]
    got = bucket_stats(filled, key, start, end, 1, how="hours")
    raw = filled.series("R-210", ["conversion"], start, end)["conversion"].dropna()
    assert got["count"].tolist() == [raw.size] and got["lo"].iloc[0] == raw.min() and got["hi"].iloc[0] == raw.max()
