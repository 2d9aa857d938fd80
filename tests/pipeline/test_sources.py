"""`kinetrace check` works unchanged on a CSV export, a folder of daily exports, SQLite and PostgreSQL.

Reference: the same simulated readings (kinetrace.simulator) through every source must give the same
results, to 1e-9 relative (common practice, no source: only the reader differs)."""

import re
from pathlib import Path

import numpy as np
import pandas as pd
import psycopg
import pytest
from typer.testing import CliRunner

from kinetrace.cli import app
from kinetrace.simulator import generate_sample_historian
from tests.pipeline.demo import demo_config

ROOT = Path(__file__).resolve().parents[2]


@pytest.fixture(scope="module")
def hist(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("sources")
    paths = generate_sample_historian(ROOT / "config" / "demo_plant.toml", tmp / "hist", days=6, seed=8)
    return tmp, paths


def _run(cfg):
    result = CliRunner().invoke(app, ["check", "--config", str(cfg)])
    assert result.exit_code in (0, 1), result.output          # 1: a unit needs attention, by design
    assert "kinetrace daily check" in result.output
    out = Path(re.search(r"written to: (\S+)", result.output.replace("\n", "")).group(1))
    return {u: pd.read_csv(out / f"{u}.csv", index_col=0) for u in ("R-210", "R-220")}


@pytest.mark.postgres
def test_same_results_from_every_source(hist, pg_url, monkeypatch):
    tmp, paths = hist
    csv = Path(paths["csv"])
    folder = tmp / "daily"
    folder.mkdir()
    frame = pd.read_csv(csv, dtype=str, keep_default_na=False)
    for day, part in frame.groupby(frame["timestamp"].str[:10]):
        part.to_csv(folder / f"calder_bank_{day}.csv", index=False)
    with psycopg.connect(pg_url.replace("postgresql+psycopg", "postgresql"), autocommit=True) as con:
        con.execute("DROP TABLE IF EXISTS plant_readings")
        con.execute("CREATE TABLE plant_readings (timestamp text, tag text, value double precision, quality text)")
        with con.cursor() as cur, cur.copy("COPY plant_readings FROM STDIN WITH (FORMAT csv, HEADER true)") as cp:
            cp.write(csv.read_bytes())
    monkeypatch.setenv("CALDER_HISTORIAN_URL", pg_url)
    blocks = {
        "sqlite": f'[source]\nkind = "sqlite"\npath = "{paths["sqlite"]}"\ntable = "readings"\ngood_quality = ["OK"]',
        "csv": f'[source]\nkind = "csv"\npath = "{csv}"\ngood_quality = ["OK"]',
        "folder": f'[source]\nkind = "csv"\npath = "{folder}"\ngood_quality = ["OK"]',
        "postgres": '[source]\nkind = "sql"\nurl_env = "CALDER_HISTORIAN_URL"\ntable = "plant_readings"\n'
                    'good_quality = ["OK"]',
        # the same through a query template with bound parameters only (and open bounds)
        "postgres_query": '[source]\nkind = "sql"\nurl_env = "CALDER_HISTORIAN_URL"\ngood_quality = ["OK"]\n'
                          'query = "SELECT timestamp, tag, value, quality FROM plant_readings '
                          'WHERE timestamp >= :since AND timestamp < :until ORDER BY timestamp, tag"',
    }
    got = {name: _run(demo_config(tmp, source_block=block, name=name)) for name, block in blocks.items()}
    ref = got.pop("sqlite")
    for name, res in got.items():
        for unit in ref:
            a, b = ref[unit], res[unit]
            assert a.index.equals(b.index), (name, unit)
            num = a.select_dtypes("number").columns
            np.testing.assert_allclose(b[num].to_numpy(float), a[num].to_numpy(float), rtol=1e-9, atol=1e-12,
                                       equal_nan=True, err_msg=f"{name} {unit}")
    assert pg_url not in str(got)      # the URL (with any password) is never echoed
