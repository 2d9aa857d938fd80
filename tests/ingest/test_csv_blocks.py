"""CSV blocks parsed ahead on a worker thread, each by the fastest path that reads it: a file whose stamps
change spelling part-way (UTC 'Z', then naive local time of the declared zone, then an offset, with
unreadable stamps and values among them) gives the same frame, fates and notes in small blocks as in
one block. Reference: the one-block read (every stamp parsed by the collector), and the pandas count of
rows per tag (the fates add up to the rows of the file). Common practice, no source."""

import numpy as np
import pandas as pd
import pytest

from kinetrace.ingest import csv_source, read_unit
from kinetrace.ingest.fates import fate_names

from .synth import config, readings


def _mixed(tmp_path):
    df = readings(hours=8, seed=41)
    t = df["timestamp"]
    third = len(df) // 3
    texts = pd.concat([t.iloc[:third].dt.strftime("%Y-%m-%dT%H:%M:%SZ"),
                       t.iloc[third:2 * third].dt.tz_convert("Europe/Berlin").dt.strftime("%Y-%m-%d %H:%M:%S"),
                       t.iloc[2 * third:].dt.tz_convert("Asia/Tokyo").dt.strftime("%Y-%m-%dT%H:%M:%S+09:00")])
    values = df["value"].map(repr)
    rng = np.random.default_rng(41)
    bad = rng.choice(len(df), 20, replace=False)
    texts.iloc[bad[:10]] = "2026-13-01T00:00:00Z"
    values.iloc[bad[10:]] = "n/a"
    pd.DataFrame({"timestamp": texts.to_numpy(), "tag": df["tag"], "value": values.to_numpy(),
                  "quality": df["quality"]}).to_csv(tmp_path / "mixed.csv", index=False)
    return df


@pytest.mark.parametrize("block_bytes", [2048, 65536])
def test_blocks_of_changing_stamp_spellings_read_like_one_block(tmp_path, monkeypatch, block_bytes):
    df = _mixed(tmp_path)
    cfg = config({"kind": "csv", "path": "mixed.csv", "good_quality": ["OK"], "timezone": "Europe/Berlin"},
                 grid="10 min")
    one = read_unit(cfg, "R-220", config_path=tmp_path / "p.toml")
    monkeypatch.setattr(csv_source, "BLOCK_BYTES", block_bytes)
    many = read_unit(cfg, "R-220", config_path=tmp_path / "p.toml")
    pd.testing.assert_frame_equal(many.values, one.values)
    pd.testing.assert_frame_equal(many.valid, one.valid)
    pd.testing.assert_frame_equal(many.quality, one.quality)
    assert [(p.where, p.message) for p in many.notes] == [(p.where, p.message) for p in one.notes]
    q = one.quality
    assert (q[fate_names()].sum(axis=1) == q["rows_read"]).all()
    assert q["rows_read"].to_dict() == df.groupby("tag").size().to_dict()
    assert int(q["bad_timestamp"].sum()) == 10 and int(q["bad_value"].sum()) == 10
