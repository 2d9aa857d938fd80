"""The simulator's sample historian (kinetrace.simulator) through ingest: every source, and its recorded faults.

The simulator writes the same readings as a long CSV and as SQLite and records
what it did (``scenario_facts.json``: rows by quality code, each injected fault
with its number of rows). Those facts, written by code that shares nothing with
ingest, are the reference for the fate counts; the long CSV read is the
reference for the other layouts (European CSV, gzip, SQLite, PostgreSQL), to 1e-12.
"""

import gzip
import io
import json
from pathlib import Path

import numpy as np
import pandas as pd
import psycopg
import pytest

from kinetrace.config import load_config
from kinetrace.ingest import read_unit
from kinetrace.simulator import generate_sample_historian

ROOT = Path(__file__).resolve().parents[2]
DAYS = 44     # long enough for the scenario's frozen temperature transmitter (day 41)
UNITS = ("R-210", "R-220")


@pytest.fixture(scope="module")
def hist(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("sim")
    paths = generate_sample_historian(ROOT / "config" / "demo_plant.toml", tmp, days=DAYS, seed=5)
    facts = json.loads(Path(paths["facts"]).read_text())
    return tmp, paths, facts


def _cfg(source: dict):
    cfg = load_config(ROOT / "config" / "demo_plant.toml")
    return cfg.model_copy(update={"source": cfg.source.model_copy(update=source)})


def _read(tmp, source):
    return {u: read_unit(_cfg(source), u, config_path=tmp / "plant.toml") for u in UNITS}


@pytest.fixture(scope="module")
def ref(hist):
    tmp, paths, _ = hist
    return _read(tmp, {"kind": "csv", "path": str(paths["csv"])})


def _same(a, b, ignore=()):
    for u in UNITS:
        x, y = a[u], b[u]
        assert x.values.index.equals(y.values.index)
        np.testing.assert_allclose(x.values.to_numpy(), y.values.to_numpy(), rtol=1e-12, atol=0)
        assert (x.valid == y.valid).all().all()
        pd.testing.assert_frame_equal(x.quality.drop(columns=list(ignore)), y.quality.drop(columns=list(ignore)))


def test_fates_match_the_simulators_record(hist, ref):
    _, _, facts = hist
    q = pd.concat([ref[u].quality for u in UNITS])
    assert int(q["rows_read"].sum()) == facts["rows"]                 # every row of the export is accounted for
    # not "OK" -> refused for its quality code (BAD rows and QUERIED validation runs)
    assert int(q["bad_quality_code"].sum()) == facts["rows_by_quality"]["BAD"] + facts["rows_by_quality"]["QUERIED"]
    frozen = [f for f in facts["faults"] if f["kind"] == "frozen"]
    assert frozen, "the scenario's frozen transmitter should be inside the simulated days"
    for f in frozen:
        # the first reading of a flat line is the last true value; the rest are frozen
        assert q.loc[f["tag"], "frozen"] == f["rows"] - 1
    assert int(q["frozen"].sum()) == sum(f["rows"] - 1 for f in frozen)
    assert int(q[["out_of_range", "spike", "duplicate", "conflicting_duplicate", "bad_timestamp"]].to_numpy().sum()) == 0


def test_sqlite_equals_csv(hist, ref):
    tmp, paths, _ = hist
    _same(_read(tmp, {"kind": "sqlite", "path": str(paths["sqlite"])}), ref)


def test_european_gzip_equals_csv(hist, ref):
    tmp, paths, _ = hist
    df = pd.read_csv(paths["csv"], dtype=str, keep_default_na=False)
    df["value"] = df["value"].str.replace(".", ",", regex=False)
    with gzip.open(tmp / "eu.csv.gz", "wt", encoding="utf-8") as f:
        df.to_csv(f, sep=";", index=False)
    _same(_read(tmp, {"kind": "csv", "path": str(tmp / "eu.csv.gz"), "delimiter": ";", "decimal": ","}), ref)


def test_wide_equals_csv_for_good_rows(hist, ref):
    """A wide export has no quality column: written from the good rows only, it gives the same values."""
    tmp, paths, _ = hist
    df = pd.read_csv(paths["csv"], dtype={"value": str}, keep_default_na=False)
    good = df[df["quality"] == "OK"]
    wide = good.pivot(index="timestamp", columns="tag", values="value")
    wide.to_csv(tmp / "wide.csv", na_rep="")
    got = _read(tmp, {"kind": "csv", "path": str(tmp / "wide.csv")})
    for u in UNITS:
        # intervals touched by a refused reading are not valid in the long read; compare the valid ones
        m = ref[u].valid.to_numpy()
        np.testing.assert_allclose(got[u].values.to_numpy()[m], ref[u].values.to_numpy()[m], rtol=1e-12)


@pytest.mark.postgres
def test_postgres_equals_csv(hist, ref, pg_url, monkeypatch):
    tmp, paths, _ = hist
    with psycopg.connect(pg_url.replace("postgresql+psycopg", "postgresql"), autocommit=True) as con:
        con.execute("DROP TABLE IF EXISTS sim_readings")
        con.execute("CREATE TABLE sim_readings (timestamp text, tag text, value double precision, quality text)")
        with con.cursor() as cur, cur.copy("COPY sim_readings FROM STDIN WITH (FORMAT csv, HEADER true)") as cp:
            cp.write(Path(paths["csv"]).read_bytes())
    monkeypatch.setenv("KT_SIM_PG", pg_url)
    # a SELECT without ORDER BY may return rows in any order (parallel scans): out_of_order then
    # counts arrival order, and is not compared
    _same(_read(tmp, {"kind": "sql", "url_env": "KT_SIM_PG", "table": "sim_readings"}), ref, ignore=["out_of_order"])
