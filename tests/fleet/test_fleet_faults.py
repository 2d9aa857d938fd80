"""Faults in a backfill on a real LocalCluster: a worker killed mid-task, a unit whose data is unusable."""

import io
import os
import signal
import threading
import time

import pytest

from kinetrace.fleet import run_backfill
from kinetrace.store import open_store
from tests.fleet.conftest import SINCE, UNTIL
from tests.fleet.test_fleet_backfill import assert_same_series

pytestmark = pytest.mark.slow


def _kill_worker_running(client, prefix: str, killed: dict, timeout: float = 120.0) -> None:
    """Kill (SIGKILL, by pid) the worker process running a task whose key starts with ``prefix``."""
    end = time.monotonic() + timeout
    while time.monotonic() < end:
        for addr, keys in client.processing().items():
            if any(str(k).startswith(prefix) for k in keys):
                pid = client.run(os.getpid, workers=[addr])[addr]
                os.kill(pid, signal.SIGKILL)
                killed.update(addr=addr, pid=pid)
                return
        time.sleep(0.02)


def test_worker_killed_mid_task_loses_and_duplicates_nothing(fleet_plant, dask_client, whole_run):
    tmp, cfg = fleet_plant
    url = f"sqlite:///{tmp / 'killed.sqlite'}"
    pids_before = set(dask_client.run(os.getpid).values())
    killed = {}
    # the unit's finishing task runs for seconds: kill the worker that runs it
    killer = threading.Thread(target=_kill_worker_running, args=(dask_client, "kt-unit-R-220", killed))
    killer.start()
    outcome = run_backfill(cfg, since=SINCE, until=UNTIL, chunk="2D", client=dask_client, store=url,
                           cache_dir=tmp / "cache-killed", progress_stream=io.StringIO(), units=["R-220"],
                           keep_results=True)
    killer.join()
    assert killed.get("pid") in pids_before, "no worker was killed while the unit's task ran"
    assert outcome.ok and outcome.units_done == ["R-220"]
    assert_same_series(outcome.results["R-220"].series, whole_run["R-220"].series, "after a killed worker")
    db = open_store(url)
    try:
        got = db.series("R-220")
        assert not got.index.duplicated().any()
        assert got.index.equals(whole_run["R-220"].series.index)
        assert (db.runs()["status"] == "complete").all() and len(db.runs()) == 3 + 1
    finally:
        db.close()
    # the nanny restarted the killed worker: the cluster is whole again for the next tests
    dask_client.wait_for_workers(2, timeout=60)


def test_a_failed_unit_is_reported_and_the_others_complete(fleet_plant, dask_client, monkeypatch):
    from typer.testing import CliRunner

    from kinetrace.cli import app

    tmp, cfg = fleet_plant
    bad = tmp / "one-tag-missing.toml"
    text = cfg.read_text()
    assert 'tag = "R210-TT-103"' in text
    bad.write_text(text.replace('tag = "R210-TT-103"', 'tag = "R210-TT-999"')
                   .replace(f"sqlite:///{tmp / 'unused.sqlite'}", f"sqlite:///{tmp / 'partial.sqlite'}"))
    # an existing cluster, by the environment variable
    monkeypatch.setenv("KINETRACE_DASK_SCHEDULER", dask_client.scheduler.address)
    res = CliRunner().invoke(app, ["backfill", "--config", str(bad), "--since", "2026-09-01", "--until",
                                   "2026-09-07", "--chunk", "4D"])
    assert res.exit_code == 1, res.output
    assert "unit R-210 failed" in res.output and "R210-TT-999" in res.output
    assert f"on {dask_client.scheduler.address}" in res.output
    db = open_store(f"sqlite:///{tmp / 'partial.sqlite'}")
    try:
        assert len(db.series("R-220")) == 144 and db.watermark("R-210") is None
    finally:
        db.close()
    # bad arguments: exit 2 with the reason, before any work
    res = CliRunner().invoke(app, ["backfill", "--config", str(bad), "--since", "2026-09-01"])
    assert res.exit_code == 2 and "--until" in res.output
