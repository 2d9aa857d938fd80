"""Hypothesis-generated CSV files never make ingest fail with anything but a KinetraceError.

Files mix well-formed readings with random junk: wrong field counts, quotes,
non-numbers, odd time stamps, control characters, byte noise, gzip headers.
Whatever comes in, ``read_unit`` either returns a frame whose fate counts add
up to the rows it read, or raises IngestError (never a traceback of another type).
"""

import gzip
import os
import string

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from kinetrace.errors import KinetraceError
from kinetrace.ingest import read_unit
from kinetrace.ingest.fates import fate_names

from .synth import R220, config

TAGS = list(R220) + ["CB9:OTHER", "", "R210-TT-103"]
stamps = st.one_of(
    st.builds(lambda h, m: f"2026-09-01T{h:02d}:{m:02d}:00Z", st.integers(0, 23), st.integers(0, 59)),
    st.builds(lambda h, m: f"2026-10-25T{h:02d}:{m:02d}:00", st.integers(0, 4), st.integers(0, 59)),
    st.sampled_from(["", "2026-13-01T00:00:00Z", "yesterday", "2026-09-01T00:00:00+25:00", "0", "2026-09-01 00:00",
                     "2026-09-01T24:00:00Z", "1e9", '"2026-09-01T00:00:00Z"']),
    st.text(string.printable, max_size=12),
)
values = st.one_of(st.floats(allow_nan=True, allow_infinity=True).map(repr), st.integers().map(str),
                   st.sampled_from(["", "nan", "1,5", "--1", "1e999", "0x10", " 3 ", "NULL"]),
                   st.text(max_size=6))
quality = st.sampled_from(["OK", "BAD", "", "ok", "Questionable"])
good_line = st.builds(lambda t, g, v, q: ",".join([t, g, v, q]), stamps, st.sampled_from(TAGS), values, quality)
junk = st.one_of(st.text(max_size=40), st.just('"unterminated,quote'), st.just(",,,,,,"), st.just(""),
                 st.builds(lambda t, g: f"{t},{g}", stamps, st.sampled_from(TAGS)))
headers = st.sampled_from(["timestamp,tag,value,quality", "timestamp,tag,value", "timestamp," + ",".join(R220),
                           "time,tag,value", "", "timestamp,timestamp,tag,value", "\ufefftimestamp,tag,value,quality"])


@settings(max_examples=int(os.environ.get("KT_FUZZ_EXAMPLES", "60")), deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(header=headers, lines=st.lists(st.one_of(good_line, good_line, junk), max_size=40),
       gz=st.booleans(), tz=st.sampled_from([None, "Europe/Berlin"]), noise=st.binary(max_size=8))
def test_random_csv_never_crashes(tmp_path_factory, header, lines, gz, tz, noise):
    tmp = tmp_path_factory.mktemp("fuzz")
    text = "\n".join([header, *lines]) + "\n"
    try:
        data = text.encode("utf-8")
    except UnicodeEncodeError:
        data = text.encode("utf-8", errors="replace")
    data += noise
    path = tmp / ("x.csv.gz" if gz else "x.csv")
    path.write_bytes(gzip.compress(data) if gz else data)
    cfg = config({"kind": "csv", "path": path.name, "good_quality": ["OK"], "timezone": tz}, grid="10 min")
    try:
        d = read_unit(cfg, "R-220", config_path=tmp / "plant.toml")
    except KinetraceError:
        return
    q = d.quality
    assert (q[fate_names()].sum(axis=1) == q["rows_read"]).all()


cells = st.one_of(st.none(), st.floats(allow_nan=True, allow_infinity=True), st.integers(-2**62, 2**62),
                  st.text(max_size=8), st.binary(max_size=4), st.sampled_from(["OK", "BAD", "2026-09-01T00:00:00Z"]))


@settings(max_examples=int(os.environ.get("KT_FUZZ_EXAMPLES", "40")), deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(rows=st.lists(st.tuples(st.one_of(stamps, cells), st.sampled_from(TAGS), st.one_of(values, cells), cells),
                     max_size=30), mode=st.sampled_from(["binary", "group-concat", "streamed-select"]))
def test_random_sqlite_rows_never_crash(tmp_path_factory, rows, mode):
    import sqlite3

    from .test_roundtrip import sqlite_mode

    tmp = tmp_path_factory.mktemp("fuzzdb")
    con = sqlite3.connect(tmp / "h.sqlite")
    con.execute("CREATE TABLE readings (timestamp TEXT, tag TEXT, value REAL, quality TEXT)")
    con.executemany("INSERT INTO readings VALUES (?,?,?,?)", rows)
    con.commit()
    con.close()
    cfg = config({"kind": "sqlite", "path": "h.sqlite", "good_quality": ["OK"]}, grid="10 min")
    old = sqlite_mode(mode)
    try:
        d = read_unit(cfg, "R-220", config_path=tmp / "plant.toml")
    except KinetraceError:
        return
    finally:
        sqlite_mode(old)
    q = d.quality
    assert (q[fate_names()].sum(axis=1) == q["rows_read"]).all()
