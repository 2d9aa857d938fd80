"""End-to-end fuzzing of ``kinetrace check``: whatever the config or historian holds, the run ends
with exit code 0, 1 or 2 and never shows a traceback.

A copy of the demo plant's configuration and a small simulated historian (two days, one reading
per tag every 10 minutes) are mutated by hypothesis: values replaced by other types or values out
of range, keys removed, duplicated or added, whole tables dropped, truncation, other encodings,
NUL bytes, other line ends, unbalanced quotes; the historian as CSV (fields, rows, whole columns,
encodings, line ends, quotes, truncation) and as SQLite (cell types, missing columns, declared
types, views, a truncated file). Each case runs the real command (in process, through the CLI
entry point, output captured) on a fresh output folder and store.

The exit-code contract is the README's (common practice, no source): 0 on target, 1 needs
attention, 2 inputs unusable, 3 internal error -- and 3 here means a bug (the test prints the
internal-error report). Example counts are bounded and the search is derandomized so CI is
reproducible; ``KT_FUZZ_EXAMPLES`` scales them (e.g. 10 for a deeper local search).
"""

from __future__ import annotations

import io
import json
import logging
import os
import re
import sqlite3
from pathlib import Path

import pandas as pd
import pytest
from hypothesis import HealthCheck, currently_in_test_context, event, given, settings
from hypothesis import strategies as st
from typer.testing import CliRunner

from kinetrace.cli import app
from kinetrace.simulator import generate_sample_historian
from tests.pipeline.demo import DEMO, demo_config

SCALE = float(os.environ.get("KT_FUZZ_EXAMPLES", "1"))
if SCALE > 5:       # the ingest fuzz tests read the same variable as an example count
    SCALE = SCALE / 40


def _settings(n: int):
    return settings(max_examples=max(1, int(n * SCALE)), deadline=None, derandomize=True, database=None,
                    suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow,
                                           HealthCheck.data_too_large])


@pytest.fixture(scope="module")
def small_historian(tmp_path_factory) -> pd.DataFrame:
    """Two simulated days of the demo plant, every tag every 10 minutes (lab samples all kept), as text."""
    folder = tmp_path_factory.mktemp("fuzz-hist")
    csv = generate_sample_historian(DEMO, folder, days=2, seed=11)["csv"]
    d = pd.read_csv(csv, dtype=str, keep_default_na=False)
    keep = d["timestamp"].str.slice(15, 16).eq("0") | d["tag"].str.contains("LAB")
    return d.loc[keep].reset_index(drop=True)


def _csv_text(frame: pd.DataFrame) -> str:
    buf = io.StringIO()
    frame.to_csv(buf, index=False, lineterminator="\n")
    return buf.getvalue()


def _check(folder: Path, cfg: Path, caplog) -> tuple[int, str]:
    """Run ``kinetrace check`` on ``cfg``; return (exit code, all output); fail on a traceback or exit 3."""
    caplog.clear()
    res = CliRunner().invoke(app, ["check", "--config", str(cfg)])
    out = res.stdout + (res.stderr if res.stderr_bytes is not None else "")
    logged = caplog.text
    report = ""
    for p in list(folder.rglob("kinetrace-internal-error-*.txt")):
        report += p.read_text()
        p.unlink()
    if res.exit_code == 3 and not report:
        m = re.search(r"full report is in (\S+)", out)
        if m and Path(m.group(1)).exists():
            report = Path(m.group(1)).read_text()
            Path(m.group(1)).unlink()
    assert res.exception is None or isinstance(res.exception, SystemExit), repr(res.exception)
    assert "Traceback" not in out and "Traceback" not in logged, out + logged
    assert res.exit_code in (0, 1, 2), f"exit {res.exit_code}\n{out}\n{report}"
    if currently_in_test_context():     # the regression cases call this outside hypothesis
        event(f"exit {res.exit_code}")  # shown by --hypothesis-show-statistics: how many cases ran through
    return res.exit_code, out


# ------------------------------------------------------------------------------------- config
#: Values a mutated key may take: other types, out of range, empty, odd units, odd text.
LITERALS = st.one_of(
    st.sampled_from(['""', '"abc"', "-1", "0", "1", "1e308", "-1e308", "nan", "inf", "-inf", "true", "[]", "{}",
                     "[1, \"a\"]", "{a = 1}", "[[0.0, 1.0]]", "[[0.0, 0.6], [50.0, 0.6], [100.0, 0.1]]",
                     "[1.0, 0.0]", "[-5.0, 200.0]", "2026-01-01", "2026-09-01T00:00:00Z", "12:00:00",
                     '"1 h"', '"0 s"', '"-5 min"', '"1e400 s"', '"1 kg"', '"1 %"', '"200 %"', '"-1 %"', '"m3/h"',
                     '"degC"', '"NaN mol/L"', '"inf K"', '"0 mol/L"', '"-2 mol/L"', '"1 mol/L"', '"0 K"',
                     '"-300 degC"', '"0 kJ/mol"', '"1e9 kJ/mol"', '"0 1/s"', '"-1 1/s"', '"0 t/d"', '"M3/H"',
                     '"power_law"', '"saturating"', '"MA"', '"XX"', '"MA + MA -> MA"', '"-> X"', '"2 MA -> "',
                     '"feed_flow"', '"level"', '"analyzer"', '"lab"', '"UTC"', '"Mars/Olympus"', '"H2O"', '"Xx9"',
                     '"R210-FT-101"', '"CB2:R220_FEED.GPM"', '["OK", "BAD"]', '[]', '"\\u0000"', '"a\\tb"']),
    st.integers(-2**70, 2**70).map(str),
    st.floats(allow_nan=False, allow_infinity=False).map(repr),
    st.text(max_size=12).map(json.dumps),
)
#: Lines whose value points at a file or folder: replaced only by the listed literals (never random
#: text that could name a folder outside the test's own).
PATH_KEYS = re.compile(r"^\s*(path|output_dir|url)\s*=")
KEY_LINE = re.compile(r"^\s*[A-Za-z_\"][\w\"-]*\s*=")
EXTRA = ["extra_key = 1", "unit = \"m3/h\"", "sigma = \"1 %\"", "role = \"temperature\"", "tag = \"R210-FT-101\"",
         "[units.volume]", "[[units.tags]]", "[[units]]", "[source]", "species = \"MA\"", "fixed = \"-1 m3\"",
         "level_tag = \"R210-FT-101\"", "table = \"x\"", "time_format = \"%d\"", "quality_match = \"folded\"",
         "delimiter = \";\"", "timezone = \"UTC\"", "dead_time = \"1 d\"", "max_age = \"1 s\""]


@st.composite
def config_edits(draw):
    """A list of text edits of the demo config, as (kind, args) pairs."""
    n = draw(st.integers(1, 4))
    return [draw(st.one_of(
        st.tuples(st.just("value"), st.integers(0, 10**6), LITERALS),
        st.tuples(st.just("drop"), st.integers(0, 10**6)),
        st.tuples(st.just("dup"), st.integers(0, 10**6)),
        st.tuples(st.just("extra"), st.integers(0, 10**6), st.sampled_from(EXTRA)),
        st.tuples(st.just("drop_block"), st.integers(0, 10**6)),
        st.tuples(st.just("scale"), st.integers(0, 10**6), st.sampled_from(["-1", "0", "1e30", "1e-30", "1.0001"])),
    )) for _ in range(n)]


def _apply_config_edit(lines: list[str], edit) -> list[str]:
    kind, where = edit[0], edit[1]
    keyed = [i for i, ln in enumerate(lines) if KEY_LINE.match(ln)]
    if kind == "value" and keyed:
        i = keyed[where % len(keyed)]
        key, _ = lines[i].split("=", 1)
        value = edit[2]
        if PATH_KEYS.match(lines[i]) and value.startswith('"') and not value.startswith(('"1 ', '"-', '"0', '"abc"')):
            value = '"abc"'
        lines[i] = f"{key}= {value}"
    elif kind == "drop" and keyed:
        del lines[keyed[where % len(keyed)]]
    elif kind == "dup" and lines:
        i = where % len(lines)
        lines.insert(i, lines[i])
    elif kind == "extra":
        lines.insert(where % (len(lines) + 1), edit[2])
    elif kind == "drop_block":
        heads = [i for i, ln in enumerate(lines) if ln.startswith("[")]
        if heads:
            k = where % len(heads)
            end = heads[k + 1] if k + 1 < len(heads) else len(lines)
            del lines[heads[k]:end]
    elif kind == "scale" and keyed:
        i = keyed[where % len(keyed)]
        m = re.search(r'"(-?\d+(\.\d+)?(e-?\d+)?) ', lines[i])
        if m:
            lines[i] = lines[i][:m.start(1)] + repr(float(m.group(1)) * float(edit[2])) + lines[i][m.end(1):]
    return lines


ENCODINGS = ["utf-8", "utf-8", "utf-8", "utf-8-sig", "utf-16", "latin-1-cafe", "nul", "crlf", "cr", "truncate"]


@_settings(32)
@given(edits=config_edits(), encoding=st.sampled_from(ENCODINGS), cut=st.integers(0, 10**6))
def test_mutated_config_never_crashes(tmp_path_factory, small_historian, caplog, edits, encoding, cut):
    folder = tmp_path_factory.mktemp("fuzz-cfg")
    db = folder / "historian.sqlite"
    with sqlite3.connect(db) as con:
        small_historian.to_sql("readings", con, index=False)
    cfg = demo_config(folder, db)
    lines = cfg.read_text().splitlines()
    for e in edits:
        lines = _apply_config_edit(lines, e)
    text = "\n".join(lines) + "\n"
    data = text.encode("utf-8", errors="surrogatepass")
    if encoding == "utf-8-sig":
        data = b"\xef\xbb\xbf" + data
    elif encoding == "utf-16":
        data = text.encode("utf-16", errors="surrogatepass")
    elif encoding == "latin-1-cafe":
        data = "# caf\xe9\n".encode("latin-1") + data
    elif encoding == "nul":
        k = cut % (len(data) + 1)
        data = data[:k] + b"\0" + data[k:]
    elif encoding == "crlf":
        data = data.replace(b"\n", b"\r\n")
    elif encoding == "cr":
        data = data.replace(b"\n", b"\r")
    elif encoding == "truncate":
        data = data[:cut % (len(data) + 1)]
    cfg.write_bytes(data)
    _check(folder, cfg, caplog)


# ------------------------------------------------------------------------------------- historian
FIELD_VALUES = st.one_of(
    st.sampled_from(["", "nan", "NaN", "-0", "1,234.5", "1.234,5", "1e999", "-1e999", "0x10", " 3 ", "NULL", "inf",
                     "-1", "0", "1e-300", "12abc", '"5"', "2026-09-01T00:00:00Z", "2026-13-01T00:00:00Z",
                     "2026-09-01 00:00", "01/09/2026 00:00", "1788220800", "yesterday", "1677-01-01T00:00:00Z",
                     "9999-12-31T23:59:59Z", "OK", "ok", " OK", "BAD", "\0", "caf\xe9", "\ufeff", "a\tb"]),
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
    st.integers(-2**64, 2**64).map(str),
    st.text(max_size=10),
)
COLUMN_EDITS = ["negate", "minus_zero", "thousands", "nan", "empty", "huge", "level_over", "words", "shift_year",
                "month_first", "epoch", "lower_quality", "all_bad"]


def _column_edit(frame: pd.DataFrame, how: str, tag_pick: int) -> pd.DataFrame:
    """Apply ``how`` to every reading of one tag (or every row): the 'whole column unusable' cases."""
    f = frame.copy()
    tags = sorted(f["tag"].unique())
    rows = f["tag"] == tags[tag_pick % len(tags)]
    v = pd.to_numeric(f.loc[rows, "value"], errors="coerce")
    if how == "negate":
        f.loc[rows, "value"] = (-v.abs() - 1).map(repr)
    elif how == "minus_zero":
        f.loc[rows, "value"] = "-0"
    elif how == "thousands":
        f.loc[rows, "value"] = (v * 1000).map(lambda x: f"{x:,.1f}")
    elif how == "nan":
        f.loc[rows, "value"] = "NaN"
    elif how == "empty":
        f.loc[rows, "value"] = ""
    elif how == "huge":
        f.loc[rows, "value"] = (v * 1e300).map(repr)
    elif how == "level_over":
        f.loc[rows, "value"] = "150.0"
    elif how == "words":
        f.loc[rows, "value"] = "offline"
    elif how == "shift_year":
        f["timestamp"] = f["timestamp"].str.replace("2026", "1670", regex=False)
    elif how == "month_first":
        t = pd.to_datetime(f["timestamp"], utc=True)
        f["timestamp"] = t.dt.strftime("%m/%d/%Y %H:%M")
    elif how == "epoch":
        t = pd.to_datetime(f["timestamp"], utc=True)
        f["timestamp"] = (t.astype("int64") // 10**9).astype(str)
    elif how == "lower_quality":
        f["quality"] = " ok"
    elif how == "all_bad":
        f.loc[rows, "quality"] = "BAD"
    return f


@st.composite
def historian_edits(draw):
    """Row- and field-level edits as (kind, args) pairs, and byte-level edits applied after."""
    cells = draw(st.lists(st.one_of(
        st.tuples(st.just("field"), st.integers(0, 10**6), st.integers(0, 3), FIELD_VALUES),
        st.tuples(st.just("drop_field"), st.integers(0, 10**6)),
        st.tuples(st.just("add_field"), st.integers(0, 10**6), FIELD_VALUES),
        st.tuples(st.just("dup_row"), st.integers(0, 10**6)),
        st.tuples(st.just("column"), st.sampled_from(COLUMN_EDITS), st.integers(0, 20)),
    ), min_size=0, max_size=4))
    raw = draw(st.lists(st.one_of(
        st.tuples(st.just("nul"), st.integers(0, 10**7), st.integers(1, 64)),
        st.tuples(st.just("quote"), st.integers(0, 10**7)),
        st.tuples(st.just("bytes"), st.integers(0, 10**7), st.binary(min_size=1, max_size=8)),
        st.tuples(st.just("header"), st.sampled_from(["time,tag,value,quality", "timestamp;tag;value;quality",
                                                      "timestamp,tag,value", "TIMESTAMP,TAG,VALUE,QUALITY",
                                                      "timestamp,tag,value,quality,extra", "", "\ufefftimestamp,"
                                                      "tag,value,quality", "timestamp,timestamp,value,quality"])),
    ), max_size=3))
    ends = draw(st.sampled_from(["\n", "\n", "\r\n", "\r", "mixed"]))
    encoding = draw(st.sampled_from(["utf-8", "utf-8", "utf-8", "utf-16", "utf-8-sig", "latin-1"]))
    cut = draw(st.one_of(st.none(), st.none(), st.integers(0, 10**7)))
    return cells, raw, ends, encoding, cut


def _edit_rows(frame: pd.DataFrame, cells) -> list[list[str]]:
    for e in cells:
        if e[0] == "column":
            frame = _column_edit(frame, e[1], e[2])
    rows = frame.astype(str).values.tolist()
    for e in cells:
        kind = e[0]
        if kind == "field":
            rows[e[1] % len(rows)][e[2]] = e[3]
        elif kind == "drop_field":
            r = rows[e[1] % len(rows)]
            if r:
                r.pop()
        elif kind == "add_field":
            rows[e[1] % len(rows)].append(e[2])
        elif kind == "dup_row":
            i = e[1] % len(rows)
            rows.insert(i, list(rows[i]))
    return rows


def _historian_bytes(frame: pd.DataFrame, edits) -> bytes:
    cells, raw, ends, encoding, cut = edits
    rows = _edit_rows(frame, cells)
    header = ",".join(frame.columns)
    for e in raw:
        if e[0] == "header":
            header = e[1]
    lines = [header] + [",".join(r) for r in rows]
    if ends == "mixed":
        text = "".join(ln + ("\n", "\r\n", "\r")[i % 3] for i, ln in enumerate(lines))
    else:
        text = ends.join(lines) + ends
    enc = "utf-8" if encoding == "utf-8-sig" else encoding
    data = text.encode(enc, errors="replace") if enc != "utf-16" else text.encode("utf-16", errors="surrogatepass")
    if encoding == "utf-8-sig":
        data = b"\xef\xbb\xbf" + data
    for e in raw:
        if e[0] == "nul":
            k = e[1] % (len(data) + 1)
            data = data[:k] + b"\0" * e[2] + data[k:]
        elif e[0] == "quote":
            k = e[1] % (len(data) + 1)
            data = data[:k] + b'"' + data[k:]
        elif e[0] == "bytes":
            k = e[1] % (len(data) + 1)
            data = data[:k] + e[2] + data[k:]
    if cut is not None:
        data = data[:cut % (len(data) + 1)]
    return data


@_settings(24)
@given(edits=historian_edits())
def test_mutated_csv_historian_never_crashes(tmp_path_factory, small_historian, caplog, edits):
    folder = tmp_path_factory.mktemp("fuzz-csv")
    path = folder / "historian.csv"
    path.write_bytes(_historian_bytes(small_historian, edits))
    block = f'[source]\nkind = "csv"\npath = "{path}"\ngood_quality = ["OK"]'
    _check(folder, demo_config(folder, source_block=block), caplog)


SQL_CELLS = st.one_of(st.none(), st.floats(allow_nan=True, allow_infinity=True), st.integers(-2**63, 2**63 - 1),
                      st.text(max_size=8), st.binary(max_size=4),
                      st.sampled_from(["OK", "BAD", "2026-09-01T00:00:00Z", "2026-09-01 00:00:00+09:00", "-0", "nan"]))


@_settings(16)
@given(cells=st.lists(st.tuples(st.integers(0, 10**6), st.integers(0, 3), SQL_CELLS), max_size=6),
       columns=st.lists(st.tuples(st.just("column"), st.sampled_from(COLUMN_EDITS), st.integers(0, 20)), max_size=2),
       shape=st.sampled_from(["table", "table", "view", "no_quality", "typed", "without_rowid", "empty", "truncated",
                              "missing_table", "extra_column"]),
       cut=st.integers(0, 10**7))
def test_mutated_sqlite_historian_never_crashes(tmp_path_factory, small_historian, caplog, cells, columns, shape, cut):
    folder = tmp_path_factory.mktemp("fuzz-sqlite")
    frame = small_historian
    for e in columns:
        frame = _column_edit(frame, e[1], e[2])
    rows = [list(r) for r in frame.itertuples(index=False)]
    for i, j, v in cells:
        rows[i % len(rows)][j] = v
    db = folder / "historian.sqlite"
    con = sqlite3.connect(db)
    decl = {"typed": "timestamp TIMESTAMP, tag VARCHAR(40), value REAL, quality INTEGER"}.get(
        shape, "timestamp TEXT, tag TEXT, value, quality TEXT")
    name = "raw" if shape == "view" else ("other" if shape == "missing_table" else "readings")
    tail = ", PRIMARY KEY (timestamp, tag, value, quality)) WITHOUT ROWID" if shape == "without_rowid" else ")"
    if shape == "without_rowid":
        decl = "timestamp, tag, value, quality"
    con.execute(f"CREATE TABLE {name} ({decl}{tail}")
    if shape != "empty":
        con.executemany(f"INSERT OR IGNORE INTO {name} VALUES (?,?,?,?)", rows)
    if shape == "view":
        con.execute("CREATE VIEW readings AS SELECT * FROM raw")
    elif shape == "no_quality":
        con.execute("ALTER TABLE readings DROP COLUMN quality")
    elif shape == "extra_column":
        con.execute("ALTER TABLE readings ADD COLUMN note TEXT DEFAULT 'x'")
    con.commit()
    con.close()
    if shape == "truncated":
        data = db.read_bytes()
        db.write_bytes(data[:cut % (len(data) + 1)])
    _check(folder, demo_config(folder, db), caplog)


# ------------------------------------------------------------------------------------- regressions
# Each case below is a traceback the fuzzing found, now a clear message and exit 2 (or the readings counted).
# The message wording is ours (common practice, no source).

@pytest.mark.parametrize("size", ["small", "longer than source.max_line_bytes"])
def test_csv_with_bare_cr_line_ends_is_refused_by_name(tmp_path, small_historian, caplog, size):
    """Found by the fuzzing: a CSV export with bare CR line ends crashed splitting its header."""
    path = tmp_path / "historian.csv"
    text = _csv_text(small_historian).replace("\n", "\r")
    if size != "small":
        text = text * 3
    block = f'[source]\nkind = "csv"\npath = "{path}"\ngood_quality = ["OK"]'
    extra = "" if size == "small" else "max_line_bytes = 200000\n"
    path.write_bytes(text.encode())
    code, out = _check(tmp_path, demo_config(tmp_path, source_block=block + "\n" + extra), caplog)
    assert code == 2, out
    logged = caplog.text
    assert "historian.csv:1" in logged + out and "bare carriage returns" in logged + out, logged + out


def test_header_that_is_not_utf8_names_its_line(tmp_path, small_historian, caplog):
    path = tmp_path / "historian.csv"
    path.write_bytes("time\xe9stamp,tag,value,quality\n".encode("latin-1") + _csv_text(small_historian).split("\n", 1)[1]
                     .encode())
    block = f'[source]\nkind = "csv"\npath = "{path}"\ngood_quality = ["OK"]'
    code, out = _check(tmp_path, demo_config(tmp_path, source_block=block), caplog)
    assert code == 2
    assert "historian.csv:1: line is not UTF-8 text (byte 0xe9)" in caplog.text + out, caplog.text + out
