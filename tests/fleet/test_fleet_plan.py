"""Chunk plan, scheduler choice, quality sums and the progress line of a backfill (no cluster)."""

import io

import pandas as pd
import pytest

from kinetrace.fleet.backfill import sum_quality
from kinetrace.fleet.chunks import plan_chunks
from kinetrace.fleet.cluster import SCHEDULER_ENV, scheduler_address
from kinetrace.fleet.progress import FleetProgress


def test_chunks_cover_the_period_once_on_the_grid():
    # common practice, no source: a partition of [since, until) into consecutive half-open pieces
    edges = plan_chunks("2026-01-01", "2026-12-31T05:00Z", chunk="30D", grid=3600.0)
    assert edges[0][0] == pd.Timestamp("2026-01-01T00:00Z") and edges[-1][1] == pd.Timestamp("2026-12-31T05:00Z")
    assert all(a[1] == b[0] for a, b in zip(edges, edges[1:]))
    assert all(b - a == pd.Timedelta("30D") for a, b in edges[:-1])
    assert len(edges) == 13
    # a chunk shorter than the grid is one grid step; 90 min rounds down to 1 h
    assert plan_chunks("2026-01-01", "2026-01-01T03:00Z", chunk="90min")[1] == (
        pd.Timestamp("2026-01-01T01:00Z"), pd.Timestamp("2026-01-01T02:00Z"))


@pytest.mark.parametrize("since, until, msg", [
    ("2026-01-02", "2026-01-01", "empty"),
    ("2026-01-01T00:30Z", "2026-01-02", "grid"),
])
def test_bad_periods_are_refused_with_the_reason(since, until, msg):
    with pytest.raises(ValueError, match=msg):
        plan_chunks(since, until)


def test_scheduler_address_order(monkeypatch):
    from types import SimpleNamespace as NS

    cfg = NS(fleet=NS(scheduler="tcp://cfg:8786", scheduler_env="SITE_DASK"))
    assert scheduler_address(cfg, address="tcp://cli:1", environ={SCHEDULER_ENV: "tcp://env:2"}) == "tcp://cli:1"
    assert scheduler_address(cfg, environ={SCHEDULER_ENV: "tcp://env:2", "SITE_DASK": "tcp://site:3"}) == "tcp://env:2"
    assert scheduler_address(cfg, environ={"SITE_DASK": "tcp://site:3"}) == "tcp://site:3"
    assert scheduler_address(cfg, environ={}) == "tcp://cfg:8786"
    assert scheduler_address(NS(fleet=NS(scheduler=None, scheduler_env=None)), environ={}) is None


def test_config_key_for_the_scheduler_is_validated(tmp_path):
    from kinetrace.config import load_config
    from kinetrace.errors import KinetraceError
    from tests.pipeline.demo import DEMO

    text = DEMO.read_text()
    good = tmp_path / "good.toml"
    good.write_text(text.replace("[analysis]", '[fleet]\nscheduler = "tcp://10.0.0.5:8786"\n\n[analysis]', 1))
    assert load_config(good).fleet.scheduler == "tcp://10.0.0.5:8786"
    bad = tmp_path / "bad.toml"
    bad.write_text(text.replace("[analysis]", '[fleet]\nschedular = "tcp://x:1"\n\n[analysis]', 1))
    with pytest.raises(KinetraceError, match="schedular"):
        load_config(bad)


def test_quality_counts_add_up_by_tag():
    a = pd.DataFrame({"rows_read": [10, 5], "good": [9, 5], "note": ["x", "y"]}, index=["FT-1", "TT-1"])
    b = pd.DataFrame({"rows_read": [4], "good": [4], "note": ["z"]}, index=["FT-1"])
    out = sum_quality([a, b])
    assert out.loc["FT-1", "rows_read"] == 14 and out.loc["TT-1", "good"] == 5
    assert "note" not in out


def test_progress_line_counts_rate_and_time_left():
    clock = iter([0.0, 1.0, 2.0, 4.0, 4.0, 4.0])
    out = io.StringIO()
    p = FleetProgress(2, 4, stream=out, every=0.0, clock=lambda: next(clock))
    p.chunk(skipped=True)          # found done: not counted in the rate
    p.chunk()
    text = out.getvalue().splitlines()
    assert text[-1] == "fleet: units 0/2 done, chunks 2/4 (1 found done), 0.2 chunks/s, about 8 s left"
