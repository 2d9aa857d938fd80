"""Rows with a missing or odd-shaped stamp are read by every SQLite window read, also when remembered.

The rowid bounds of such rows are remembered per state of the database file
(kinetrace.ingest.sqlite_bounds), so a backfill that reads a year in monthly windows scans for
them once. Reference: the CSV path over the same readings (it reads the whole file and applies
the window after parsing, so it cannot miss a row), with a fresh memory for every SQLite read.
Checked: a second read from memory equals the first; rows added to the file since (a new file
state) are seen.
"""

import sqlite3

import numpy as np
import pandas as pd

from kinetrace.ingest import read_unit, sqlite_bounds

from .synth import config, readings

SINCE, UNTIL = "2026-09-01T01:00:00Z", "2026-09-01T05:00:00Z"
FATES = ["rows_read", "good", "bad_timestamp", "bad_value", "duplicate", "intervals", "valid_intervals"]


def _frame(df):
    out = pd.DataFrame({"timestamp": df["timestamp"].dt.strftime("%Y-%m-%dT%H:%M:%SZ"), "tag": df["tag"],
                        "value": df["value"].astype(float), "quality": df["quality"]})
    return out


def _write(tmp_path, frame):
    frame.to_csv(tmp_path / "long.csv", index=False)
    path = tmp_path / "h.sqlite"
    if path.exists():
        path.unlink()
    con = sqlite3.connect(path)
    con.execute("CREATE TABLE readings (timestamp TEXT, tag TEXT, value REAL, quality TEXT)")
    con.execute("CREATE INDEX ix ON readings (tag, timestamp)")
    con.executemany("INSERT INTO readings VALUES (?,?,?,?)",
                    [(None if pd.isna(t) else t, g, v, q) for t, g, v, q in frame.itertuples(index=False)])
    con.commit()
    con.close()


def _read(tmp_path, kind, path):
    cfg = config({"good_quality": ["OK"], "kind": kind, "path": path}, grid="10 min")
    return read_unit(cfg, "R-220", config_path=tmp_path / "plant.toml", since=SINCE, until=UNTIL)


def _same(a, b):
    pd.testing.assert_index_equal(a.values.index, b.values.index)
    np.testing.assert_allclose(a.values.to_numpy(), b.values.to_numpy(), rtol=1e-12, atol=0)
    pd.testing.assert_frame_equal(a.quality[FATES], b.quality[FATES])


def _with_odd_rows(df, where: list[int]):
    frame = _frame(df)
    frame.loc[where[0], "timestamp"] = None                       # a missing stamp
    for i in where[1:]:
        frame.loc[i, "timestamp"] = "not a time"                  # a text of another shape
    return frame


def test_odd_stamps_are_counted_from_memory_and_after_the_file_changes(tmp_path):
    # in time order, as a historian appends; the window's rows near the start, and far more rows
    # after them than one rowid range of the bulk read holds (50,000)
    df = readings(hours=330, seed=5, start="2026-08-31T22:00:00Z").sort_values("timestamp", kind="stable")
    df = df.reset_index(drop=True)
    first = _with_odd_rows(df, [3, 40, 41])
    _write(tmp_path, first)
    ref = _read(tmp_path, "csv", "long.csv")
    assert ref.quality["bad_timestamp"].sum() == 3
    sqlite_bounds._ODD.clear()
    got = _read(tmp_path, "sqlite", "h.sqlite")
    _same(got, ref)
    assert len(sqlite_bounds._ODD) == 1                           # remembered
    _same(_read(tmp_path, "sqlite", "h.sqlite"), ref)             # read again from memory: the same
    # the historian changes: more odd rows, one of them after every row read so far
    second = _with_odd_rows(df, [3, 40, 41, 7, 900])
    extra = second.iloc[[10]].assign(timestamp="still not a time")
    second = pd.concat([second, extra], ignore_index=True)
    _write(tmp_path, second)
    ref2 = _read(tmp_path, "csv", "long.csv")
    assert ref2.quality["bad_timestamp"].sum() == 6
    _same(_read(tmp_path, "sqlite", "h.sqlite"), ref2)
    sqlite_bounds._ODD.clear()
    _same(_read(tmp_path, "sqlite", "h.sqlite"), ref2)
