"""Broken inputs (tests/ingest/data/corpus.toml): each gets its exact error, flag or note.

Expected counts are worked out by hand from the files (e.g. frozen.csv holds 7
identical temperatures over one hour: the first is kept, 6 are frozen), not
taken from the code's output.
"""

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


def _cfg(case):
    def tweak(raw):
        for unit in raw["units"]:
            for t in unit["tags"]:
                t.update(case.get("tags", {}).get(t["tag"], {}))

    src = {"kind": "csv", "path": str(DATA / case["file"]), "good_quality": ["OK"], **case.get("source", {})}
    return config(src, grid="10 min", tweak=tweak)


@pytest.mark.parametrize("case", CASES, ids=[c["id"] for c in CASES])
def test_broken_input(case):
    cfg = _cfg(case)
    if case["expect"] == "error":
        with pytest.raises((IngestError, ConfigError)) as info:
            read_unit(cfg, "R-220", config_path=DATA / "plant.toml")
        hits = [p for p in info.value.problems if case["where"] in p.where and case["match"] in p.message
                and case.get("match_also", "") in p.message]
        assert hits, str(info.value)
        return
    data = read_unit(cfg, "R-220", config_path=DATA / "plant.toml")
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
