"""Fixtures of the backfill tests: a small simulated historian, a real LocalCluster, one whole run."""

import sys
from pathlib import Path

import pandas as pd
import pytest

_ROOT = Path(__file__).resolve().parents[2]
if str(_ROOT) not in sys.path:
    sys.path.insert(0, str(_ROOT))

from kinetrace.config import load_config, unit_model  # noqa: E402
from kinetrace.pipeline.daily import check_unit  # noqa: E402
from kinetrace.simulator import generate_sample_historian  # noqa: E402
from tests.pipeline.demo import demo_config  # noqa: E402

#: The period of the tests: six days of the demo scenario at 1-minute readings, hourly grid.
SINCE, UNTIL = pd.Timestamp("2026-09-01T00:00Z"), pd.Timestamp("2026-09-07T00:00Z")


@pytest.fixture(scope="session")
def fleet_plant(tmp_path_factory):
    """(folder, config path) of the demo plant (two units) over a simulated six-day historian."""
    tmp = tmp_path_factory.mktemp("fleet")
    paths = generate_sample_historian(_ROOT / "config" / "demo_plant.toml", tmp / "hist", days=6, seed=5)
    return tmp, demo_config(tmp, paths["sqlite"], store_url=f"sqlite:///{tmp / 'unused.sqlite'}")


@pytest.fixture(scope="session")
def whole_run(fleet_plant):
    """Unit id -> UnitResult of one whole (unchunked) check of the period, in this process."""
    _, cfg_path = fleet_plant
    cfg = load_config(cfg_path)
    return {u.id: check_unit(cfg, unit_model(u), config_path=cfg_path, since=SINCE, until=UNTIL) for u in cfg.units}


@pytest.fixture(scope="session")
def dask_client():
    """A real LocalCluster of two worker processes (one thread each) and its client."""
    from distributed import Client, LocalCluster

    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=":0",
                      memory_limit="2GiB") as cluster, Client(cluster) as client:
        yield client
