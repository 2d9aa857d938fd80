"""Writers of the sample historian: long CSV export, SQLite table, ground truth, scenario facts.

Long layout, one row per reading, sorted by timestamp then tag:

=========== ====== ===========================================================
column      type   meaning
=========== ====== ===========================================================
timestamp   TEXT   ISO 8601 UTC with ``Z``, e.g. ``2026-09-01T06:00:00Z``
tag         TEXT   tag name of the plant configuration
value       REAL   reading in the tag's engineering unit; empty/NULL allowed on a BAD row
quality     TEXT   ``OK`` good, ``QUERIED`` doubtful, ``BAD`` bad
=========== ====== ===========================================================

Values are rounded to ``significant_digits`` (default 7) once, so that the CSV and
the SQLite table hold the same numbers. Files are written to a temporary name and
renamed, so a reader never sees half a file.
"""

from __future__ import annotations

import json
import os
import sqlite3
from pathlib import Path

import numpy as np
import pandas as pd

from ..errors import KinetraceError
from .sensors import QUALITY_NAMES

READINGS_COLUMNS = ("timestamp", "tag", "value", "quality")


def readings_frame(readings: dict, start, step: float, significant_digits: int = 7) -> pd.DataFrame:
    """All readings in the long layout, sorted by timestamp then tag.

    Parameters
    ----------
    readings : dict of str -> Readings
    start : datetime
        Run start, UTC.
    step : float
        Grid spacing. [s]
    significant_digits : int
        Digits kept of each value. [-]

    Returns
    -------
    DataFrame
        Columns ``timestamp`` (str), ``tag`` (str), ``value`` (float, NaN empty), ``quality`` (str).

    >>> from kinetrace.simulator.sensors import Readings
    >>> from datetime import datetime, timezone
    >>> r = {"T1": Readings("T1", np.array([0, 1]), np.array([1.23456789, np.nan]), np.array([0, 2], np.int8))}
    >>> readings_frame(r, datetime(2026, 9, 1, tzinfo=timezone.utc), 60.0, 4).values.tolist()
    [['2026-09-01T00:00:00Z', 'T1', 1.235, 'OK'], ['2026-09-01T00:01:00Z', 'T1', nan, 'BAD']]
    """
    tags = sorted(readings)
    idx = np.concatenate([readings[t].index for t in tags])
    code = np.concatenate([np.full(len(readings[t].index), k, np.int32) for k, t in enumerate(tags)])
    value = np.concatenate([readings[t].value for t in tags])
    qual = np.concatenate([readings[t].quality for t in tags])
    order = np.lexsort((code, idx))
    idx, code, value, qual = idx[order], code[order], value[order], qual[order]
    t0 = np.datetime64(pd.Timestamp(start).tz_convert("UTC").tz_localize(None).to_datetime64(), "s")
    uniq, inv = np.unique(idx, return_inverse=True)
    stamps = np.char.add(np.datetime_as_string(t0 + (uniq * int(step)).astype("timedelta64[s]"), unit="s"), "Z")
    return pd.DataFrame({
        "timestamp": stamps[inv].astype(object),
        "tag": np.asarray(tags, dtype=object)[code],
        "value": round_significant(value, significant_digits),
        "quality": np.asarray(QUALITY_NAMES, dtype=object)[qual],
    })


def round_significant(values, digits: int) -> np.ndarray:
    """Round to ``digits`` significant digits; NaN stays NaN, 0 stays 0. [same unit]

    >>> round_significant([123456.789, -0.000123456, 0.0, float("nan")], 3).tolist()
    [123000.0, -0.000123, 0.0, nan]
    """
    fmt = f"{{:.{int(digits)}g}}".format
    return np.array([float(fmt(x)) for x in np.asarray(values, dtype=float).tolist()], dtype=float)


def _atomic(path: Path):
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_name(path.name + ".tmp")
    if tmp.exists():
        tmp.unlink()
    return tmp


def write_csv(frame: pd.DataFrame, path) -> Path:
    """Write the long readings CSV (``timestamp,tag,value,quality``; empty value for NaN).

    Tags are written unquoted: the writer refuses a tag holding a comma, quote or newline.
    """
    bad = [t for t in frame["tag"].unique() if any(ch in t for ch in ',"\n')]
    if bad:
        raise KinetraceError(f"tags {bad} hold a comma, quote or newline; the CSV export writes tags unquoted")
    path = Path(path)
    tmp = _atomic(path)
    # shortest text that reads back to the same double (the values are already rounded)
    text = [repr(v) if v == v else "" for v in frame["value"].to_numpy(float).tolist()]
    rows = zip(frame["timestamp"].tolist(), frame["tag"].tolist(), text, frame["quality"].tolist())
    with open(tmp, "w", encoding="utf-8", newline="\n") as fh:
        fh.write(",".join(READINGS_COLUMNS) + "\n")
        fh.writelines(f"{a},{b},{c},{d}\n" for a, b, c, d in rows)
    os.replace(tmp, path)
    return path


def write_sqlite(frame: pd.DataFrame, path, table: str = "readings") -> Path:
    """Write the readings to SQLite table ``table(timestamp TEXT, tag TEXT, value REAL, quality TEXT)``,
    with an index on (tag, timestamp); NaN values become NULL."""
    path = Path(path)
    tmp = _atomic(path)
    con = sqlite3.connect(tmp)
    try:
        con.execute("PRAGMA journal_mode=OFF")
        con.execute("PRAGMA synchronous=OFF")
        con.execute(f'CREATE TABLE "{table}" (timestamp TEXT NOT NULL, tag TEXT NOT NULL, value REAL, quality TEXT)')
        value = frame["value"].to_numpy(float)
        vals = [None if v != v else v for v in value.tolist()]
        rows = zip(frame["timestamp"].tolist(), frame["tag"].tolist(), vals, frame["quality"].tolist())
        con.executemany(f'INSERT INTO "{table}" VALUES (?, ?, ?, ?)', rows)
        con.execute(f'CREATE INDEX "ix_{table}_tag_timestamp" ON "{table}" (tag, timestamp)')
        con.commit()
    finally:
        con.close()
    os.replace(tmp, path)
    return path


def write_truth(frame: pd.DataFrame, path, units: dict[str, str]) -> Path:
    """Write a unit's ground truth as Parquet (pyarrow); column units go in the file metadata."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    path = Path(path)
    tmp = _atomic(path)
    table = pa.Table.from_pandas(frame, preserve_index=False)
    meta = dict(table.schema.metadata or {})
    meta[b"kinetrace.units"] = json.dumps(units).encode()
    pq.write_table(table.replace_schema_metadata(meta), tmp)
    os.replace(tmp, path)
    return path


def write_json(data: dict, path) -> Path:
    """Write a JSON document (indented, keys in insertion order)."""
    path = Path(path)
    tmp = _atomic(path)
    tmp.write_text(json.dumps(data, indent=2, default=str) + "\n", encoding="utf-8")
    os.replace(tmp, path)
    return path
