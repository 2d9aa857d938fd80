"""Run semantics: re-running a window replaces its rows; a killed run leaves the last good
state; PostgreSQL and SQLite hold the same results; incremental runs continue from the
watermark. The reference in each test is the store's own earlier state or an
independently built expectation (no published values are involved: these are
properties of transactions, common practice, no source).
"""

import os
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from kinetrace.store import StoreError, open_store

from .synth import FP, fill_window, series_frame

W0, W1 = pd.Timestamp("2026-11-29T00:00Z"), pd.Timestamp("2026-12-01T00:00Z")
ROOT = Path(__file__).resolve().parents[2]


def _without_provenance(dump):
    return {name: df.drop(columns=[c for c in ("run_id",) if c in df.columns]) for name, df in dump.items()}


def assert_dumps_equal(a, b):
    assert a.keys() == b.keys()
    for name in a:
        pd.testing.assert_frame_equal(a[name].reset_index(drop=True), b[name].reset_index(drop=True),
                                      check_dtype=False, obj=name)


def test_rerun_same_window_leaves_identical_tables(store_url):
    store = open_store(store_url)
    with store.write_run((W0, W1), config_fingerprint=FP) as run:
        fill_window(run, W0, W1, freq="5min")
    first = store.dump()
    with store.write_run((W0, W1), config_fingerprint=FP) as run:
        fill_window(run, W0, W1, freq="5min")
        second_id = run.run_id
    second = store.dump()
    assert_dumps_equal(_without_provenance(first), _without_provenance(second))
    # every result row now belongs to the second run: replaced, not merged (the watermark
    # keeps the run that last moved it forward)
    assert (second["watermarks"]["run_id"] == first["watermarks"]["run_id"]).all()
    for name, df in second.items():
        if "run_id" in df.columns and name != "watermarks":
            assert (df["run_id"] == second_id).all(), name
    assert len(second["series_values"]) == 2 * (2 * 24 * 12) * 4
    assert store.runs()["status"].tolist() == ["complete", "complete"]


def test_rerun_removes_rows_the_new_run_no_longer_produces(store_url):
    """A re-run that writes fewer variables or alarms leaves none of the old ones in its window."""
    store = open_store(store_url)
    with store.write_run((W0, W1), config_fingerprint=FP) as run:
        fill_window(run, W0, W1, freq="1h", units=("R-210",))
    outside = pd.Timestamp("2026-12-01T00:00Z"), pd.Timestamp("2026-12-02T00:00Z")
    with store.write_run(outside, config_fingerprint=FP) as run:
        fill_window(run, *outside, freq="1h", units=("R-210",))
    with store.write_run((W0, W1), config_fingerprint=FP) as run:
        run.write_series("R-210", series_frame(W0, W1, freq="1h")[["conversion"]])
        run.write_alarms("R-210", pd.DataFrame(columns=["kind", "variable", "detected", "state"]))
    s = store.series("R-210", start=W0, end=W1)
    assert s["conversion"].notna().sum() == 46          # 48 hours minus the two NaN holes
    assert s[["temperature", "activity", "steady"]].isna().all().all()
    kept = series_frame(*outside, freq="1h", seed=0).astype(float)           # the other window is untouched
    pd.testing.assert_frame_equal(store.series("R-210", start=outside[0]), kept[sorted(kept.columns)],
                                  check_freq=False, check_names=False)
    assert (store.alarms("R-210")["detected"] >= outside[0]).all()


def test_exception_in_run_rolls_back_to_previous_results(store_url):
    store = open_store(store_url)
    with store.write_run((W0, W1), config_fingerprint=FP) as run:
        fill_window(run, W0, W1, freq="1h")
    before = store.dump()
    with pytest.raises(RuntimeError, match="pump tripped"):
        with store.write_run((W0, W1), config_fingerprint=FP) as run:
            fill_window(run, W0, W1, freq="1h", seed=5)
            raise RuntimeError("pump tripped")
    assert_dumps_equal(before, store.dump())
    runs = store.runs()
    assert runs["status"].tolist() == ["complete", "failed"]
    assert "pump tripped" in runs["message"].iloc[1]


CHILD = textwrap.dedent("""
    import sys
    import numpy as np, pandas as pd
    from kinetrace.store import open_store
    store = open_store(sys.argv[1])
    w0, w1 = pd.Timestamp("2026-11-29T00:00Z"), pd.Timestamp("2026-12-01T00:00Z")
    idx = pd.date_range(w0, w1, freq="1s", tz="UTC", inclusive="left")      # 172 800 rows per variable
    with store.write_run((w0, w1), config_fingerprint="sha256:child") as run:
        for i in range(400):
            run.write_series("R-210", pd.DataFrame({f"v{i}": np.full(len(idx), float(i))}, index=idx))
            run.set_watermark("R-210", idx[-1])
            print(i, flush=True)
""")


def test_run_killed_mid_write_leaves_last_good_state(store_url, tmp_path):
    store = open_store(store_url)
    with store.write_run((W0, W1), config_fingerprint=FP) as run:
        fill_window(run, W0, W1, freq="10min")
    good = store.dump()
    script = tmp_path / "child.py"
    script.write_text(CHILD)
    env = dict(os.environ, PYTHONPATH=f"{ROOT / 'src'}{os.pathsep}{os.environ.get('PYTHONPATH', '')}")
    proc = subprocess.Popen([sys.executable, str(script), store_url], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True, env=env)
    try:
        done = [proc.stdout.readline() for _ in range(3)]      # three big writes are in the transaction
        assert done[-1].strip() == "2", (done, proc.stderr.read() if proc.poll() is not None else "")
        proc.send_signal(signal.SIGKILL)
        assert proc.wait(timeout=60) == -signal.SIGKILL
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait()
    time.sleep(0.2)
    again = open_store(store_url)
    assert_dumps_equal(good, again.dump())
    runs = again.runs()
    assert runs["status"].tolist() == ["complete", "running"]       # the killed run is visible as such
    killed = runs["run_id"].iloc[1]
    assert pd.isna(runs["finished"].iloc[1])
    # the store stays usable: a new run of the same window completes
    with again.write_run((W0, W1), config_fingerprint=FP) as run:
        fill_window(run, W0, W1, freq="10min")
    assert_dumps_equal(_without_provenance(good), _without_provenance(again.dump()))
    assert again.runs().set_index("run_id").loc[killed, "status"] == "abandoned"   # found by the new run


@pytest.mark.postgres
def test_postgres_and_sqlite_hold_the_same_results(sqlite_url, pg_db_url):
    dumps = []
    for url in (sqlite_url, pg_db_url):
        store = open_store(url)
        with store.write_run((W0, W1), config_fingerprint=FP) as run:
            fill_window(run, W0, W1, freq="1min")
        later = (W1, W1 + pd.Timedelta("1D"))
        with store.write_run(later, config_fingerprint=FP) as run:
            fill_window(run, *later, freq="1min", seed=2)
        with store.write_run((W0, W1), config_fingerprint=FP) as run:      # a re-run of the first window
            fill_window(run, W0, W1, freq="1min", seed=1)
        dumps.append(store.dump())
        reads = (store.series("R-340", ["activity", "steady"], W0 + pd.Timedelta("3h"), W1),
                 store.daily(), store.alarms(state="open"), store.parameters(), store.quality(),
                 store.forecasts(), store.whatif(), store.watermarks())
        dumps[-1]["_reads"] = reads
        store.close()
    lite, pg = dumps
    for a, b in zip(lite.pop("_reads"), pg.pop("_reads")):
        pd.testing.assert_frame_equal(a, b, check_dtype=False)
    assert_dumps_equal(lite, pg)
    assert len(lite["series_values"]) == 2 * 3 * 24 * 60 * 4


def test_incremental_runs_continue_from_the_watermark(store_url):
    """Three incremental runs, each starting after the watermark, equal one run over the whole period."""
    full = series_frame(W0, W1, freq="15min", seed=9)
    store = open_store(store_url)
    cuts = [W0, W0 + pd.Timedelta("11h"), W0 + pd.Timedelta("30h"), W1]
    for a, b in zip(cuts[:-1], cuts[1:]):
        mark = store.watermark("R-210")
        start = a if mark is None else mark + pd.Timedelta("15min")
        assert start == a                                  # the watermark says where the last run stopped
        with store.write_run((start, b), config_fingerprint=FP) as run:
            part = full.loc[(full.index >= start) & (full.index < b)]
            run.write_series("R-210", part)
            run.set_watermark("R-210", part.index[-1])
    assert store.watermark("R-210") == full.index[-1]
    pd.testing.assert_frame_equal(store.series("R-210"), full.astype(float)[sorted(full.columns)],
                                  check_freq=False, check_names=False)
    # a re-run of an old window does not move the watermark back
    with store.write_run((cuts[0], cuts[1]), config_fingerprint=FP) as run:
        assert run.set_watermark("R-210", cuts[1] - pd.Timedelta("15min")) == full.index[-1]
    assert store.watermark("R-210") == full.index[-1]
    np.testing.assert_array_equal(store.runs()["status"].to_numpy(), ["complete"] * 4)


def test_concurrent_runs_of_one_window_never_mix(store_url):
    """Two runs of the same window at once: the store ends with exactly one run's results."""
    import threading

    store = open_store(store_url)
    errors = []

    def one(seed):
        try:
            with store.write_run((W0, W1), config_fingerprint=FP) as run:
                fill_window(run, W0, W1, freq="10min", seed=seed)
        except Exception as exc:  # noqa: BLE001 - collected and asserted below
            errors.append(exc)

    threads = [threading.Thread(target=one, args=(s,)) for s in (1, 2)]
    for t in threads:
        t.start()
    for t in threads:
        t.join(timeout=120)
    assert not errors
    got = store.series("R-210")
    candidates = [series_frame(W0, W1, freq="10min", seed=10 * s).astype(float) for s in (1, 2)]
    matches = [c[sorted(c.columns)].equals(got.set_axis(c.index)) for c in candidates]
    assert sum(matches) == 1
    last = store.runs().sort_values("finished")["run_id"].iloc[-1]
    assert (store.dump(["series_values"])["series_values"]["run_id"] == last).all()


def test_relative_sqlite_path_is_taken_from_base_dir(tmp_path):
    store = open_store("sqlite:///out/nested/results.sqlite", base_dir=tmp_path)
    with store.write_run((W0, W1), config_fingerprint=FP) as run:
        run.set_watermark("R-210", W0)
    assert (tmp_path / "out" / "nested" / "results.sqlite").exists()


def test_alarm_from_an_earlier_window_is_closed_by_a_later_run(store_url):
    """An alarm opened in one window and cleared in the next stays one row, now closed."""
    store = open_store(store_url)
    day1, day2, day3 = W0, W0 + pd.Timedelta("1D"), W0 + pd.Timedelta("2D")
    alarm = {"kind": "drift", "variable": "activity", "onset": day1 + pd.Timedelta("1h"),
             "detected": day1 + pd.Timedelta("3h"), "magnitude": -0.05, "magnitude_unit": "-",
             "evidence": "EWMA below its lower limit", "state": "open", "closed": None}
    with store.write_run((day1, day2), config_fingerprint=FP) as run:
        run.write_alarms("R-210", pd.DataFrame([alarm]))
    closed = dict(alarm, state="closed", closed=day2 + pd.Timedelta("6h"), evidence="EWMA back inside its limits")
    for _ in range(2):                                   # the second pass re-runs the same window
        with store.write_run((day2, day3), config_fingerprint=FP) as run:
            run.write_alarms("R-210", pd.DataFrame([closed]))
            last = run.run_id
    al = store.alarms("R-210")
    assert len(al) == 1
    assert al["state"].iloc[0] == "closed" and al["closed"].iloc[0] == day2 + pd.Timedelta("6h")
    assert al["run_id"].iloc[0] == last and al["evidence"].iloc[0] == "EWMA back inside its limits"
    assert store.alarms(state="open").empty


def test_several_series_writes_of_one_unit_in_one_run(store_url):
    """Variables written in separate calls of one run all stay; writing a variable again replaces it."""
    store = open_store(store_url)
    f = series_frame(W0, W1, freq="1h")
    with store.write_run((W0, W1), config_fingerprint=FP) as run:
        run.write_series("R-210", f[["conversion"]])
        run.write_series("R-210", f[["temperature"]])
        run.write_series("R-210", f[["temperature"]] + 1.0)
    got = store.series("R-210")
    assert list(got.columns) == ["conversion", "temperature"]
    np.testing.assert_array_equal(got["temperature"].to_numpy(), f["temperature"].to_numpy() + 1.0)
    long = store.series("R-210", "conversion", layout="long")
    assert list(long.columns) == ["variable", "ts", "value", "run_id"] and len(long) == 48
    with pytest.raises(StoreError, match=r"no variable\(s\) \['yield'\] in the store"):
        store.series("R-210", ["yield"])
