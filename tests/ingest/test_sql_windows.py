"""Exact SQL windows: whatever the stamp spelling, SQLite and PostgreSQL give the CSV path's fates and frame.

Reference: the long CSV of the same readings in the same spelling (the CSV path reads the whole
file and applies the window after parsing, so it cannot lose a reading at the window's edges);
and, independently, the count of readings whose UTC time lies in the read window, computed with
pandas from the generated UTC times. Values pass through text with 17 significant digits (exact).
"""

import io

import numpy as np
import pandas as pd
import psycopg
import pytest
import sqlalchemy as sa

from kinetrace.ingest import read_unit

from .synth import config, readings, write_sqlite

SINCE, UNTIL = "2026-09-01T01:00:00Z", "2026-09-01T05:00:00Z"

#: Spellings of the same UTC instants: (render(UTC Series) -> texts, source options).
SPELLINGS = {
    "offset-plus-nine": (lambda t: t.dt.tz_convert("Asia/Tokyo").dt.strftime("%Y-%m-%dT%H:%M:%S+09:00"), {}),
    "naive-local-chicago": (lambda t: t.dt.tz_convert("America/Chicago").dt.strftime("%Y-%m-%dT%H:%M:%S"),
                            {"timezone": "America/Chicago"}),
    "space-separator": (lambda t: t.dt.strftime("%Y-%m-%d %H:%M:%S+00:00"), {}),
    "space-naive-utc": (lambda t: t.dt.strftime("%Y-%m-%d %H:%M:%S"), {"timezone": "UTC"}),
    "fraction-z": (lambda t: t.dt.strftime("%Y-%m-%dT%H:%M:%S.000Z"), {}),
    "offset-minus-eleven": (lambda t: t.dt.tz_convert("Pacific/Pago_Pago").dt.strftime("%Y-%m-%dT%H:%M:%S-11:00"), {}),
}


@pytest.fixture(scope="module")
def df():
    # a day either side of the window's day, so that a lost edge would show in the counts
    return readings(hours=120, seed=21, start="2026-08-29T00:00:00Z")


def _frame(df, render):
    return pd.DataFrame({"timestamp": render(df["timestamp"]), "tag": df["tag"], "value": df["value"].map(repr),
                         "quality": df["quality"]})


def _read(tmp_path, source, **kw):
    cfg = config({"good_quality": ["OK"], **source}, grid="10 min")
    return read_unit(cfg, "R-220", config_path=tmp_path / "plant.toml", since=SINCE, until=UNTIL, **kw)


FATES = ["rows_read", "good", "bad_timestamp", "ambiguous_time", "nonexistent_time", "bad_quality_code", "bad_value",
         "duplicate", "conflicting_duplicate", "out_of_range", "spike", "frozen", "intervals", "missing_intervals",
         "valid_intervals"]


def _same(a, b):
    pd.testing.assert_index_equal(a.values.index, b.values.index)
    np.testing.assert_allclose(a.values.to_numpy(), b.values.to_numpy(), rtol=1e-12, atol=0)
    assert (a.valid == b.valid).all().all()
    pd.testing.assert_frame_equal(a.quality[FATES], b.quality[FATES])


def _sqlite(path, frame):
    import sqlite3

    con = sqlite3.connect(path)
    con.execute("CREATE TABLE readings (timestamp TEXT, tag TEXT, value REAL, quality TEXT)")
    con.executemany("INSERT INTO readings VALUES (?,?,?,?)",
                    zip(frame["timestamp"], frame["tag"], frame["value"].astype(float), frame["quality"]))
    con.commit()
    con.close()


@pytest.mark.parametrize("spelling", list(SPELLINGS))
def test_sqlite_and_csv_agree_for_every_spelling(df, tmp_path, spelling):
    from .test_roundtrip import SQLITE_MODES, sqlite_mode

    render, opts = SPELLINGS[spelling]
    frame = _frame(df, render)
    frame.to_csv(tmp_path / "long.csv", index=False)
    ref = _read(tmp_path, {"kind": "csv", "path": "long.csv", **opts})
    # every reading of [since - look-back, until) is used: continuous tags every minute over
    # [2026-08-31T19:00Z, 05:00Z) (6 h default hold cap before since), analyzers every 10 min
    t = df["timestamp"]
    lo, hi = pd.Timestamp(SINCE) - pd.Timedelta(hours=6), pd.Timestamp(UNTIL)
    want = df[(t >= lo) & (t < hi)].groupby("tag").size()
    assert ref.quality["rows_read"].to_dict() == want.to_dict()
    assert (ref.quality["good"] == ref.quality["rows_read"]).all()
    assert (ref.quality["valid_intervals"] == 24).all()
    _sqlite(tmp_path / "h.sqlite", frame)
    for mode in SQLITE_MODES:
        old = sqlite_mode(mode)
        try:
            got = _read(tmp_path, {"kind": "sqlite", "path": "h.sqlite", "chunk_rows": 1000, **opts})
        finally:
            sqlite_mode(old)
        _same(got, ref)
        assert got.source_report["rows"] < len(frame)       # the window still narrows the read


def _pg_table(url, table, ttype, texts, df):
    with psycopg.connect(url.replace("postgresql+psycopg", "postgresql"), autocommit=True) as con:
        con.execute(f"DROP TABLE IF EXISTS {table}")
        con.execute(f"CREATE TABLE {table} (ts {ttype}, tag text, value double precision, quality text)")
        buf = io.StringIO()
        pd.DataFrame({"ts": texts, "tag": df["tag"], "value": df["value"].map(repr),
                      "quality": df["quality"]}).to_csv(buf, index=False, header=False)
        with con.cursor() as cur, cur.copy(f"COPY {table} FROM STDIN WITH (FORMAT csv)") as cp:
            cp.write(buf.getvalue())


@pytest.mark.postgres
@pytest.mark.parametrize("use_copy", [True, False], ids=["copy", "streamed-select"])
@pytest.mark.parametrize("spelling", list(SPELLINGS))
def test_postgres_text_column_agrees_with_csv(df, tmp_path, pg_url, monkeypatch, spelling, use_copy):
    from kinetrace.ingest import sql_source

    render, opts = SPELLINGS[spelling]
    frame = _frame(df, render)
    frame.to_csv(tmp_path / "long.csv", index=False)
    ref = _read(tmp_path, {"kind": "csv", "path": "long.csv", **opts})
    table = "w_" + spelling.replace("-", "_")
    _pg_table(pg_url, table, "text", frame["timestamp"], df)
    monkeypatch.setattr(sql_source, "USE_COPY", use_copy)
    eng = sa.create_engine(pg_url)
    try:
        got = _read(tmp_path, {"kind": "sql", "url_env": "UNUSED", "table": table, "columns": {"timestamp": "ts"},
                               **opts}, engine=eng)
    finally:
        eng.dispose()
    _same(got, ref)


@pytest.mark.postgres
@pytest.mark.parametrize("use_copy", [True, False], ids=["copy", "streamed-select"])
@pytest.mark.parametrize("ttype, zone", [("timestamptz", None), ("timestamp", "America/Chicago"),
                                         ("timestamp", None)], ids=["timestamptz", "naive-local", "naive-utc"])
def test_postgres_native_types_agree_with_csv(df, tmp_path, pg_url, monkeypatch, ttype, zone, use_copy):
    """A timestamptz column, and a timestamp column holding wall time of a declared zone (or UTC
    when no zone is declared), read exactly like the CSV of the same instants."""
    from kinetrace.ingest import sql_source

    t = df["timestamp"]
    if ttype == "timestamptz":
        texts = t.dt.strftime("%Y-%m-%dT%H:%M:%S+00:00")
    else:
        texts = (t.dt.tz_convert(zone) if zone else t).dt.strftime("%Y-%m-%dT%H:%M:%S")
    opts = {"timezone": zone} if zone else {}
    frame = _frame(df, lambda _: texts)
    frame.to_csv(tmp_path / "long.csv", index=False)
    ref = _read(tmp_path, {"kind": "csv", "path": "long.csv", **(opts or {"timezone": "UTC"})})
    table = f"n_{ttype}_{zone is not None}".lower()
    _pg_table(pg_url, table, ttype, texts, df)
    monkeypatch.setattr(sql_source, "USE_COPY", use_copy)
    eng = sa.create_engine(pg_url)
    try:
        got = _read(tmp_path, {"kind": "sql", "url_env": "UNUSED", "table": table, "columns": {"timestamp": "ts"},
                               "time_column": "native", **opts}, engine=eng)
    finally:
        eng.dispose()
    _same(got, ref)


def test_other_spellings_are_read_whole_and_placed_after_parsing(df, tmp_path):
    """Day-first text stamps cannot be compared in SQL: the window is not pushed down for them, and
    the read equals the CSV read."""
    frame = _frame(df, lambda t: t.dt.strftime("%d.%m.%Y %H:%M:%S"))
    frame.to_csv(tmp_path / "long.csv", index=False)
    opts = {"time_format": "%d.%m.%Y %H:%M:%S", "timezone": "UTC"}
    ref = _read(tmp_path, {"kind": "csv", "path": "long.csv", **opts})
    _sqlite(tmp_path / "h.sqlite", frame)
    got = _read(tmp_path, {"kind": "sqlite", "path": "h.sqlite", **opts})
    _same(got, ref)
    assert got.source_report["rows"] == len(frame)
