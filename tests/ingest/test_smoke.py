import numpy as np

from kinetrace.ingest import read_unit

from .synth import config, readings, write_long, write_sqlite


def test_long_csv_and_sqlite_agree(tmp_path):
    df = readings(hours=4)
    write_long(df, tmp_path / "x.csv")
    write_sqlite(df, tmp_path / "x.sqlite")
    cfg_csv = config({"kind": "csv", "path": "x.csv", "good_quality": ["OK"]})
    cfg_sql = config({"kind": "sqlite", "path": "x.sqlite", "good_quality": ["OK"]})
    a = read_unit(cfg_csv, "R-220", config_path=tmp_path / "c.toml")
    b = read_unit(cfg_sql, "R-220", config_path=tmp_path / "c.toml")
    print(a.values, a.quality.T, a.notes)
    assert a.values.shape == (4, 5)
    np.testing.assert_allclose(a.values.to_numpy(), b.values.to_numpy(), rtol=1e-12, atol=0)
