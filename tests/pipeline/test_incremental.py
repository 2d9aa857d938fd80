"""Incremental checks from the store's watermarks give the results of one full run, and cron-style
re-runs are idempotent (the results store keeps one row per unit, variable and time)."""

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from kinetrace.pipeline import run_check
from kinetrace.simulator import generate_sample_historian
from kinetrace.store import open_store
from tests.pipeline.demo import demo_config

ROOT = Path(__file__).resolve().parents[2]


@pytest.fixture(scope="module")
def plant(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("incr")
    paths = generate_sample_historian(ROOT / "config" / "demo_plant.toml", tmp / "hist", days=16, seed=3)
    return tmp, demo_config(tmp, paths["sqlite"], store_url=f"sqlite:///{tmp / 'incremental.sqlite'}")


def test_incremental_runs_match_one_full_run(plant):
    tmp, cfg = plant
    full, _ = run_check(cfg, store=f"sqlite:///{tmp / 'full.sqlite'}")
    # day 1-10, then the rest incrementally, then once more with nothing new
    run_check(cfg, until="2026-09-11T00:00Z")
    second, _ = run_check(cfg, incremental=True)
    third, _ = run_check(cfg, incremental=True)
    assert third == []
    db = open_store(f"sqlite:///{tmp / 'incremental.sqlite'}")
    ref = {r.model.id: r.series for r in full}
    for r in second:
        uid = r.model.id
        assert r.series.index[0] == pd.Timestamp("2026-09-11T00:00Z")      # only the new intervals
        stored = db.series(uid, ["conversion", "production", "activity"])
        assert not stored.index.duplicated().any()
        assert stored.index.equals(ref[uid].index)                          # nothing missing, nothing twice
        assert db.watermark(uid) == ref[uid].index[-1]
        # common practice, no source: away from the seam the same readings give the same results;
        # near it the steady-state test and the data-estimated uncertainties see a different span
        late = ref[uid].index >= pd.Timestamp("2026-09-12T00:00Z")
        for col, tol in (("conversion", 2e-3), ("production", 5e-3)):
            a = stored.loc[late, col].to_numpy()
            b = ref[uid].loc[late, col].to_numpy()
            ok = np.isfinite(a) & np.isfinite(b)
            assert np.median(np.abs(a[ok] - b[ok]) / np.abs(b[ok])) < tol, (uid, col)
    assert len(db.runs()) == 2        # a run with nothing new writes nothing, not even a run record
    db.close()
