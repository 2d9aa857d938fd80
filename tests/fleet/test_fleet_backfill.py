"""The backfill on a real LocalCluster: chunks stitched without seams, store and Parquet output, resume.

The reference everywhere is one whole, unchunked check of the same period in this process
(common practice, no source: a computation split into chunks must reproduce the unsplit one; the
tolerance allows round-off only).
"""

import io

import numpy as np
import pandas as pd
import pytest

from kinetrace.fleet import run_backfill
from kinetrace.pipeline.daily import _series_for_store, write_results
from kinetrace.store import fingerprint, open_store
from tests.fleet.conftest import SINCE, UNTIL

pytestmark = pytest.mark.slow


def assert_same_series(a: pd.DataFrame, b: pd.DataFrame, what: str) -> None:
    """Same index, columns and values to round-off (rel 1e-9), NaN where NaN."""
    assert a.index.equals(b.index), what
    assert list(a.columns) == list(b.columns), what
    for c in b.columns:
        x, y = a[c], b[c]
        if not (pd.api.types.is_numeric_dtype(y) or pd.api.types.is_bool_dtype(y)):
            assert (x.astype(str) == y.astype(str)).all(), (what, c)
            continue
        x, y = x.to_numpy(dtype=float), y.to_numpy(dtype=float)
        assert (np.isnan(x) == np.isnan(y)).all(), (what, c)
        ok = np.isfinite(y)
        np.testing.assert_allclose(x[ok], y[ok], rtol=1e-9, atol=1e-300, err_msg=f"{what}: {c}")


@pytest.fixture(scope="module")
def backfilled(fleet_plant, dask_client):
    tmp, cfg = fleet_plant
    url = f"sqlite:///{tmp / 'backfill.sqlite'}"
    out = io.StringIO()
    outcome = run_backfill(cfg, since=SINCE, until=UNTIL, chunk="2D", client=dask_client, store=url,
                           parquet=tmp / "parquet", cache_dir=tmp / "cache", progress_stream=out,
                           progress_every=0.0, keep_results=True)
    return tmp, cfg, url, outcome, out.getvalue()


def test_chunks_stitch_to_one_whole_run(backfilled, whole_run):
    _, _, _, outcome, progress = backfilled
    assert outcome.ok and sorted(outcome.units_done) == sorted(whole_run)
    assert outcome.chunks_run == 2 * 3                       # 6 days in 2-day chunks
    for uid, ref in whole_run.items():
        got = outcome.results[uid]
        assert_same_series(got.series, ref.series, uid)
        pd.testing.assert_frame_equal(got.kinetic_parameters, ref.kinetic_parameters, rtol=1e-9)
        assert got.summary.keys() == ref.summary.keys()
        assert [f.evidence() for f in got.faults] == [f.evidence() for f in ref.faults]
        # grid intervals are counted once per chunk, so their sums equal the whole read's
        cols = ["intervals", "missing_intervals", "carried_intervals", "flagged_intervals", "valid_intervals"]
        pd.testing.assert_frame_equal(got.quality[cols].astype(int), ref.quality[cols].astype(int))
    assert progress.splitlines()[-1].startswith("fleet: units 2/2 done, chunks 6/6")
    assert "chunks/s" in progress


def test_store_holds_what_one_whole_run_writes(backfilled, whole_run):
    tmp, cfg, url, outcome, _ = backfilled
    ref_url = f"sqlite:///{tmp / 'whole.sqlite'}"
    ref_db = open_store(ref_url)
    window = (SINCE, UNTIL)
    write_results(ref_db, list(whole_run.values()), window=window, fingerprint=fingerprint(b"whole"))
    db = open_store(url)
    try:
        # one transaction per unit and chunk, and one per unit for its findings
        assert outcome.transactions == 2 * (3 + 1)
        assert (db.runs()["status"] == "complete").all() and len(db.runs()) == 8
        for uid, ref in whole_run.items():
            frame, _ = _series_for_store(ref.series)
            got = db.series(uid)
            want = ref_db.series(uid)
            assert not got.index.duplicated().any()
            assert got.index.equals(frame.index)                   # every interval, once
            assert_same_series(got[want.columns], want, f"store {uid}")
            assert db.watermark(uid) == ref.series.index[-1]
        for table in ("daily_production", "alarms", "forecasts", "whatif", "parameters"):
            a = db.dump([table])[table]
            b = ref_db.dump([table])[table]
            drop = [c for c in ("run_id",) if c in b]
            pd.testing.assert_frame_equal(a.drop(columns=drop).reset_index(drop=True),
                                          b.drop(columns=drop).reset_index(drop=True), rtol=1e-9, obj=table)
    finally:
        db.close()
        ref_db.close()


def test_parquet_partitions_by_unit_and_month(backfilled, whole_run):
    tmp, *_ = backfilled
    import pyarrow.dataset as ds

    files = sorted(p.relative_to(tmp / "parquet").as_posix() for p in (tmp / "parquet").rglob("*.parquet"))
    assert files == [f"unit={u}/month=2026-09/part-0.parquet" for u in sorted(whole_run)]
    table = ds.dataset(tmp / "parquet", format="parquet", partitioning="hive").to_table(
        filter=ds.field("unit") == "R-220").to_pandas()
    frame, _ = _series_for_store(whole_run["R-220"].series)
    np.testing.assert_allclose(table["conversion"].to_numpy(), frame["conversion"].to_numpy(), rtol=1e-12)


def test_rerun_skips_work_done_for_the_same_fingerprint(backfilled, dask_client, whole_run):
    tmp, cfg, url, _, _ = backfilled
    runs_before = len(open_store(url).runs())
    again = run_backfill(cfg, since=SINCE, until=UNTIL, chunk="2D", client=dask_client, store=url,
                         cache_dir=tmp / "cache", progress_stream=io.StringIO())
    assert sorted(again.units_skipped) == sorted(whole_run) and again.chunks_run == 0 and again.transactions == 0
    assert len(open_store(url).runs()) == runs_before
    # a run killed after its chunks were read but before anything was written: a new store, the
    # same cache; no chunk is read again and the results are the same
    fresh = f"sqlite:///{tmp / 'resumed.sqlite'}"
    resumed = run_backfill(cfg, since=SINCE, until=UNTIL, chunk="2D", client=dask_client, store=fresh,
                           cache_dir=tmp / "cache", progress_stream=io.StringIO(), keep_results=True)
    assert resumed.chunks_run == 0 and resumed.chunks_cached == 6 and resumed.ok
    for uid, ref in whole_run.items():
        assert_same_series(resumed.results[uid].series, ref.series, f"resumed {uid}")
    # another chunking is another fingerprint: nothing is skipped
    other = run_backfill(cfg, since=SINCE, until=UNTIL, chunk="4D", client=dask_client, store=url,
                         cache_dir=tmp / "cache", progress_stream=io.StringIO(), units=["R-220"])
    assert other.chunks_run == 2 and other.units_done == ["R-220"]
    # --redo: everything again, the same rows replaced, none added
    redo = run_backfill(cfg, since=SINCE, until=UNTIL, chunk="2D", client=dask_client, store=url,
                        cache_dir=tmp / "cache", progress_stream=io.StringIO(), units=["R-220"], resume=False)
    assert redo.chunks_run == 3 and redo.chunks_cached == 0 and redo.units_done == ["R-220"]
    db = open_store(url)
    assert not db.series("R-220").index.duplicated().any()
    assert db.series("R-220").index.equals(whole_run["R-220"].series.index)
    db.close()


def test_chunks_outside_the_readings_match_the_whole_run(fleet_plant, dask_client):
    # the historian runs from 1 to 7 September; a period two days longer on each side begins and ends
    # in chunks without readings, which one whole run fills with missing intervals (after carrying the
    # last readings forward at the end)
    from kinetrace.config import load_config, unit_model
    from kinetrace.pipeline.daily import check_unit

    tmp, cfg_path = fleet_plant
    since, until = SINCE - pd.Timedelta("2D"), UNTIL + pd.Timedelta("2D")
    cfg = load_config(cfg_path)
    ref = check_unit(cfg, unit_model(cfg.units[1]), config_path=cfg_path, since=since, until=until)
    out = run_backfill(cfg_path, since=since, until=until, chunk="2D", client=dask_client, store=None,
                       cache_dir=tmp / "cache-tail", progress_stream=io.StringIO(), units=[cfg.units[1].id],
                       keep_results=True)
    assert out.ok, out.failed
    assert ref.series.index[0] == since and ref.series.index[-1] == until - pd.Timedelta("1h")
    assert_same_series(out.results[cfg.units[1].id].series, ref.series, "tail")
