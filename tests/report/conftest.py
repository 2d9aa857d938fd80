"""A results store filled with eight synthetic daily runs of an invented plant (three units).

R-210: below target on the report day; R-340: on target (its day row rewritten);
R-455: an open alarm but no production rows ("no data").
"""

import sys
from pathlib import Path

import pandas as pd
import pytest

_ROOT = str(Path(__file__).resolve().parents[2])
if _ROOT not in sys.path:
    sys.path.insert(0, _ROOT)

from kinetrace.store import open_store  # noqa: E402
from tests.store.synth import FP, daily_frame, fill_window  # noqa: E402

DAY = pd.Timestamp("2026-11-30").date()
FIRST = pd.Timestamp("2026-11-23T00:00Z")


@pytest.fixture(scope="module")
def filled_store(tmp_path_factory):
    path = tmp_path_factory.mktemp("report") / "results.sqlite"
    store = open_store(f"sqlite:///{path}")
    for k in range(8):
        a = FIRST + pd.Timedelta(days=k)
        with store.write_run((a, a + pd.Timedelta("1D")), config_fingerprint=FP) as run:
            fill_window(run, a, a + pd.Timedelta("1D"), freq="10min", seed=k)
    a = pd.Timestamp(DAY).tz_localize("UTC")
    with store.write_run((a, a + pd.Timedelta("1D")), config_fingerprint=FP) as run:
        on = daily_frame([DAY], seed=99)
        on["production_kg"] = 24500.0
        on["gap_kg"] = on["target_kg"] - on["production_kg"]
        on[["gap_feed_kg", "gap_conversion_kg", "gap_downtime_kg"]] = 0.0
        on["gap_data_kg"] = on["gap_kg"]
        run.write_daily("R-340", on)
        run.write_alarms("R-455", pd.DataFrame([{
            "kind": "step", "variable": "R455-FT-201", "onset": a + pd.Timedelta("3h"),
            "detected": a + pd.Timedelta("4h"), "magnitude": -0.35, "magnitude_unit": "m3/h",
            "evidence": "feed flow fell by 0.35 m3/h in one step", "state": "open", "closed": None}]))
    yield store
    store.close()


from tests.store.conftest import pg_db_url  # noqa: E402,F401  (a fresh database on the test server)
from tests.pg_server import pg_url  # noqa: E402,F401


def fill(store):
    """The same eight runs as ``filled_store`` (used to compare back ends)."""
    for k in range(8):
        a = FIRST + pd.Timedelta(days=k)
        with store.write_run((a, a + pd.Timedelta("1D")), config_fingerprint=FP) as run:
            fill_window(run, a, a + pd.Timedelta("1D"), freq="1h", seed=k)
    return store
