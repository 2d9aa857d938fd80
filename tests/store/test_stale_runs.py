"""Stale runs: a run killed mid-transaction is marked 'abandoned' when the next run starts; a live one never is.

Each run holds the store's run lease for its whole life (a session advisory lock on PostgreSQL,
an OS file lock beside a SQLite file), released by the server or the kernel when the process
dies; a run that holds the lease knows that every other 'running' record is orphaned. The
checks are properties of the store (common practice, no source).
"""

import os
import signal
import subprocess
import sys
import textwrap
import threading
import time
from pathlib import Path

import pandas as pd
import pytest

from kinetrace.report import build_report
from kinetrace.store import RUN_STATES, open_store

from .synth import FP, fill_window

W0, W1 = pd.Timestamp("2026-11-29T00:00Z"), pd.Timestamp("2026-12-01T00:00Z")
ROOT = Path(__file__).resolve().parents[2]

HOLDER = textwrap.dedent("""
    import sys, time
    import pandas as pd
    from kinetrace.store import open_store
    from tests.store.synth import fill_window
    store = open_store(sys.argv[1])
    w0, w1 = pd.Timestamp("2026-11-29T00:00Z"), pd.Timestamp("2026-12-01T00:00Z")
    with store.write_run((w0, w1), config_fingerprint="sha256:holder") as run:
        fill_window(run, w0, w1, freq="1h", seed=7)
        print("inside", run.run_id, flush=True)
        time.sleep(600)
""")


def _start_holder(store_url, tmp_path):
    script = tmp_path / "holder.py"
    script.write_text(HOLDER)
    env = dict(os.environ, PYTHONPATH=os.pathsep.join([str(ROOT / "src"), str(ROOT)]))
    proc = subprocess.Popen([sys.executable, str(script), store_url], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True, env=env)
    line = proc.stdout.readline()
    assert line.startswith("inside"), (line, proc.stderr.read() if proc.poll() is not None else "")
    return proc, int(line.split()[1])


def _kill(proc):
    proc.send_signal(signal.SIGKILL)
    assert proc.wait(timeout=60) == -signal.SIGKILL


def test_killed_run_is_abandoned_by_the_next_run_and_the_report_shows_the_last_complete(store_url, tmp_path):
    store = open_store(store_url)
    with store.write_run((W0, W1), config_fingerprint=FP) as run:
        fill_window(run, W0, W1, freq="1h")
        good_id = run.run_id
    proc, killed_id = _start_holder(store_url, tmp_path)
    try:
        _kill(proc)
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait()
    time.sleep(0.2)
    runs = open_store(store_url).runs().set_index("run_id")
    assert runs.loc[killed_id, "status"] == "running"          # nothing has started since
    # the report, before any new run, names the last complete run, not the orphan
    files = build_report(store, tmp_path / "r1", None, tz="UTC")
    assert f"last complete run #{good_id}" in files.html.read_text()
    # the next run marks it abandoned, with a finish time and why
    with store.write_run((W1, W1 + pd.Timedelta("1D")), config_fingerprint=FP) as run:
        fill_window(run, W1, W1 + pd.Timedelta("1D"), freq="1h")
        new_id = run.run_id
    runs = store.runs().set_index("run_id")
    assert runs.loc[killed_id, "status"] == "abandoned"
    assert pd.notna(runs.loc[killed_id, "finished"])
    assert "abandoned" in runs.loc[killed_id, "message"] and f"run {new_id}" in runs.loc[killed_id, "message"]
    assert runs.loc[[good_id, new_id], "status"].tolist() == ["complete", "complete"]
    assert set(runs["status"]) <= set(RUN_STATES)
    files = build_report(store, tmp_path / "r2", None, tz="UTC")
    assert f"last complete run #{new_id}" in files.html.read_text()
    # the killed run's results never became visible
    assert (store.dump(["series_values"])["series_values"]["run_id"] != killed_id).all()


def test_a_live_run_is_never_abandoned(store_url, tmp_path):
    """A run that starts while another process is inside its run waits for the lease, then proceeds."""
    store = open_store(store_url)
    proc, live_id = _start_holder(store_url, tmp_path)
    started, finished = threading.Event(), threading.Event()
    errors = []

    def second():
        try:
            started.set()
            with store.write_run((W0, W1), config_fingerprint=FP) as run:
                fill_window(run, W0, W1, freq="1h", seed=3)
            finished.set()
        except Exception as exc:  # noqa: BLE001 - asserted below
            errors.append(exc)

    t = threading.Thread(target=second)
    try:
        t.start()
        started.wait(10)
        time.sleep(2.0)
        assert not finished.is_set() and not errors         # waits for the lease
        runs = open_store(store_url).runs().set_index("run_id")
        assert runs.loc[live_id, "status"] == "running"      # and leaves the live run alone
        assert len(runs) == 1                                # its own record comes after the lease
    finally:
        _kill(proc)
        t.join(timeout=120)
    assert not errors and finished.is_set()
    runs = store.runs().set_index("run_id")
    assert runs.loc[live_id, "status"] == "abandoned"
    assert runs["status"].tolist().count("complete") == 1


def test_store_written_before_the_abandoned_state_is_upgraded(store_url):
    """A store whose runs table predates 'abandoned' accepts it after the next open (constraint replaced)."""
    from sqlalchemy import create_engine, text

    store = open_store(store_url)
    store.close()
    engine = create_engine(store_url)
    old = "CHECK (status IN ('running', 'complete', 'failed'))"
    with engine.begin() as conn:
        if engine.dialect.name == "postgresql":
            conn.execute(text("ALTER TABLE runs DROP CONSTRAINT runs_status"))
            conn.execute(text(f"ALTER TABLE runs ADD CONSTRAINT runs_status {old}"))
        else:
            sql = conn.execute(text("SELECT sql FROM sqlite_master WHERE name = 'runs'")).scalar()
            conn.exec_driver_sql("PRAGMA writable_schema = ON")
            conn.execute(text("UPDATE sqlite_master SET sql = :s WHERE name = 'runs'"),
                         {"s": sql.replace("'failed', 'abandoned'", "'failed'")})
            conn.exec_driver_sql("PRAGMA writable_schema = OFF")
        conn.execute(text("INSERT INTO runs (started, status, config_fingerprint, window_start, window_end, "
                          "software_version) VALUES (:t, 'running', 'sha256:old', :t, :u, 'old')"),
                     {"t": W0.value // 1000 if engine.dialect.name == "sqlite" else W0,
                      "u": W1.value // 1000 if engine.dialect.name == "sqlite" else W1})
    engine.dispose()
    store = open_store(store_url)
    with store.write_run((W0, W1), config_fingerprint=FP) as run:
        fill_window(run, W0, W1, freq="1h")
    assert store.runs()["status"].tolist() == ["abandoned", "complete"]
