"""Fixtures of the store tests: a fresh SQLite file or a fresh PostgreSQL database per test.

The PostgreSQL server is the session-wide throwaway cluster of ``tests/pg_server.py``;
each test gets its own database on it, dropped afterwards.
"""

import sys
import uuid
from pathlib import Path

import pytest
from sqlalchemy import create_engine, text
from sqlalchemy.engine import make_url

_ROOT = str(Path(__file__).resolve().parents[2])
if _ROOT not in sys.path:
    sys.path.insert(0, _ROOT)

from tests.pg_server import pg_url  # noqa: E402,F401  (fixture re-exported for this folder)


@pytest.fixture
def sqlite_url(tmp_path):
    """URL of a new SQLite file."""
    return f"sqlite:///{tmp_path / 'results.sqlite'}"


@pytest.fixture
def pg_db_url(pg_url):
    """URL of a new, empty database on the test PostgreSQL server (dropped after the test)."""
    name = f"kt_store_{uuid.uuid4().hex[:12]}"
    admin = create_engine(pg_url, isolation_level="AUTOCOMMIT")
    with admin.connect() as conn:
        conn.execute(text(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)'))
        conn.execute(text(f'CREATE DATABASE "{name}"'))
    url = make_url(pg_url).set(database=name).render_as_string(hide_password=False)
    try:
        yield url
    finally:
        with admin.connect() as conn:
            conn.execute(text(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)'))
        admin.dispose()


@pytest.fixture(params=["sqlite", pytest.param("postgresql", marks=pytest.mark.postgres)])
def store_url(request):
    """URL of a fresh store on each back end."""
    if request.param == "sqlite":
        return request.getfixturevalue("sqlite_url")
    return request.getfixturevalue("pg_db_url")
