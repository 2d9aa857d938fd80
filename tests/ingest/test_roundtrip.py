"""Round trips: the same invented readings written as every supported source ingest to the same frame.

Reference: the long-CSV read of the same readings; every other source must give
the same values, validity and quality counts to 1e-12 relative (the values pass
through text as 17 significant digits, which round-trips a double exactly, so
any difference would be an ingest bug, not rounding).
"""

import io

import numpy as np
import pandas as pd
import psycopg
import pytest
import sqlalchemy as sa

from kinetrace.ingest import read_unit

from .synth import config, iso, readings, write_long, write_sqlite, write_wide

SINCE, UNTIL = "2026-09-01T01:00:00Z", "2026-09-01T05:00:00Z"


@pytest.fixture(scope="module")
def df():
    return readings(hours=6, seed=7)


def _read(tmp_path, source, **kw):
    cfg = config({"good_quality": ["OK"], **source}, grid="10 min")
    return read_unit(cfg, "R-220", config_path=tmp_path / "plant.toml", since=SINCE, until=UNTIL, **kw)


@pytest.fixture(scope="module")
def reference(df, tmp_path_factory):
    tmp = tmp_path_factory.mktemp("ref")
    write_long(df, tmp / "long.csv")
    return _read(tmp, {"kind": "csv", "path": "long.csv"})


def _same(a, b):
    assert a.values.index.equals(b.values.index)
    assert list(a.values.columns) == list(b.values.columns)
    np.testing.assert_allclose(a.values.to_numpy(), b.values.to_numpy(), rtol=1e-12, atol=0)
    assert (a.valid == b.valid).all().all()
    cols = ["rows_read", "good", "missing_intervals", "valid_intervals"]
    pd.testing.assert_frame_equal(a.quality[cols], b.quality[cols])
    np.testing.assert_allclose(a.volume.to_numpy(), b.volume.to_numpy(), rtol=1e-12)


def test_reference_is_sane(reference):
    v = reference.values
    assert len(v) == 24 and v.notna().all().all() and reference.valid.all().all()
    # 20 gpm is 1.2618e-3 m3/s (NIST SP 811: US gallon = 3.785411784e-3 m3, exact)
    assert v["CB2~R220~FEED~GPM"].mean() == pytest.approx(20 * 3.785411784e-3 / 60, rel=2e-3)
    # R-220 volume is fixed: 1500 US gallons (NIST SP 811, exact factor)
    assert reference.volume.iloc[0] == pytest.approx(1500 * 3.785411784e-3, rel=1e-15)


def test_wide_csv(df, tmp_path, reference):
    write_wide(df, tmp_path / "wide.csv")
    _same(_read(tmp_path, {"kind": "csv", "path": "wide.csv"}), reference)


def test_wide_csv_with_units_row_and_banner(df, tmp_path, reference):
    p = write_wide(df, tmp_path / "w.csv", units={t: cfg_unit for t, cfg_unit in
                                                 [("CB2~R220~FEED~GPM", "gpm"), ("CB2~R220~PROD~GPM", "gal/min"),
                                                  ("CB2~R220~TEMP~F", "degF"), ("CB2~R220~AA~AN", "mol/L"),
                                                  ("CB2~R220~ACOH~AN", "mol/L")]})
    text = p.read_text()
    p.write_text("Exported by the Calder Bank historian\nsite: CB2\n" + text)
    got = _read(tmp_path, {"kind": "csv", "path": "w.csv", "skip_rows": 2, "units_row": True})
    _same(got, reference)


def test_european_csv(df, tmp_path, reference):
    write_long(df, tmp_path / "eu.csv", sep=";", decimal=",")
    assert "," in (tmp_path / "eu.csv").read_text().splitlines()[1]
    _same(_read(tmp_path, {"kind": "csv", "path": "eu.csv", "delimiter": ";", "decimal": ","}), reference)


def test_gzip(df, tmp_path, reference):
    write_long(df, tmp_path / "long.csv.gz", gz=True)
    _same(_read(tmp_path, {"kind": "csv", "path": "long.csv.gz"}), reference)


def test_folder_of_files(df, tmp_path, reference):
    folder = tmp_path / "exports"
    folder.mkdir()
    hour = df["timestamp"].dt.floor("2h")
    for k, (_, part) in enumerate(df.groupby(hour)):
        write_long(part, folder / f"cb_{k:02d}.csv", gz=(k % 2 == 1))
    (folder / "notes.txt").write_text("not an export")
    _same(_read(tmp_path, {"kind": "csv", "path": "exports", "file_pattern": "cb_*.csv*"}), reference)


def test_small_blocks_give_the_same_frame(df, tmp_path, reference, monkeypatch):
    from kinetrace.ingest import csv_source

    write_long(df, tmp_path / "long.csv")
    monkeypatch.setattr(csv_source, "BLOCK_BYTES", 4096)
    _same(_read(tmp_path, {"kind": "csv", "path": "long.csv"}), reference)


#: The three ways of reading SQLite: (bulk by rowid ranges, binary through ADBC first).
SQLITE_MODES = {"binary": (True, True), "group-concat": (True, False), "streamed-select": (False, False)}


def sqlite_mode(mode):
    """Set the SQLite read path; returns the previous setting (for :func:`restore`)."""
    from kinetrace.ingest import sql_source

    old = (sql_source.USE_SQLITE_BULK, sql_source.USE_SQLITE_ARROW)
    sql_source.USE_SQLITE_BULK, sql_source.USE_SQLITE_ARROW = SQLITE_MODES[mode] if isinstance(mode, str) else mode
    return old


@pytest.mark.parametrize("mode", list(SQLITE_MODES))
def test_sqlite(df, tmp_path, reference, mode):
    old = sqlite_mode(mode)
    write_sqlite(df, tmp_path / "h.sqlite")
    try:
        got = _read(tmp_path, {"kind": "sqlite", "path": "h.sqlite", "chunk_rows": 1000})
    finally:
        sqlite_mode(old)
    _same(got, reference)
    assert got.source_report["chunks"] * 1000 >= got.source_report["rows"] > 0


def test_sqlite_binary_path_reads_plain_ranges_and_hands_odd_ones_on(tmp_path, monkeypatch):
    """Ranges of numbers and texts come through ADBC in binary; a range holding a text in the
    value column is handed to the text path (whose fates the test above checks)."""
    import sqlite3

    from kinetrace.ingest import sql_source, sqlite_arrow

    taken = []
    original = sqlite_arrow.RangeReader.read
    # (range start, taken in binary): ranges are read side by side, so in rowid order only once sorted
    monkeypatch.setattr(sqlite_arrow.RangeReader, "read",
                        lambda self, *a: taken.append((a[1][0], original(self, *a) is not None)) or original(self, *a))
    df = readings(hours=6, seed=2)
    write_sqlite(df, tmp_path / "h.sqlite")
    con = sqlite3.connect(tmp_path / "h.sqlite")
    con.execute("INSERT INTO readings VALUES ('2026-09-01T05:59:30Z', 'CB2~R220~TEMP~F', 'abc', 'OK')")
    con.commit()
    con.close()
    cfg = config({"kind": "sqlite", "path": "h.sqlite", "good_quality": ["OK"], "chunk_rows": 1000}, grid="10 min")
    old = sqlite_mode("binary")
    try:
        got = read_unit(cfg, "R-220", config_path=tmp_path / "p.toml")
    finally:
        sqlite_mode(old)
    taken = [ok for _, ok in sorted(taken)]
    assert len(taken) >= 2 and all(taken[:-1]) and not taken[-1]   # the text is in the last range
    assert got.quality.loc["CB2~R220~TEMP~F", "bad_value"] == 1
    assert got.source_report["rows"] == len(df) + 1
    assert sql_source.USE_SQLITE_ARROW


@pytest.mark.parametrize("encoding", ["UTF-8", "UTF-16le"])
def test_sqlite_bulk_path_keeps_the_rowid_order_in_any_encoding(tmp_path, encoding):
    """The bulk paths (binary through ADBC, text built inside SQLite) give exactly what the
    streamed SELECT gives, out-of-order counts included, in a UTF-8 and a UTF-16 database."""
    import sqlite3

    day = readings(hours=24, seed=5)
    shuffled = day.sample(frac=1.0, random_state=11)      # rows stored out of time order
    con = sqlite3.connect(tmp_path / "h.sqlite")
    con.execute(f"PRAGMA encoding = '{encoding}'")
    con.execute("CREATE TABLE notes (text TEXT)")        # the encoding is fixed when the file is first written
    con.close()
    write_sqlite(shuffled, tmp_path / "h.sqlite")
    got = {}
    cfg = config({"kind": "sqlite", "path": "h.sqlite", "good_quality": ["OK"], "chunk_rows": 1000}, grid="10 min")
    for mode in SQLITE_MODES:
        old = sqlite_mode(mode)
        try:
            got[mode] = read_unit(cfg, "R-220", config_path=tmp_path / "plant.toml")
        finally:
            sqlite_mode(old)
    con = sqlite3.connect(tmp_path / "h.sqlite")
    assert con.execute("PRAGMA encoding").fetchone()[0] == encoding
    con.close()
    b = got["streamed-select"]
    for mode in ("binary", "group-concat"):
        a = got[mode]
        assert a.source_report["chunks"] > 4 and int(a.quality["out_of_order"].sum()) > 0
        pd.testing.assert_frame_equal(a.values, b.values, check_exact=True)
        pd.testing.assert_frame_equal(a.quality, b.quality)
        pd.testing.assert_frame_equal(a.flagged, b.flagged)


def test_sqlite_odd_values_and_texts(tmp_path):
    """Text in a REAL column, commas and quotes in codes, NULLs: all SQLite paths give the same fates."""
    import sqlite3

    df = readings(hours=1, seed=3)
    write_sqlite(df, tmp_path / "h.sqlite")
    con = sqlite3.connect(tmp_path / "h.sqlite")
    con.executemany("INSERT INTO readings VALUES (?,?,?,?)", [
        ("2026-09-01T00:00:30Z", "CB2~R220~TEMP~F", "abc", "OK"),
        ("2026-09-01T00:01:30Z", "CB2~R220~TEMP~F", None, 'BAD,"x"'),
        ("2026-09-01T00:02:30Z", "CB2~R220~TEMP~F", 151.0, None),
        (None, "CB2~R220~TEMP~F", 150.0, "OK"),
        ("2026-09-01T00:03:30Z", "CB2~R220~TEMP~F", 1e308, "OK"),
        ("2026-09-01T00:04:30Z", "CB2~R220~TEMP~F", 3, "OK")])
    con.commit()
    con.close()
    cfg = config({"kind": "sqlite", "path": "h.sqlite", "good_quality": ["OK"]}, grid="10 min")
    out = []
    for mode in SQLITE_MODES:
        old = sqlite_mode(mode)
        try:
            out.append(read_unit(cfg, "R-220", config_path=tmp_path / "p.toml"))
        finally:
            sqlite_mode(old)
    a = out[0]
    for x in out[1:]:
        pd.testing.assert_frame_equal(out[0].quality, x.quality)
        pd.testing.assert_frame_equal(out[0].values, x.values)
    q = a.quality.loc["CB2~R220~TEMP~F"]
    # abc; BAD and a missing code; no time; 1e308 and 3 degF outside [32, 300]
    assert (q["bad_value"], q["bad_quality_code"], q["bad_timestamp"], q["out_of_range"]) == (1, 2, 1, 2)
    assert q["good"] == 60


def test_sqlite_pushes_the_window_into_sql(tmp_path):
    """Six days of readings, a window of four hours: SQL returns the days from a day before the window
    (less its 6 h look-back) to the day after it (widened for any spelling), and the window is applied
    exactly after parsing."""
    three = readings(hours=144, seed=9, start="2026-08-28T00:00:00Z")
    write_sqlite(three, tmp_path / "h.sqlite")
    got = _read(tmp_path, {"kind": "sqlite", "path": "h.sqlite"})
    t = three["timestamp"]
    # look-back start 2026-08-31T19:00Z less a day: dated 08-30; end 09-01T05:00Z plus a day: dated 09-02
    dated = (t >= pd.Timestamp("2026-08-30T00:00Z")) & (t < pd.Timestamp("2026-09-03T00:00Z"))
    assert got.source_report["rows"] == int(dated.sum()) < len(three)
    assert got.source_report["rows"] == got.source_report["rows_total"]
    assert int(got.quality["rows_read"].sum() + got.quality["outside_window"].sum()) == got.source_report["rows"]


def _pg_load(url, df, native: bool, table: str):
    raw_url = url.replace("postgresql+psycopg", "postgresql")
    with psycopg.connect(raw_url, autocommit=True) as con:
        ttype = "timestamptz" if native else "text"
        con.execute(f"DROP TABLE IF EXISTS {table}")
        con.execute(f"CREATE TABLE {table} (ts {ttype}, tag text, value double precision, quality text)")
        buf = io.StringIO()
        pd.DataFrame({"ts": iso(df["timestamp"]), "tag": df["tag"], "value": df["value"].map(repr),
                      "quality": df["quality"]}).to_csv(buf, index=False, header=False)
        with con.cursor() as cur, cur.copy(f"COPY {table} FROM STDIN WITH (FORMAT csv)") as cp:
            cp.write(buf.getvalue())


@pytest.mark.postgres
@pytest.mark.parametrize("native", [False, True], ids=["text-time", "timestamptz"])
def test_postgres(df, tmp_path, reference, pg_url, monkeypatch, native):
    table = "hist_native" if native else "hist_text"
    _pg_load(pg_url, df, native, table)
    monkeypatch.setenv("KT_TEST_HISTORIAN", pg_url)
    src = {"kind": "sql", "url_env": "KT_TEST_HISTORIAN", "table": table, "columns": {"timestamp": "ts"},
           "time_column": "native" if native else "text"}
    _same(_read(tmp_path, src), reference)


@pytest.mark.postgres
@pytest.mark.parametrize("use_copy", [True, False], ids=["copy", "streamed-select"])
def test_postgres_query_template(df, tmp_path, reference, pg_url, monkeypatch, use_copy):
    """A query template with bound :since/:until, through COPY and through the generic streamed SELECT."""
    from kinetrace.ingest import sql_source

    _pg_load(pg_url, df, False, "hist_q")
    monkeypatch.setattr(sql_source, "USE_COPY", use_copy)
    eng = sa.create_engine(pg_url)
    src = {"kind": "sql", "url_env": "UNUSED", "columns": {"timestamp": "ts"}, "chunk_rows": 1000,
           "query": "SELECT ts, tag, value, quality FROM hist_q WHERE ts >= :since AND ts < :until"}
    got = _read(tmp_path, src, engine=eng)
    eng.dispose()
    _same(got, reference)
    if not use_copy:   # streamed in partitions of chunk_rows
        assert got.source_report["chunks"] == -(-got.source_report["rows"] // 1000)


def test_sqlite_ranges_read_side_by_side_equal_one_reader(tmp_path):
    """Rowid ranges read by two connections at once (and the rowid bounds found by tag groups
    side by side) give exactly the frame, fates and report of one connection reading them in
    turn, with a text value in a middle range handed to the text path in its place."""
    import sqlite3

    from kinetrace.ingest import sql_source

    df = readings(hours=24, seed=9)
    write_sqlite(df.sample(frac=1.0, random_state=3), tmp_path / "h.sqlite")   # out of time order
    con = sqlite3.connect(tmp_path / "h.sqlite")
    con.execute("UPDATE readings SET value = 'x,y' WHERE rowid = 2500")       # a text in a middle range
    con.commit()
    con.close()
    cfg = config({"kind": "sqlite", "path": "h.sqlite", "good_quality": ["OK"], "chunk_rows": 1000}, grid="10 min")
    got, old = {}, (sql_source.READ_THREADS, sqlite_mode("binary"))
    try:
        for n in (1, 2):
            sql_source.READ_THREADS = n
            got[n] = read_unit(cfg, "R-220", config_path=tmp_path / "p.toml")
    finally:
        sql_source.READ_THREADS = old[0]
        sqlite_mode(old[1])
    a, b = got[1], got[2]
    pd.testing.assert_frame_equal(a.values, b.values, check_exact=True)
    pd.testing.assert_frame_equal(a.valid, b.valid)
    pd.testing.assert_frame_equal(a.quality, b.quality)
    assert a.source_report == b.source_report and a.source_report["chunks"] > 4
    assert a.quality["bad_value"].sum() == 1
