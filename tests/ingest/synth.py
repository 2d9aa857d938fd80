"""Small invented historian data sets for the ingest tests (demo plant tags, our own numbers)."""

from __future__ import annotations

import gzip
import sqlite3
import tomllib
from pathlib import Path

import numpy as np
import pandas as pd

from kinetrace.config import validate_config

DEMO = Path(__file__).resolve().parents[2] / "config" / "demo_plant.toml"

#: Tags of R-220 (US units) with a base value in their own unit and a noise level.
R220 = {
    "CB2~R220~FEED~GPM": (20.0, 0.2),
    "CB2~R220~PROD~GPM": (20.0, 0.2),
    "CB2~R220~TEMP~F": (150.0, 0.5),
    "CB2~R220~AA~AN": (0.6, 0.01),
    "CB2~R220~ACOH~AN": (1.8, 0.02),
}
ANALYZERS = {"CB2~R220~AA~AN", "CB2~R220~ACOH~AN"}


def demo_raw() -> dict:
    return tomllib.loads(DEMO.read_text(encoding="utf-8"))


def config(source: dict, *, grid: str = "1 h", tweak=None):
    """The demo plant config with another source (and optional edits of the raw dict)."""
    raw = demo_raw()
    for unit in raw["units"]:            # the tests state their own dead times (the demo file may change)
        for t in unit["tags"]:
            t.pop("dead_time", None)
    raw["source"] = source
    raw["analysis"]["grid"] = grid
    if tweak:
        tweak(raw)
    return validate_config(raw, source="test-config")


def readings(hours: float = 6.0, seed: int = 1, start="2026-09-01T00:00:00Z") -> pd.DataFrame:
    """Long readings of R-220: continuous tags every minute, analyzers every 10 minutes."""
    rng = np.random.default_rng(seed)
    t0 = pd.Timestamp(start)
    out = []
    for tag, (base, noise) in R220.items():
        step = 600 if tag in ANALYZERS else 60
        n = int(hours * 3600 / step)
        t = t0 + pd.to_timedelta(np.arange(n) * step, unit="s")
        v = np.round(base + noise * rng.standard_normal(n), 6)
        out.append(pd.DataFrame({"timestamp": t, "tag": tag, "value": v, "quality": "OK"}))
    df = pd.concat(out, ignore_index=True).sort_values(["timestamp", "tag"], kind="stable", ignore_index=True)
    return df


def iso(ts: pd.Series) -> pd.Series:
    return ts.dt.strftime("%Y-%m-%dT%H:%M:%SZ")


def write_long(df: pd.DataFrame, path: Path, *, sep=",", decimal=".", gz=False) -> Path:
    d = df.assign(timestamp=iso(df["timestamp"]))
    text = d.to_csv(index=False, sep=sep, decimal=decimal, float_format="%.17g" if decimal == "." else None)
    if decimal == ",":
        d = d.assign(value=d["value"].map(lambda v: repr(float(v)).replace(".", ",")))
        text = d.to_csv(index=False, sep=sep)
    if gz:
        with gzip.open(path, "wt", encoding="utf-8", newline="") as f:
            f.write(text)
    else:
        path.write_text(text, encoding="utf-8", newline="")
    return path


def write_wide(df: pd.DataFrame, path: Path, *, units: dict | None = None) -> Path:
    w = df.pivot(index="timestamp", columns="tag", values="value")
    w.index = iso(w.index.to_series())
    lines = [",".join(["timestamp", *w.columns])]
    if units is not None:
        lines.append(",".join(["", *[units.get(c, "") for c in w.columns]]))
    for ts, row in w.iterrows():
        lines.append(",".join([ts, *["" if np.isnan(v) else repr(float(v)) for v in row.to_numpy()]]))
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def write_sqlite(df: pd.DataFrame, path: Path, table="readings") -> Path:
    con = sqlite3.connect(path)
    con.execute(f"CREATE TABLE {table} (timestamp TEXT, tag TEXT, value REAL, quality TEXT)")
    con.executemany(f"INSERT INTO {table} VALUES (?,?,?,?)",
                    zip(iso(df["timestamp"]), df["tag"], df["value"].astype(float), df["quality"]))
    con.commit()
    con.close()
    return path
