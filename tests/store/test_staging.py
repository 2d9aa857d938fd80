"""A series staged in another process (kinetrace.store.stage_series) is stored as the frame itself.

The reference is the frame: every value read back must equal the frame's own float64 value bit
for bit (IEEE 754 doubles kept exactly by SQLite REAL and PostgreSQL double precision; common
practice, no source), NaN as missing, on both back ends; and the stage refuses the same bad
frames with the same messages as the direct write.
"""

import pickle

import numpy as np
import pandas as pd
import pytest

from kinetrace.store import StoreError, open_store, stage_series

from .synth import FP, SERIES_UNITS, series_frame

W0, W1 = pd.Timestamp("2026-11-29T00:00Z"), pd.Timestamp("2026-12-01T00:00Z")


def test_staged_series_is_stored_as_the_frame(store_url):
    frame = series_frame(W0, W1, freq="10min", seed=5)
    frame["count"] = np.arange(len(frame), dtype=np.int64)             # integers become floats, exactly
    frame.iloc[11, 1] = 1e-300                                         # subnormal neighbourhood
    frame.iloc[12, 1] = -0.1 + 1e-17
    units = {**SERIES_UNITS, "count": "-"}
    staged = pickle.loads(pickle.dumps(stage_series(frame, units, unit="R-210")))   # as it crosses processes
    store = open_store(store_url)
    with store.write_run((W0, W1), config_fingerprint=FP) as run:
        n = run.write_series("R-210", staged)
    assert n == frame.size
    back = store.series("R-210")
    expected = frame.astype(float)[sorted(frame.columns)]
    pd.testing.assert_frame_equal(back, expected, check_freq=False, check_names=False, check_exact=True)
    assert back["conversion"].isna().sum() == frame["conversion"].isna().sum() == 2
    cat = store.series_catalog("R-210")
    assert dict(zip(cat["variable"], cat["unit_of_measure"])) == units
    store.close()


def test_staged_and_direct_writes_replace_each_other(sqlite_url):
    """A re-run of the window replaces rows whichever way they came (no duplicates)."""
    store = open_store(sqlite_url)
    a = series_frame(W0, W1, freq="1h", seed=1)
    b = series_frame(W0, W1, freq="1h", seed=2)
    with store.write_run((W0, W1), config_fingerprint=FP) as run:
        run.write_series("R-210", a, units=SERIES_UNITS)
    with store.write_run((W0, W1), config_fingerprint=FP) as run:
        run.write_series("R-210", stage_series(b, SERIES_UNITS))
    pd.testing.assert_frame_equal(store.series("R-210"), b.astype(float)[sorted(b.columns)],
                                  check_freq=False, check_names=False, check_exact=True)
    with store.write_run((W0, W1), config_fingerprint=FP) as run:
        run.write_series("R-210", a, units=SERIES_UNITS)
    pd.testing.assert_frame_equal(store.series("R-210"), a.astype(float)[sorted(a.columns)],
                                  check_freq=False, check_names=False, check_exact=True)


@pytest.mark.parametrize("frame, message", [
    (pd.DataFrame({"x": [1.0]}, index=pd.DatetimeIndex(["2026-11-29T01:00"])), "naive"),
    (pd.DataFrame({"x": ["a"]}, index=pd.DatetimeIndex(["2026-11-29T01:00Z"])), "only numeric or boolean"),
    (pd.DataFrame({"x": [1.0, 2.0]}, index=pd.DatetimeIndex(["2026-11-29T01:00Z"] * 2)), "duplicate time stamp"),
])
def test_stage_refuses_what_the_writer_refuses(frame, message):
    with pytest.raises(StoreError, match="series of unit R-210") as err:
        stage_series(frame, unit="R-210")
    assert message in str(err.value)


def test_staged_rows_outside_the_window_roll_the_run_back(sqlite_url):
    store = open_store(sqlite_url)
    late = pd.DataFrame({"x": [1.0]}, index=pd.DatetimeIndex(["2026-12-01T00:00Z"]))
    with pytest.raises(StoreError, match="outside the run window"):
        with store.write_run((W0, W1), config_fingerprint=FP) as run:
            run.write_series("R-210", stage_series(late))
    assert store.series_catalog("R-210").empty
    assert store.runs()["status"].tolist() == ["failed"]
