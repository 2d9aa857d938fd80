"""Writes read back unchanged, on SQLite and PostgreSQL; bad input is refused with a clear error.

Reference for the time stamps: the Python standard library (``datetime``), independent of
pandas and of the store: microseconds since 1970-01-01T00:00:00Z computed by
``(t - epoch) // timedelta(microseconds=1)``.
"""

import datetime as dt
import sqlite3

import numpy as np
import pandas as pd
import pytest

from kinetrace.store import StoreError, open_store

from .synth import FP, SERIES_UNITS, alarm_frame, daily_frame, fill_window, series_frame, whatif_frame

W0, W1 = pd.Timestamp("2026-11-29T00:00Z"), pd.Timestamp("2026-12-01T00:00Z")


def test_series_round_trip(store_url):
    store = open_store(store_url)
    frame = series_frame(W0, W1, freq="10min", seed=3)
    with store.write_run((W0, W1), config_fingerprint=FP) as run:
        n = run.write_series("R-210", frame, units=SERIES_UNITS)
    assert n == frame.size
    back = store.series("R-210")
    assert str(back.index.tz) == "UTC"
    expected = frame.astype(float)[sorted(frame.columns)]
    pd.testing.assert_frame_equal(back, expected, check_freq=False, check_names=False)
    # one variable over a sub-range, half-open [t0, t1)
    t0, t1 = W0 + pd.Timedelta("1h"), W0 + pd.Timedelta("2h")
    part = store.series("R-210", ["temperature"], t0, t1)
    assert list(part.columns) == ["temperature"]
    assert part.index[0] == t0 and part.index[-1] == t1 - pd.Timedelta("10min")
    np.testing.assert_array_equal(part["temperature"].to_numpy(), frame.loc[t0:t1 - pd.Timedelta("1us"),
                                                                            "temperature"].to_numpy())
    cat = store.series_catalog("R-210")
    assert dict(zip(cat["variable"], cat["unit_of_measure"])) == SERIES_UNITS
    store.close()


def test_sqlite_time_stamps_are_epoch_microseconds(sqlite_url):
    """Stored integers equal the stdlib's count of microseconds since the Unix epoch."""
    store = open_store(sqlite_url)
    idx = pd.DatetimeIndex(["2026-03-29T00:59:59.123456Z", "2026-03-29T01:00:00Z"])
    with store.write_run((idx[0], idx[-1] + pd.Timedelta("1s")), config_fingerprint=FP) as run:
        run.write_series("R-210", pd.DataFrame({"x": [1.0, 2.0]}, index=idx))
    store.close()
    epoch = dt.datetime(1970, 1, 1, tzinfo=dt.timezone.utc)
    want = [(t.to_pydatetime() - epoch) // dt.timedelta(microseconds=1) for t in idx]
    with sqlite3.connect(sqlite_url.removeprefix("sqlite:///")) as raw:
        got = [r[0] for r in raw.execute("SELECT ts FROM series_values ORDER BY ts")]
    assert got == want


def test_postgres_time_stamps_are_timestamptz(pg_db_url):
    """The server holds the same instants (read back through psycopg, not through the store)."""
    import psycopg

    store = open_store(pg_db_url)
    idx = pd.DatetimeIndex(["2026-10-25T00:30:00.000001Z", "2026-10-25T01:30:00Z"])
    with store.write_run((idx[0], idx[-1] + pd.Timedelta("1s")), config_fingerprint=FP) as run:
        run.write_series("R-210", pd.DataFrame({"x": [1.0, np.nan]}, index=idx))
    store.close()
    dsn = pg_db_url.replace("postgresql+psycopg://", "postgresql://")
    with psycopg.connect(dsn) as raw:
        rows = raw.execute("SELECT ts, value FROM series_values ORDER BY ts").fetchall()
    assert [r[0] for r in rows] == [t.to_pydatetime() for t in idx]
    assert rows[0][1] == 1.0 and rows[1][1] is None      # NaN is stored as NULL


def test_small_tables_round_trip(store_url):
    store = open_store(store_url)
    with store.write_run((W0, W1), config_fingerprint=FP) as run:
        fill_window(run, W0, W1, freq="1h", units=("R-210",))
    daily = store.daily("R-210")
    want = daily_frame(pd.date_range(W0.normalize(), W1 - pd.Timedelta("1us"), freq="D").date, seed=0)
    assert [d for d in daily["day"]] == list(want.index)
    for c in want.columns:
        np.testing.assert_array_equal(daily[c].to_numpy(), want[c].to_numpy())
    al = store.alarms("R-210")
    src = alarm_frame(W0)
    assert al["kind"].tolist() == src["kind"].tolist()
    assert al["detected"].tolist() == [pd.Timestamp(t) for t in src["detected"]]
    assert al["state"].tolist() == ["open", "closed"]
    assert pd.isna(al["closed"].iloc[0]) and al["closed"].iloc[1] == W0 + pd.Timedelta("9h")
    p = store.parameters("R-210")
    assert set(p["name"]) == {"k_ref:addition", "decay_constant"} and (p["as_of"] == W1).all()
    w = store.whatif("R-210")
    assert w["restores_target"].tolist() == [False, True] or w["restores_target"].tolist() == [True, False]
    fc = store.forecasts("R-210")
    assert fc["miss_expected"].iloc[0] == W1 + pd.Timedelta(days=104)
    q = store.quality("R-210")
    assert len(q) == 9 and q["count"].dtype == "int64"
    assert store.watermark("R-210") == W1 - pd.Timedelta("1h")
    runs = store.runs()
    assert runs["status"].tolist() == ["complete"] and runs["finished"].notna().all()
    store.close()


@pytest.mark.parametrize("mutate, message", [
    (lambda d: d.assign(gap_data_kg=d["gap_data_kg"] + 1.0), "must add up to the gap"),
    (lambda d: d.assign(gap_kg=d["gap_kg"] + 1.0), "is not target - production"),
    (lambda d: d.assign(gap_feed_kg=np.nan), "part(s) ['gap_feed_kg'] are missing"),
    (lambda d: d.drop(columns="gap_kg"), "missing column(s) ['gap_kg']"),
    (lambda d: d.assign(bonus=1.0), "unknown column(s) ['bonus']"),
    (lambda d: d.set_axis([pd.Timestamp("2026-12-05").date()] * 1 + list(d.index[1:])), "does not overlap"),
])
def test_daily_bad_rows_refused_and_run_rolled_back(sqlite_url, mutate, message):
    store = open_store(sqlite_url)
    days = pd.date_range(W0, W1 - pd.Timedelta("1us"), freq="D").date
    with pytest.raises(StoreError, match="daily production of unit R-210") as err:
        with store.write_run((W0, W1), config_fingerprint=FP) as run:
            run.write_series("R-210", series_frame(W0, W1, freq="1h"))
            run.write_daily("R-210", mutate(daily_frame(days)))
    assert message in str(err.value)
    assert store.series_catalog().empty                       # the series written before is rolled back
    runs = store.runs()
    assert runs["status"].tolist() == ["failed"] and message in runs["message"].iloc[0]


def test_whatif_outside_safe_limits_is_refused(sqlite_url):
    store = open_store(sqlite_url)
    bad = whatif_frame()
    bad.loc[0, "proposed_value"] = 360.0          # above safe_high 353.15 K
    with pytest.raises(StoreError, match=r"lever 'temperature' proposes 360.0, outside its safe limits"):
        with store.write_run((W0, W1), config_fingerprint=FP) as run:
            run.write_whatif("R-210", bad)
    assert store.whatif().empty


@pytest.mark.parametrize("frame, message", [
    (pd.DataFrame({"x": [1.0]}, index=pd.DatetimeIndex(["2026-11-29T01:00"])), "naive"),
    (pd.DataFrame({"x": [1.0]}, index=pd.DatetimeIndex(["2026-12-01T00:00Z"])), "outside the run window"),
    (pd.DataFrame({"x": ["a"]}, index=pd.DatetimeIndex(["2026-11-29T01:00Z"])), "only numeric or boolean"),
    (pd.DataFrame({"x": [1.0, 2.0]}, index=pd.DatetimeIndex(["2026-11-29T01:00Z"] * 2)), "duplicate time stamp"),
])
def test_series_bad_input_refused(sqlite_url, frame, message):
    store = open_store(sqlite_url)
    with pytest.raises(StoreError, match="series of unit R-210") as err:
        with store.write_run((W0, W1), config_fingerprint=FP) as run:
            run.write_series("R-210", frame)
    assert message in str(err.value)


def test_unit_of_measure_cannot_change(sqlite_url):
    store = open_store(sqlite_url)
    f = series_frame(W0, W1, freq="1h")[["temperature"]]
    with store.write_run((W0, W1), config_fingerprint=FP) as run:
        run.write_series("R-210", f, units={"temperature": "K"})
    with pytest.raises(StoreError, match="'temperature' is stored in 'K'; refusing to add values in 'degC'"):
        with store.write_run((W0, W1), config_fingerprint=FP) as run:
            run.write_series("R-210", f, units={"temperature": "degC"})


def test_unsupported_url_is_refused():
    with pytest.raises(StoreError, match="cannot be used|not supported"):
        open_store("nosuchdb://x")


def test_long_parameter_method_text_round_trips(store_url):
    # the calibration's reasons ("held at the configured value: the steady stretches span ...") are
    # longer than 64 characters; schema version 1 bounded the column and PostgreSQL refused them
    reason = "held at the configured value: " + "the steady stretches span 0.1 K only (< 3 K); " * 6
    store = open_store(store_url)
    with store.write_run((W0, W1), config_fingerprint=FP) as run:
        run.write_parameters("R-210", pd.DataFrame([{"name": "activation_energy:addition", "value": 5e4,
                                                    "ci_low": 1e4, "ci_high": 9e4, "unit_of_measure": "J/mol",
                                                    "method": reason}]), as_of=W1)
    assert store.parameters("R-210")["method"].tolist() == [reason]
    store.close()


@pytest.mark.postgres
def test_version_1_store_is_upgraded(pg_db_url):
    from sqlalchemy import create_engine, text

    open_store(pg_db_url).close()
    eng = create_engine(pg_db_url)
    with eng.begin() as conn:   # make it a version-1 store: bounded column, version 1
        conn.execute(text("ALTER TABLE parameters ALTER COLUMN method TYPE VARCHAR(64)"))
        conn.execute(text("UPDATE store_meta SET value = '1' WHERE key = 'schema_version'"))
    store = open_store(pg_db_url)
    with eng.connect() as conn:
        kind = conn.execute(text("SELECT data_type FROM information_schema.columns "
                                 "WHERE table_name = 'parameters' AND column_name = 'method'")).scalar()
        version = conn.execute(text("SELECT value FROM store_meta WHERE key = 'schema_version'")).scalar()
    eng.dispose()
    assert (kind, version) == ("text", "4")
    store.close()


@pytest.mark.postgres
def test_calibrated_check_writes_to_postgresql(pg_db_url, tmp_path):
    """The check on a simulated plant of the tests' own, store on the real PostgreSQL server: the
    calibration's parameter rows (with their long reasons) are stored and read back."""
    from kinetrace.pipeline import run_check
    from tests.pipeline.test_self_calibration import ROUGH, plants

    truth, readings = plants.saturating_plant(1, temps=(348.0,))
    csv = plants.write_export(readings, tmp_path / "export.csv")
    cfg = plants.write_config("saturating", tmp_path, csv, start=ROUGH["saturating"], target="10 t/d",
                              change_day=truth.change_day)
    run_check(cfg, store=pg_db_url)
    store = open_store(pg_db_url)
    p = store.parameters("K-41").set_index("name")
    store.close()
    assert p.loc["activation_energy:conversion", "method"].startswith(
        "held at the configured value: the steady stretches span")
    assert len(p.loc["activation_energy:conversion", "method"]) > 64
