"""Schema version 3: alarms keep a drift's rate and the last lab check; a version-2 store is upgraded
in place (its alarms keep their rows, with NULL in the new columns)."""

import pandas as pd
import pytest
from sqlalchemy import create_engine, text

from kinetrace.store import SCHEMA_VERSION, open_store

W = (pd.Timestamp("2027-03-01T00:00Z"), pd.Timestamp("2027-03-13T00:00Z"))


def _alarm(**kw):
    row = {"kind": "sensor_drift", "variable": "K41_OUT_P_MOLL", "onset": pd.Timestamp("2027-03-09T00:00Z"),
           "detected": pd.Timestamp("2027-03-11T22:30Z"), "magnitude": 2.0, "magnitude_unit": "%",
           "evidence": "analyzer drifting", "state": "open", "closed": None, "rate": 0.6,
           "last_check": pd.Timestamp("2027-03-12T18:30Z")}
    row.update(kw)
    return pd.DataFrame([row])


def test_drift_rate_and_last_check_round_trip(store_url):
    store = open_store(store_url)
    with store.write_run(W, config_fingerprint="x") as run:
        run.write_alarms("K-41", _alarm())
    a = store.alarms("K-41").iloc[0]
    assert a["rate"] == pytest.approx(0.6)
    assert a["last_check"] == pd.Timestamp("2027-03-12T18:30Z")
    store.close()


def test_version_2_store_is_upgraded(sqlite_url):
    store = open_store(sqlite_url)
    with store.write_run(W, config_fingerprint="x") as run:
        run.write_alarms("K-41", _alarm(kind="sensor_bias", rate=None, last_check=None))
    store.close()
    eng = create_engine(sqlite_url)
    with eng.begin() as conn:      # make it a version-2 store: no rate, no last_check
        conn.execute(text("ALTER TABLE alarms DROP COLUMN rate"))
        conn.execute(text("ALTER TABLE alarms DROP COLUMN last_check"))
        conn.execute(text("UPDATE store_meta SET value = '2' WHERE key = 'schema_version'"))
    eng.dispose()
    store = open_store(sqlite_url)
    old = store.alarms("K-41")
    assert len(old) == 1 and pd.isna(old["rate"].iloc[0]) and pd.isna(old["last_check"].iloc[0])
    with store.write_run(W, config_fingerprint="x") as run:
        run.write_alarms("K-41", _alarm())
    assert store.alarms("K-41")["rate"].dropna().tolist() == [pytest.approx(0.6)]
    store.close()
    with create_engine(sqlite_url).connect() as conn:
        assert conn.execute(text("SELECT value FROM store_meta WHERE key = 'schema_version'")).scalar() \
            == str(SCHEMA_VERSION) == "4"
