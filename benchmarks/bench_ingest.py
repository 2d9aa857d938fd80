"""Benchmark of kinetrace.ingest: one year of 1-minute data for 12 tags (about 6.3 million long rows).

Reads the same invented readings from a long CSV export and from SQLite, aligned
to a 1-minute UTC grid, with kinetrace (``read_unit``: quality map, screening,
SI conversion, time-weighted alignment) and with the plain pandas baseline
``read_csv`` (or ``read_sql_query``) + ``pivot_table`` + ``resample().mean()``
measured in the same run. Each measurement runs in a fresh subprocess, after a
warm-up on the first 12 000 readings, so that its peak resident memory (the
kernel's peak-RSS mark, reset after the warm-up, minus the resident size then)
is its own data's. Prints rows/s, peak memory and ratios; asserts nothing about time.

Usage: ``python benchmarks/bench_ingest.py [--days 365] [--grid 60] [--keep DIR]``
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import sqlite3
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "src"))

#: 12 tags of an invented reactor R-220 (Calder Bank demo plant): name, role, unit, species, base value, noise.
TAGS = [
    ("CB2~R220~FEED~GPM", "feed_flow", "gpm", None, 20.0, 0.2),
    ("CB2~R220~PROD~GPM", "outlet_flow", "gpm", None, 20.0, 0.2),
    ("CB2~R220~TEMP~F", "temperature", "degF", None, 150.0, 0.5),
    ("CB2~R220~TEMP_B~F", "temperature", "degF", None, 150.5, 0.5),
    ("CB2~R220~AA~AN", "outlet_conc", "mol/L", "AA", 0.6, 0.01),
    ("CB2~R220~ACOH~AN", "outlet_conc", "mol/L", "AcOH", 1.8, 0.02),
    ("CB2~R220~W~AN", "outlet_conc", "mol/L", "W", 4.9, 0.03),
    ("CB2~R220~FAA~AN", "feed_conc", "mol/L", "AA", 1.5, 0.01),
    ("CB2~R220~FW~AN", "feed_conc", "mol/L", "W", 6.0, 0.03),
    ("CB2~R220~JKT_IN~F", "temperature", "degF", None, 120.0, 0.5),
    ("CB2~R220~JKT_OUT~F", "temperature", "degF", None, 135.0, 0.5),
    ("CB2~R220~RECY~GPM", "feed_flow", "gpm", None, 5.0, 0.1),
]


def make_config(source: dict, grid_s: int):
    from kinetrace.config import validate_config

    import tomllib

    raw = tomllib.loads((ROOT / "config" / "demo_plant.toml").read_text(encoding="utf-8"))
    raw["source"] = source
    raw["analysis"]["grid"] = f"{grid_s} s"
    raw["units"] = [raw["units"][1]]
    raw["units"][0]["tags"] = [
        {"tag": t, "role": r, "unit": u, **({"species": s} if s else {}), "valid_range": [-1e9, 1e9]}
        for t, r, u, s, _, _ in TAGS]
    return validate_config(raw, source="bench")


def generate(folder: Path, days: int) -> tuple[Path, Path, int]:
    import numpy as np
    import pyarrow as pa
    import pyarrow.compute as pc
    import pyarrow.csv as pcsv

    n = days * 1440
    rng = np.random.default_rng(2026)
    t = pa.array(np.repeat(np.datetime64("2026-01-01T00:00:00", "s") + np.arange(n) * np.timedelta64(60, "s"),
                           len(TAGS)))
    ts = pc.strftime(pc.cast(t, pa.timestamp("s", tz="UTC")), format="%Y-%m-%dT%H:%M:%SZ")
    tag = pa.array(np.tile(np.array([x[0] for x in TAGS], dtype=object), n))
    base = np.tile(np.array([x[4] for x in TAGS]), n)
    noise = np.tile(np.array([x[5] for x in TAGS]), n)
    val = np.round(base + noise * rng.standard_normal(base.size), 4)
    q = pa.array(np.where(rng.random(base.size) < 0.001, "BAD", "OK"))
    table = pa.table({"timestamp": ts, "tag": tag, "value": val, "quality": q})
    csv = folder / "bench_long.csv"
    pcsv.write_csv(table, csv, write_options=pcsv.WriteOptions(quoting_style="none"))
    db = folder / "bench.sqlite"
    con = sqlite3.connect(db)
    con.execute("PRAGMA journal_mode=OFF")
    con.execute("PRAGMA synchronous=OFF")
    con.execute("CREATE TABLE readings (timestamp TEXT, tag TEXT, value REAL, quality TEXT)")
    step = 500_000
    for a in range(0, table.num_rows, step):
        part = table.slice(a, step)
        con.executemany("INSERT INTO readings VALUES (?,?,?,?)",
                        zip(*(part.column(c).to_pylist() for c in ("timestamp", "tag", "value", "quality"))))
    con.execute("CREATE INDEX readings_tag_time ON readings (tag, timestamp)")
    con.commit()
    con.close()
    return csv, db, table.num_rows


def _rss_mb() -> float:
    with open("/proc/self/statm") as f:
        return int(f.read().split()[1]) * os.sysconf("SC_PAGE_SIZE") / 2**20


def _reset_peak() -> bool:
    """Reset the kernel's peak-RSS mark (VmHWM) so the peak after imports is measured (Linux >= 4.0)."""
    try:
        with open("/proc/self/clear_refs", "w") as f:
            f.write("5")
        return True
    except OSError:
        return False


def _peak_mb() -> float:
    with open("/proc/self/status") as f:
        for line in f:
            if line.startswith("VmHWM:"):
                return int(line.split()[1]) / 1024
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024


def _tiny_copy(path: str, folder: Path) -> str:
    """The first 12 000 readings of a benchmark file, for a warm-up run."""
    if path.endswith(".csv"):
        out = folder / "tiny.csv"
        with open(path, "rb") as f:
            out.write_bytes(b"".join(f.readline() for _ in range(12_001)))
        return str(out)
    out = folder / "tiny.sqlite"
    con = sqlite3.connect(out)
    con.execute("ATTACH DATABASE ? AS big", (path,))
    con.execute("CREATE TABLE readings AS SELECT * FROM big.readings WHERE rowid <= 12000")
    con.commit()
    con.close()
    return str(out)


def run_one(method: str, path: str, grid_s: int, warm: bool = True) -> dict:
    """One measurement, in this (fresh) process.

    A warm-up run on the file's first 12 000 readings comes first, so that code the
    libraries page in on first use is not counted as the method's memory.
    """
    if warm:
        with tempfile.TemporaryDirectory() as tmp:
            run_one(method, _tiny_copy(path, Path(tmp)), grid_s, warm=False)
    import numpy as np
    import pandas as pd
    import sqlalchemy  # noqa: F401  (imported before the baseline RSS, like the others)

    from kinetrace.ingest import read_unit

    before = _rss_mb()
    reset = _reset_peak()
    t0 = time.perf_counter()
    if method == "kinetrace-csv":
        cfg = make_config({"kind": "csv", "path": path, "good_quality": ["OK"]}, grid_s)
        d = read_unit(cfg, "R-220", config_path=Path(path).parent / "bench.toml")
        frame_mb = (d.values.memory_usage(deep=True).sum() + d.valid.memory_usage(deep=True).sum()) / 2**20
        values_mb = d.values.memory_usage(deep=True).sum() / 2**20
        shape, check = d.values.shape, float(np.nanmean(d.values.to_numpy()[:, 0]))
        rows = int(d.quality["rows_read"].sum())
    elif method == "kinetrace-sqlite":
        cfg = make_config({"kind": "sqlite", "path": path, "good_quality": ["OK"]}, grid_s)
        d = read_unit(cfg, "R-220", config_path=Path(path).parent / "bench.toml")
        frame_mb = (d.values.memory_usage(deep=True).sum() + d.valid.memory_usage(deep=True).sum()) / 2**20
        values_mb = d.values.memory_usage(deep=True).sum() / 2**20
        shape, check = d.values.shape, float(np.nanmean(d.values.to_numpy()[:, 0]))
        rows = int(d.quality["rows_read"].sum())
    elif method in ("baseline-csv", "baseline-sqlite"):
        if method == "baseline-csv":
            df = pd.read_csv(path, parse_dates=["timestamp"])
        else:
            con = sqlite3.connect(path)
            df = pd.read_sql_query("SELECT timestamp, tag, value, quality FROM readings", con)
            con.close()
            df["timestamp"] = pd.to_datetime(df["timestamp"], format="ISO8601", utc=True)
        rows = len(df)
        w = df.pivot_table(index="timestamp", columns="tag", values="value")
        del df
        w = w.resample(f"{grid_s}s").mean()
        frame_mb = values_mb = w.memory_usage(deep=True).sum() / 2**20
        shape, check = w.shape, float(np.nanmean(w["CB2~R220~FEED~GPM"].to_numpy()))
    else:
        raise ValueError(f"unknown method {method!r}")
    dt = time.perf_counter() - t0
    peak = _peak_mb()
    return {"method": method, "seconds": dt, "rows": rows, "rows_per_s": rows / dt, "peak_mb": peak - before,
            "peak_reset": reset,
            "frame_mb": frame_mb, "values_mb": values_mb, "shape": list(shape), "check": check}


def measure(method: str, path: Path, grid_s: int) -> dict:
    out = subprocess.run([sys.executable, __file__, "--one", method, str(path), str(grid_s)],
                         capture_output=True, text=True, check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--days", type=int, default=365)
    ap.add_argument("--grid", type=int, default=60, help="grid step [s]")
    ap.add_argument("--keep", type=Path, default=None, help="folder for the generated files (kept)")
    ap.add_argument("--reuse", action="store_true", help="reuse the files already in --keep")
    ap.add_argument("--one", nargs=3, help=argparse.SUPPRESS)
    a = ap.parse_args()
    if a.one:
        print(json.dumps(run_one(a.one[0], a.one[1], int(a.one[2]))))
        return
    folder = a.keep or Path(tempfile.mkdtemp(prefix="kt-bench-"))
    folder.mkdir(parents=True, exist_ok=True)
    t0 = time.perf_counter()
    if a.reuse and (folder / "bench_long.csv").exists() and (folder / "bench.sqlite").exists():
        csv, db, n = folder / "bench_long.csv", folder / "bench.sqlite", a.days * 1440 * len(TAGS)
    else:
        csv, db, n = generate(folder, a.days)
    print(f"generated {n:,} long rows ({a.days} days x 1440 min x {len(TAGS)} tags) in {time.perf_counter() - t0:.1f} s; "
          f"CSV {csv.stat().st_size / 2**20:.0f} MB, SQLite {db.stat().st_size / 2**20:.0f} MB; grid {a.grid} s")
    res = {}
    for m, p in [("baseline-csv", csv), ("kinetrace-csv", csv), ("baseline-sqlite", db), ("kinetrace-sqlite", db)]:
        r = res[m] = measure(m, p, a.grid)
        print(f"{m:17s} {r['seconds']:7.2f} s  {r['rows_per_s'] / 1e6:6.2f} M rows/s  peak +{r['peak_mb']:7.0f} MB  "
              f"frame {r['frame_mb']:6.1f} MB (values {r['values_mb']:.1f})  shape {tuple(r['shape'])}")
    for src in ("csv", "sqlite"):
        k, b = res[f"kinetrace-{src}"], res[f"baseline-{src}"]
        print(f"{src:6s}: kinetrace is {b['seconds'] / k['seconds']:.2f}x the baseline's speed (goal >= 2x); "
              f"peak memory {k['peak_mb'] / k['frame_mb']:.2f}x its final frame (values+valid; goal < 3x), "
              f"{k['peak_mb'] / k['values_mb']:.2f}x the values alone; baseline peak {b['peak_mb'] / b['frame_mb']:.2f}x its frame")
    if a.keep is None:
        for p in (csv, db):
            p.unlink()
        folder.rmdir()


if __name__ == "__main__":
    main()
