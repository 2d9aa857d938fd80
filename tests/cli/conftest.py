"""Fixtures of the command-line tests: the throwaway PostgreSQL server lives in tests/pg_server.py."""

import sys
from pathlib import Path

_ROOT = str(Path(__file__).resolve().parents[2])
if _ROOT not in sys.path:
    sys.path.insert(0, _ROOT)

from tests.pg_server import pg_url  # noqa: E402,F401  (fixture re-exported for this folder)
