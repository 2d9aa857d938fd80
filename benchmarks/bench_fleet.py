"""Benchmark of the backfill (kinetrace.fleet): a simulated fleet on a LocalCluster of 1 and of 2 workers.

The fleet is ``--units`` reactors (default 50) with ``--years`` of 1-minute history each (default 1),
from the project's simulator (the demo plant's two reactors, R-210 and R-220, simulated once and
kept in ``--data``, default ``benchmarks/results/fleet/``, and reused by later runs;
reactor k of the fleet is a copy of one of them under its own id, reading the same historian).
The same backfill runs on an embedded LocalCluster of one worker process and then of two, in
this run, each with a fresh store and chunk cache; printed: wall time of each, the speed-up,
the peak resident memory of each worker process (``VmHWM``, read on the worker at the end),
and reactor-years per minute (with ``--pairs N``, N pairs of runs in alternating order and the
medians: the speed-up is a ratio of two runs minutes apart, and a shared machine's speed drifts).
Also the single-unit year: the whole check of one unit in this process against ingest alone
(``read_unit``) of the same data. Prints; asserts nothing.

Usage: ``python benchmarks/bench_fleet.py [--units 50] [--years 1] [--chunk 30D] [--pairs 1] [--data DIR]``
(small while developing: ``--units 4 --years 1``, or ``--units 2 --years 0.25``).
"""

from __future__ import annotations

import argparse
import os
import resource
import statistics
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "src"))
# as the command line does (kinetrace.cli): one OpenBLAS thread for the check's small dense solves
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")


def historian(folder: Path, days: int) -> Path:
    """The demo plant simulated over ``days`` (generated once per length and reused)."""
    from kinetrace.simulator import generate_sample_historian

    out = folder / f"demo-{days}d"
    db = out / "calder_bank.sqlite"
    if not db.exists():
        t = time.perf_counter()
        generate_sample_historian(ROOT / "config" / "demo_plant.toml", out, days=days, seed=17)
        print(f"simulated {days} days of the demo plant in {time.perf_counter() - t:.1f} s -> {db}")
    return db


def fleet_config(folder: Path, db: Path, units: int) -> Path:
    """A config of ``units`` reactors, copies of R-210 and R-220 in turn, all reading ``db``."""
    import tomllib

    from kinetrace.config import validate_config

    text = (ROOT / "config" / "demo_plant.toml").read_text(encoding="utf-8")
    raw = tomllib.loads(text)
    base = raw["units"]
    raw["units"] = []
    for k in range(units):
        u = dict(base[k % len(base)])
        u["id"] = f"{u['id']}-{k // len(base) + 1:03d}"
        raw["units"].append(u)
    validate_config(raw, source="bench")          # refuse here, with the reason, if the copy is wrong
    # write it back as TOML: the same file text with the units repeated under new ids
    head, _, rest = text.partition("[[units]]")
    blocks = ("[[units]]" + rest).split("\n[[units]]")
    blocks = [b if b.startswith("[[units]]") else "[[units]]" + b for b in blocks]
    out = []
    for k in range(units):
        b = blocks[k % len(blocks)]
        uid = base[k % len(base)]["id"]
        out.append(b.replace(f'id = "{uid}"', f'id = "{uid}-{k // len(base) + 1:03d}"', 1))
    cfg_text = head + "\n".join(out)
    cfg_text = cfg_text.replace('path = "../sample_historian/generated/calder_bank.sqlite"', f'path = "{db.resolve()}"')
    cfg_text = cfg_text.replace('output_dir = "../out"', f'output_dir = "{folder / "out"}"')
    cfg_text = cfg_text.replace('url = "sqlite:///../out/results.sqlite"', f'url = "sqlite:///{folder / "unused.sqlite"}"')
    path = folder / f"fleet-{units}.toml"
    path.write_text(cfg_text, encoding="utf-8")
    return path


def _peak_mb() -> float:
    """Peak resident memory of this process. [MB]

    ``VmHWM`` of /proc (Linux): the high-water mark of the process's own memory map. ``ru_maxrss``
    is not used: a worker process started by fork and exec keeps its parent's maximum across the
    exec, so every worker read the benchmark process's own peak (2797 MB on each)."""
    try:
        with open("/proc/self/status", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1]) / 1024.0
    except OSError:
        pass
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def backfill(cfg: Path, since, until, workers: int, work: Path, chunk: str, run: int = 0) -> tuple[float, list[float], object]:
    """One backfill on a fresh LocalCluster of ``workers``, into a store and chunk cache of its own
    (named by ``workers`` and ``run``, so that no run resumes another's work): (wall [s], peak
    memory of each worker [MB], outcome)."""
    from kinetrace.fleet import run_backfill
    from kinetrace.fleet.cluster import open_client

    with open_client(None, workers=workers, memory_limit="4GiB") as client:
        client.wait_for_workers(workers)
        t = time.perf_counter()
        out = run_backfill(cfg, since=since, until=until, chunk=chunk, client=client,
                           store=f"sqlite:///{work / f'store-{workers}-{run}.sqlite'}",
                           cache_dir=work / f"cache-{workers}-{run}",
                           progress_stream=sys.stderr, progress_every=10.0)
        wall = time.perf_counter() - t
        peaks = sorted(client.run(_peak_mb).values())
    return wall, peaks, out


def single_unit(cfg: Path, since, until) -> tuple[float, float, float]:
    """(whole check, ingest alone, CPU time of the whole check) of R-220 over the period, in this
    process (the CPU time, all threads, tells a slow check from a busy machine). [s]"""
    from kinetrace.config import load_config, unit_model
    from kinetrace.ingest import read_unit
    from kinetrace.pipeline.daily import check_unit

    from kinetrace.ingest import sqlite_bounds

    c = load_config(cfg)
    model = unit_model(c.units[1 if len(c.units) > 1 else 0])     # 5 tags, as in the issue
    t = time.perf_counter()
    read_unit(c, model, config_path=cfg, since=since, until=until)
    ingest = time.perf_counter() - t
    sqlite_bounds._ODD.clear()        # the check reads as a fresh process would, not from the read above
    t, cpu = time.perf_counter(), time.process_time()
    check_unit(c, model, config_path=cfg, since=since, until=until)
    return time.perf_counter() - t, ingest, time.process_time() - cpu


def main() -> None:
    import logging

    import pandas as pd

    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--units", type=int, default=50, help="reactors in the fleet")
    ap.add_argument("--years", type=float, default=1.0, help="years of 1-minute history per reactor")
    ap.add_argument("--chunk", default="30D", help="chunk length (pandas span)")
    ap.add_argument("--pairs", type=int, default=1,
                    help="pairs of 1- and 2-worker runs, in alternating order; the last line gives the medians "
                         "(the speed-up is a ratio of two runs minutes apart: on a shared machine take 3)")
    ap.add_argument("--data", type=Path, default=ROOT / "benchmarks" / "results" / "fleet",
                    help="where the simulated historian is kept between runs (generated once, reused)")
    args = ap.parse_args()
    logging.getLogger("kinetrace").setLevel(logging.WARNING)
    days = max(1, int(round(365 * args.years)))
    args.data.mkdir(parents=True, exist_ok=True)
    db = historian(args.data, days)
    since = pd.Timestamp("2026-09-01T00:00Z")
    until = since + pd.Timedelta(days=days)
    with tempfile.TemporaryDirectory() as tmp:
        work = Path(tmp)
        cfg = fleet_config(work, db, args.units)
        check_s, ingest_s, cpu_s = single_unit(cfg, since, until)
        print(f"single unit, {days} days of 1-minute data from SQLite: check {check_s:.2f} s (CPU {cpu_s:.2f} s), "
              f"ingest alone {ingest_s:.2f} s, after ingest {check_s - ingest_s:.2f} s (ratio check/ingest "
              f"{check_s / ingest_s:.2f}); load average {os.getloadavg()[0]:.1f} on {os.cpu_count()} cores")
        walls, peaks_all, pair_speedups = {1: [], 2: []}, [], []
        for k in range(max(1, args.pairs)):
            order = (1, 2) if k % 2 == 0 else (2, 1)     # alternate, so a drifting machine favours neither
            got = {}
            for workers in order:
                wall, peaks, out = backfill(cfg, since, until, workers, work, args.chunk, run=k)
                got[workers] = wall
                walls[workers].append(wall)
                peaks_all.extend(peaks)
                state = "ok" if out.ok else f"{len(out.failed)} unit(s) failed: {out.failed}"
                print(f"{workers} worker(s): {wall:.1f} s, {out.chunks_run} chunks, "
                      f"{args.units * days / 365 / (wall / 60):.2f} reactor-years per minute, "
                      f"peak per worker {', '.join(f'{p:.0f}' for p in peaks)} MB; {state}", flush=True)
            pair_speedups.append(got[1] / got[2])
    ry = args.units * days / 365
    w1, w2 = statistics.median(walls[1]), statistics.median(walls[2])
    if len(pair_speedups) > 1:
        print(f"speed-up of each pair: {', '.join(f'{x:.2f}' for x in pair_speedups)}; medians below")
    print(f"fleet: {ry:g} reactor-years, 1 worker {w1:.1f} s, 2 workers {w2:.1f} s, speed-up {w1 / w2:.2f}, "
          f"peak {max(peaks_all):.0f} MB per worker")


if __name__ == "__main__":
    main()
