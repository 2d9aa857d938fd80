"""Broken inputs (tests/ingest/data/corpus.toml): each gets its exact error, flag or note.

Expected counts are worked out by hand from the files (e.g. frozen.csv holds 7
identical temperatures over one hour: the first is kept, 6 are frozen), not
taken from the code's output.
"""

import csv
import os
import sqlite3
import tomllib
from pathlib import Path

import pytest

from kinetrace.errors import ConfigError, IngestError
from kinetrace.ingest import read_unit

from .synth import config

DATA = Path(__file__).parent / "data"
CASES = tomllib.loads((DATA / "corpus.toml").read_text(encoding="utf-8"))["case"]


def test_corpus_is_big_enough():
    assert len(CASES) >= 25
    assert len({c["id"] for c in CASES}) == len(CASES)


def _sqlite_copy(csv_path: Path, db: Path, shape: str) -> str:
    """The readings of a long CSV file as a SQLite historian of the given shape; returns the name to read.

    ``table``: an ordinary table; ``view``: a view over a table of another name;
    ``without_rowid``: a WITHOUT ROWID table; ``rowid_column``: a table with a column of its
    own called ``rowid`` (so ``rowid`` does not name the row id).
    """
    with open(csv_path, newline="", encoding="utf-8") as f:
        rows = list(csv.reader(f))[1:]
    rows = [(t, g, float(v) if v else None, q) for t, g, v, q in rows]
    con = sqlite3.connect(db)
    if shape == "without_rowid":
        con.execute("CREATE TABLE readings (timestamp TEXT, tag TEXT, value REAL, quality TEXT, "
                    "PRIMARY KEY (tag, timestamp)) WITHOUT ROWID")
    elif shape == "rowid_column":
        con.execute("CREATE TABLE readings (rowid TEXT, timestamp TEXT, tag TEXT, value REAL, quality TEXT)")
        rows = [(None, *r) for r in rows]
    else:
        con.execute(f"CREATE TABLE {'raw_readings' if shape == 'view' else 'readings'} "
                    "(timestamp TEXT, tag TEXT, value REAL, quality TEXT)")
    if shape == "view":
        con.execute("CREATE VIEW readings AS SELECT timestamp, tag, value, quality FROM raw_readings")
    con.executemany(f"INSERT INTO {'raw_readings' if shape == 'view' else 'readings'} "
                    f"VALUES ({','.join('?' * len(rows[0]))})", rows)
    con.commit()
    con.close()
    return "readings"


def _cfg(case, tmp: Path | None = None):
    def tweak(raw):
        for unit in raw["units"]:
            for t in unit["tags"]:
                t.update(case.get("tags", {}).get(t["tag"], {}))
            if unit["id"] == "R-220":      # unit edits of a case: volume spec, extra tags, species' molar masses
                unit["volume"] = case.get("volume", unit["volume"])
                unit["tags"] += case.get("add_tags", [])
                for sp in unit["species"]:
                    if sp["name"] in case.get("species_without_molar_mass", []):
                        sp.pop("formula", None)
                        sp.pop("molar_mass", None)

    src = {"kind": "csv", "path": str(DATA / case["file"]), "good_quality": ["OK"], **case.get("source", {})}
    if "sqlite" in case:
        db = tmp / case.get("db_name", "historian.db")
        src.update(kind="sqlite", path=str(db), table=_sqlite_copy(DATA / case["file"], db, case["sqlite"]))
    if case.get("special") == "fifo":
        os.mkfifo(tmp / case["file"])
        src["path"] = str(tmp / case["file"])
    return config(src, grid="10 min", tweak=tweak)


@pytest.mark.parametrize("case", CASES, ids=[c["id"] for c in CASES])
def test_broken_input(case, tmp_path):
    if "sqlite" in case:       # nothing but the database itself in its folder afterwards (no stray file)
        try:
            _check(case, tmp_path)
        finally:
            assert sorted(os.listdir(tmp_path)) == [case.get("db_name", "historian.db")]
        return
    _check(case, tmp_path)


def _check(case, tmp_path):
    if case["expect"] == "error":
        with pytest.raises((IngestError, ConfigError)) as info:      # a bad tag unit fails at config load
            read_unit(_cfg(case, tmp_path), "R-220", config_path=DATA / "plant.toml")
        hits = [p for p in info.value.problems if case["where"] in p.where and case["match"] in p.message
                and case.get("match_also", "") in p.message]
        assert hits, str(info.value)
        return
    data = read_unit(_cfg(case, tmp_path), "R-220", config_path=DATA / "plant.toml")
    q = data.quality
    # nothing is lost: every reading read has exactly one fate
    fates = ["good", "bad_timestamp", "ambiguous_time", "nonexistent_time", "bad_quality_code", "bad_value",
             "duplicate", "conflicting_duplicate", "out_of_range", "spike", "frozen"]
    assert (q[fates].sum(axis=1) == q["rows_read"]).all()
    assert len(data.flagged) == int(q[fates[1:]].to_numpy().sum())
    if case["expect"] == "fate":
        assert q.loc[case["tag"], case["column"]] == case["count"], q.loc[case["tag"]].to_dict()
        if "match" in case:
            d = data.details
            hit = d[(d["tag"] == case["tag"]) & d["where"].str.endswith(case["where"])
                    & d["message"].str.contains(case["match"], regex=False)]
            assert len(hit) == 1, d.to_dict("records")
    elif case["expect"] == "note":
        assert any(case["where"] in p.where and case["match"] in p.message for p in data.notes), data.notes
    elif case["expect"] == "report":
        assert data.source_report[case["column"]] == case["count"], data.source_report
    else:
        raise AssertionError(f"unknown expectation {case['expect']!r}")
