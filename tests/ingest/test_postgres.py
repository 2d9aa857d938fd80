import pytest
import sqlalchemy as sa


@pytest.mark.postgres
def test_server_answers(pg_url):
    eng = sa.create_engine(pg_url)
    with eng.connect() as c:
        assert c.execute(sa.text("select 1 + 1")).scalar() == 2
    eng.dispose()


def test_missing_binaries_fail_with_the_install_hint(monkeypatch):
    from tests import pg_server

    monkeypatch.setattr(pg_server, "find_bindir", lambda: None)
    with pytest.raises(RuntimeError, match=r"`make test` installs them \(apt-get install postgresql\)"):
        pg_server.start_cluster()


def test_binaries_are_found_here():
    from tests import pg_server

    b = pg_server.find_bindir()
    assert b is not None and (b / "initdb").exists() and (b / "pg_ctl").exists()


#: Quality codes as a real historian table may hold them: the good code in other cases and with
#: spaces, a bad code, an empty code and NULL (expected fates: the ``quality_match`` rule of the
#: config documentation: "folded" compares codes trimmed and case-folded; common practice, no source).
CODES = ["OK", "ok", " OK", "Ok ", "\tOK", "BAD", "bad ", "", None]


def _coded_readings():
    import numpy as np
    import pandas as pd

    from .synth import readings

    df = readings(hours=3, seed=31)
    rng = np.random.default_rng(31)
    plain = rng.random(len(df)) < 0.5
    picks = rng.integers(0, len(CODES), len(df))
    df["quality"] = pd.Series(["OK" if p else CODES[k] for p, k in zip(plain, picks)], dtype=object)
    return df


@pytest.mark.postgres
@pytest.mark.parametrize("per_tag_codes", [False, True], ids=["codes-pushed-into-the-select", "per-tag-codes"])
@pytest.mark.parametrize("use_copy", [True, False], ids=["copy", "streamed-select"])
@pytest.mark.parametrize("match", ["folded", "exact"])
def test_postgres_quality_codes_folded_like_csv(tmp_path, pg_url, monkeypatch, match, use_copy, per_tag_codes):
    """Folded quality codes on the real server: the same fates as the CSV path and as a pandas count
    of the codes that are 'ok' once trimmed and case-folded; exact matching counts them bad and says so."""
    import io

    import pandas as pd
    import psycopg

    from kinetrace.ingest import read_unit, sql_source
    from kinetrace.ingest.fates import fate_names

    from .synth import config, iso

    df = _coded_readings()
    folded_good = df["quality"].map(lambda q: isinstance(q, str) and q.strip().casefold() == "ok")
    exact_good = df["quality"].eq("OK")
    assert folded_good.sum() > exact_good.sum()      # the data really holds near codes

    def tweak(raw):
        if per_tag_codes:      # a tag's own good codes: the quality is not pushed into the SELECT
            u = next(u for u in raw["units"] if u["id"] == "R-220")
            u["tags"][0]["good_quality"] = ["OK"]

    def read(source, **kw):
        cfg = config({"good_quality": ["OK"], "quality_match": match, **source}, grid="10 min", tweak=tweak)
        return read_unit(cfg, "R-220", config_path=tmp_path / "plant.toml", **kw)

    frame = df.assign(timestamp=iso(df["timestamp"]), value=df["value"].map(repr))
    # in a CSV an empty field and NULL are the same empty cell
    frame.to_csv(tmp_path / "long.csv", index=False)
    ref = read({"kind": "csv", "path": "long.csv"})
    table = f"q_{match}_{int(per_tag_codes)}"
    with psycopg.connect(pg_url.replace("postgresql+psycopg", "postgresql"), autocommit=True) as con:
        con.execute(f"DROP TABLE IF EXISTS {table}")
        con.execute(f"CREATE TABLE {table} (timestamp text, tag text, value double precision, quality text)")
        buf = io.StringIO()
        frame.to_csv(buf, index=False, header=False)
        with con.cursor() as cur, cur.copy(f"COPY {table} FROM STDIN WITH (FORMAT csv)") as cp:
            cp.write(buf.getvalue())
        # COPY csv reads an unquoted empty field as NULL: the empty codes are written back as ''
        assert con.execute(f"SELECT count(*) FROM {table} WHERE quality IS NULL").fetchone()[0] == \
            int(df["quality"].isin(["", None]).sum())
    monkeypatch.setattr(sql_source, "USE_COPY", use_copy)
    eng = sa.create_engine(pg_url)
    try:
        got = read({"kind": "sql", "url_env": "UNUSED", "table": table}, engine=eng)
    finally:
        eng.dispose()
    fates = fate_names()
    pd.testing.assert_frame_equal(got.quality[["rows_read", *fates]], ref.quality[["rows_read", *fates]])
    want_good = (folded_good if match == "folded" else exact_good).groupby(df["tag"]).sum()
    assert got.quality["good"].to_dict() == want_good.to_dict()
    assert got.quality["bad_quality_code"].to_dict() == (~(folded_good if match == "folded" else exact_good)) \
        .groupby(df["tag"]).sum().to_dict()
    near = [p.message for p in got.notes if p.where == "quality codes"]
    assert bool(near) == (match == "exact"), near
    assert near == [p.message for p in ref.notes if p.where == "quality codes"]
