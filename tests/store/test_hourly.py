"""The hourly summary (series_hourly) of the finely sampled series always equals one computed from the
stored rows, and series on coarser grids have none.

Reference: pandas over the rows read back with Store.series (values grouped by their UTC hour,
NaN left out): first time, minimum, maximum and count exactly, the sum to 1e-12 relative (the
order of addition differs). Checked after a first write, after re-runs of windows that start
and end inside hours (on every variable, and on some only), through a staged write, and after
the upgrade of a version-3 store, on SQLite and PostgreSQL.
"""

import numpy as np
import pandas as pd
import pytest
from sqlalchemy import create_engine, select, text

from kinetrace.store import open_store, stage_series
from kinetrace.store.schema import series_hourly, series_keys, series_summarised

from .synth import FP

W0, W1 = pd.Timestamp("2026-11-28T00:00Z"), pd.Timestamp("2026-12-01T00:00Z")


def _frame(start, end, seed, variables=("conversion", "temperature", "activity")):
    idx = pd.date_range(start, end, freq="1min", tz="UTC", inclusive="left")
    rng = np.random.default_rng(seed)
    f = pd.DataFrame({v: rng.normal(1.0 + i, 0.1, len(idx)) for i, v in enumerate(variables)}, index=idx)
    holes = rng.random(f.shape) < 0.05
    f = f.mask(holes)
    f.iloc[100:170, 0] = np.nan                 # a whole hour and more without values of one variable
    return f


def _expected(store, unit):
    wide = store.series(unit)
    with store.engine.connect() as conn:
        key = dict(conn.execute(select(series_keys.c.variable, series_keys.c.key_id)
                                .where(series_keys.c.unit_id == unit)).all())
    rows = []
    for v in wide.columns:
        col = wide[v].dropna()
        if not len(col):
            continue
        g = col.groupby(col.index.floor("h"))
        part = pd.DataFrame({"t_first": g.apply(lambda s: s.index.min()), "lo": g.min(), "hi": g.max(),
                             "total": g.sum(), "n": g.count()})
        part.index.name = "hour"
        rows.append(part.reset_index().assign(key_id=key[v]))
    out = pd.concat(rows, ignore_index=True)
    return out.sort_values(["key_id", "hour"]).reset_index(drop=True)


def _stored(store, unit):
    with store.engine.connect() as conn:
        keys = select(series_keys.c.key_id).where(series_keys.c.unit_id == unit)
        got = pd.DataFrame(conn.execute(series_hourly.select().where(series_hourly.c.key_id.in_(keys))
                                        .order_by(series_hourly.c.key_id, series_hourly.c.hour)).all(),
                           columns=[c.name for c in series_hourly.columns])
    return got


def _same(store, unit="R-210"):
    want, got = _expected(store, unit), _stored(store, unit)
    assert len(got) == len(want)
    for c in ("key_id", "n"):
        np.testing.assert_array_equal(got[c].to_numpy(dtype=np.int64), want[c].to_numpy(dtype=np.int64))
    for c in ("hour", "t_first"):
        assert pd.DatetimeIndex(got[c]).equals(pd.DatetimeIndex(want[c]))
    for c in ("lo", "hi"):
        np.testing.assert_array_equal(got[c].to_numpy(dtype=float), want[c].to_numpy(dtype=float))
    np.testing.assert_allclose(got["total"].to_numpy(dtype=float), want["total"].to_numpy(dtype=float), rtol=1e-12)


def test_hourly_summary_follows_every_write(store_url):
    store = open_store(store_url)
    with store.write_run((W0, W1), config_fingerprint=FP) as run:
        run.write_series("R-210", _frame(W0, W1, 1))
    _same(store)
    # a re-run of a window that starts and ends inside hours, on every variable
    a, b = pd.Timestamp("2026-11-29T10:17Z"), pd.Timestamp("2026-11-29T13:43Z")
    with store.write_run((a, b), config_fingerprint=FP) as run:
        run.write_series("R-210", _frame(a, b, 2))
    _same(store)
    # a re-run with fewer rows than before (the window's other rows are deleted) and one variable
    # written again in the same run
    a, b = pd.Timestamp("2026-11-30T05:30Z"), pd.Timestamp("2026-11-30T09:05Z")
    f = _frame(a, b, 3).iloc[::7]
    with store.write_run((a, b), config_fingerprint=FP) as run:
        run.write_series("R-210", f)
        run.write_series("R-210", _frame(a, b, 4, variables=("activity",)).iloc[::3])
    _same(store)
    # staged, as a backfill worker sends it
    a, b = pd.Timestamp("2026-11-28T23:59Z"), pd.Timestamp("2026-11-29T02:01Z")
    with store.write_run((a, b), config_fingerprint=FP) as run:
        run.write_series("R-210", stage_series(_frame(a, b, 5), unit="R-210"))
    _same(store)
    # staged over whole hours and part-hours at both ends, with a new fine variable
    a, b = pd.Timestamp("2026-11-29T20:10Z"), pd.Timestamp("2026-11-30T03:50Z")
    with store.write_run((a, b), config_fingerprint=FP) as run:
        run.write_series("R-210", stage_series(_frame(a, b, 6, variables=("conversion", "level")), unit="R-210"))
    _same(store)
    store.close()


def test_series_on_an_hourly_grid_have_no_summary(store_url):
    store = open_store(store_url)
    idx = pd.date_range(W0, W1, freq="1h", tz="UTC", inclusive="left")
    coarse = pd.DataFrame({"conversion": np.linspace(0.7, 0.8, len(idx))}, index=idx)
    with store.write_run((W0, W1), config_fingerprint=FP) as run:
        run.write_series("R-220", coarse)
        run.write_series("R-230", stage_series(coarse.rename(columns={"conversion": "activity"})))
        run.write_series("R-210", _frame(W0, W1, 7))
    with store.engine.connect() as conn:
        listed = set(conn.execute(select(series_keys.c.unit_id).join(
            series_summarised, series_summarised.c.key_id == series_keys.c.key_id)).scalars())
    assert listed == {"R-210"}
    assert _stored(store, "R-220").empty and _stored(store, "R-230").empty
    _same(store)
    store.close()


def test_version_3_store_is_read_and_upgraded(sqlite_url):
    store = open_store(sqlite_url)
    with store.write_run((W0, W1), config_fingerprint=FP) as run:
        run.write_series("R-210", _frame(W0, W1, 6))
    store.close()
    eng = create_engine(sqlite_url)
    with eng.begin() as conn:
        conn.execute(text("DROP TABLE series_hourly"))
        conn.execute(text("DROP TABLE series_summarised"))
        conn.execute(text("UPDATE store_meta SET value = '3' WHERE key = 'schema_version'"))
    eng.dispose()
    reader = open_store(sqlite_url, create=False)            # a reader (the dashboard) takes it as it is
    assert len(reader.series("R-210")) == len(pd.date_range(W0, W1, freq="1min", inclusive="left"))
    reader.close()
    store = open_store(sqlite_url)                           # opened to write: upgraded and filled
    _same(store)
    with store.engine.connect() as conn:
        assert conn.execute(text("SELECT value FROM store_meta WHERE key = 'schema_version'")).scalar() == "4"
    store.close()


@pytest.mark.parametrize("us, floor, ceil", [(0, 0, 0), (1, 0, 3_600_000_000), (-1, -3_600_000_000, 0),
                                            (7_200_000_000, 7_200_000_000, 7_200_000_000)])
def test_hour_edges(us, floor, ceil):
    from kinetrace.store.rollup import ceil_hour, floor_hour

    assert (floor_hour(us), ceil_hour(us)) == (floor, ceil)
