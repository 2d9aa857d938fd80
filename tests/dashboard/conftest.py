"""Stores for the dashboard tests, filled through the store's write API with invented results."""

import sys
from pathlib import Path

import pandas as pd
import pytest

ROOT = Path(__file__).resolve().parents[2]
for p in (ROOT, ROOT / "dashboards", ROOT / "src"):
    if str(p) not in sys.path:
        sys.path.insert(0, str(p))

from kinetrace.store import open_store  # noqa: E402
from tests.dashboard.fill import fill_store  # noqa: E402

APP = ROOT / "dashboards" / "app.py"
ARTEFACTS = ROOT / "tests" / "artefacts" / "dashboard"
#: Last result of the hourly test store: 2026-11-30 23:00 UTC.
END = pd.Timestamp("2026-12-01T00:00Z")


def _filled(tmp_path_factory, name: str, **kw) -> str:
    url = f"sqlite:///{tmp_path_factory.mktemp(name) / 'results.sqlite'}"
    fill_store(url, **kw).close()
    return url


@pytest.fixture(scope="session")
def hourly_url(tmp_path_factory):
    """91 days of hourly results of R-210 and R-220, with every table filled."""
    return _filled(tmp_path_factory, "dash_hourly")


@pytest.fixture(scope="session")
def minute_url(tmp_path_factory):
    """15 days of 1-minute results of R-210 only (more rows than the raw-read limit)."""
    return _filled(tmp_path_factory, "dash_minute", start="2026-11-16T00:00Z", end="2026-12-01T00:00Z",
                   freq="1min", units=("R-210",), reconciliation=False, extras=False)


@pytest.fixture(scope="session")
def bare_url(tmp_path_factory):
    """Series and daily rows only; R-220 never steady, nothing of reconciliation or fits."""
    return _filled(tmp_path_factory, "dash_bare", start="2026-11-01T00:00Z", end="2026-12-01T00:00Z",
                   reconciliation=False, extras=False)


@pytest.fixture(scope="session")
def empty_url(tmp_path_factory):
    """A store with its tables but no results."""
    url = f"sqlite:///{tmp_path_factory.mktemp('dash_empty') / 'results.sqlite'}"
    open_store(url).close()
    return url
