"""Bounded resources: long lines, decompression, pipes and devices (issue 12, item 4).

The counts are worked out from the files the tests write (invented R-220 readings).
"""

import gzip
import os
import tracemalloc

import pytest

from kinetrace.errors import IngestError
from kinetrace.ingest import read_unit
from kinetrace.ingest.collect import Collector
from kinetrace.ingest.csv_source import read_csv_file
from kinetrace.ingest.files import LONG_LINE, complete_block, long_line_spans, read_line

from .synth import config

HEADER = "timestamp,tag,value,quality\n"
FEED = "CB2~R220~FEED~GPM"


def _lines(n: int, start_minute: int = 0) -> str:
    return "".join(f"2026-09-01T{(start_minute + k) // 60:02d}:{(start_minute + k) % 60:02d}:00Z,{FEED},20.0{k % 7},OK\n"
                   for k in range(n))


def _read(path, block_bytes: int, **source):
    cfg = config({"kind": "csv", "path": str(path), "good_quality": ["OK"], **source}, grid="10 min")
    unit = cfg.units[[u.id for u in cfg.units].index("R-220")]
    col = Collector(unit.tags, cfg.source, {t.tag for u in cfg.units for t in u.tags})
    counts = read_csv_file(path, cfg.source, col, {t.tag: t for t in unit.tags}, block_bytes=block_bytes)
    return counts, col


def test_long_line_across_blocks_is_one_counted_bad_line(tmp_path):
    # 30 good lines, a 5000-byte line, 30 good lines; 256-byte blocks end inside the long line
    path = tmp_path / "x.csv"
    path.write_text(HEADER + _lines(30) + "2026-09-01T00:30:00Z," + FEED + "," + "7" * 5000 + ",OK\n"
                    + _lines(30, 31))
    counts, col = _read(path, 256, max_line_bytes=1024)
    assert (counts["long_lines"], counts["malformed_lines"], counts["lines"]) == (1, 1, 62)
    assert col.buffers[col.index[FEED]].n == 60
    assert [w for w, m in col.notes if "longer than source.max_line_bytes (1024 bytes)" in m] == [f"{path}:32"]


def test_last_line_without_line_break_longer_than_the_limit(tmp_path):
    path = tmp_path / "x.csv"
    path.write_text(HEADER + _lines(10) + "2026-09-01T00:10:00Z," + FEED + "," + "1" * 3000)
    counts, col = _read(path, 300, max_line_bytes=1024)
    assert (counts["long_lines"], col.buffers[col.index[FEED]].n) == (1, 10)


def test_helpers_keep_line_numbers():
    import io

    f = io.BytesIO(b"y" * 50 + b"\nnext\n")
    assert read_line(f, 16) == (b"", True)
    assert f.read() == b"next\n"                         # the long line was skipped through its line break
    f = io.BytesIO(b"tail\nmore\n")
    assert complete_block(f, b"a\npar", 16) == b"a\npartail\n"
    f = io.BytesIO(b"z" * 40 + b"\nmore\n")
    assert complete_block(f, b"a\npar", 16) == b"a\n" + LONG_LINE + b"\n"
    assert f.read() == b"more\n"
    assert long_line_spans(b"x" * 17 + b"\n", 16) == [(0, 17)]
    assert long_line_spans(b"x" * 16 + b"\n" + b"y" * 16 + b"\n", 16) == []


def test_a_one_line_gzip_of_64_mib_is_read_in_bounded_memory(tmp_path):
    # the header, then one 64 MiB line without a line break: a counted bad line, never held whole
    path = tmp_path / "one_line.csv.gz"
    with gzip.open(path, "wb", compresslevel=1) as f:
        f.write(HEADER.encode() + _lines(3).encode())
        chunk = b"9" * (1 << 20)
        for _ in range(64):
            f.write(chunk)
    tracemalloc.start()
    try:
        counts, col = _read(path, 8 << 20)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert counts["long_lines"] == 1 and col.buffers[col.index[FEED]].n == 3
    # one 8 MB block, the 4 MiB line limit and the parse of one block; the line alone would be 64 MiB
    assert peak < 40 << 20, peak


def test_named_pipe_in_a_folder_is_refused_by_name(tmp_path):
    (tmp_path / "a.csv").write_text(HEADER + _lines(13))
    os.mkfifo(tmp_path / "b.csv")
    cfg = config({"kind": "csv", "path": str(tmp_path), "good_quality": ["OK"]}, grid="10 min")
    with pytest.raises(IngestError) as info:
        read_unit(cfg, "R-220", config_path=tmp_path / "p.toml")
    assert any(f"{tmp_path / 'b.csv'} is a named pipe (FIFO)" in p.message for p in info.value.problems), info.value


def test_named_pipe_as_sqlite_file_is_refused(tmp_path):
    os.mkfifo(tmp_path / "h.db")
    cfg = config({"kind": "sqlite", "path": str(tmp_path / "h.db")}, grid="10 min")
    with pytest.raises(IngestError) as info:
        read_unit(cfg, "R-220", config_path=tmp_path / "p.toml")
    assert "is a named pipe (FIFO), not a regular file" in str(info.value)
