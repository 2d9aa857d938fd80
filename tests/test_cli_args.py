"""CLI arguments are checked before any work; an internal error is one line, a report file and exit 3.

The dates are judged against ISO 8601-1:2019 (date, or date and time with an optional offset) and the
Gregorian calendar (no month 13, no 30 February); the exit codes are the project's contract
(0 on target, 1 needs attention, 2 inputs unusable, 3 internal error; common practice, no source).
"""

from pathlib import Path

import pandas as pd
import pytest
from typer.testing import CliRunner

from kinetrace.cli import app
from kinetrace.cli_args import iso_time, iso_window
from kinetrace.errors import KinetraceError

DEMO = Path(__file__).resolve().parents[1] / "config" / "demo_plant.toml"


@pytest.mark.parametrize("args, message", [
    (["--since", "2026-13-01"], "--since '2026-13-01' is not a valid date or time: month must be in 1..12"),
    (["--since", "2026-02-30"], "--since '2026-02-30' is not a valid date or time: day is out of range for month"),
    (["--until", "2026-11-01T25:00"], "--until '2026-11-01T25:00' is not a valid date or time: hour must be in 0..23"),
    (["--since", "yesterday"], "--since 'yesterday' is not an ISO 8601 date or date-time"),
    (["--since", "03/11/2026"], "--since '03/11/2026' is not an ISO 8601 date or date-time"),
    (["--since", "1500-01-01"], "--since '1500-01-01' lies outside the years 1678-2261"),
    (["--since", "2026-11-02", "--until", "2026-11-01"], "--since '2026-11-02' must be before --until '2026-11-01'"),
])
def test_bad_dates_exit_2_with_one_line(tmp_path, args, message):
    result = CliRunner().invoke(app, ["check", "--config", str(DEMO), "--out", str(tmp_path), *args])
    assert result.exit_code == 2, result.output
    assert result.output.startswith(f"kinetrace: {message}"), result.output
    assert len(result.output.strip().splitlines()) == 1
    assert "Traceback" not in result.output
    assert not any(tmp_path.iterdir()), "no work may start on a bad argument"


def test_report_day_is_checked():
    result = CliRunner().invoke(app, ["report", "--config", str(DEMO), "--date", "29.11.2026"])
    assert result.exit_code == 2
    assert result.output.strip() == "kinetrace: --date '29.11.2026' is not a day written YYYY-MM-DD (e.g. 2026-11-29)"


def test_iso_times_are_utc_instants():
    # ISO 8601: an offset of +01:00 is one hour ahead of UTC; no offset is read as UTC
    assert iso_time("2026-11-01T06:00+01:00", "--since") == pd.Timestamp("2026-11-01T05:00Z")
    assert iso_time("2026-11-01T05:00Z", "--since") == pd.Timestamp("2026-11-01T05:00Z")
    assert iso_time("2026-11-01", "--since") == pd.Timestamp("2026-11-01T00:00Z")
    assert iso_window(None, None) == (None, None)
    with pytest.raises(KinetraceError, match="must be before"):
        iso_window("2026-11-01T05:00Z", "2026-11-01T06:00+01:00")   # the same instant


def test_internal_error_is_one_line_a_report_and_exit_3(tmp_path, monkeypatch):
    import kinetrace.pipeline as pipeline

    def boom(*args, **kwargs):
        raise ZeroDivisionError("a bug")

    monkeypatch.setattr(pipeline, "run_check", boom)
    result = CliRunner().invoke(app, ["check", "--config", str(DEMO), "--out", str(tmp_path)])
    assert result.exit_code == 3, result.output
    lines = result.output.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("kinetrace: internal error while running the check; "), lines
    reports = list(tmp_path.glob("kinetrace-internal-error-*.txt"))
    assert len(reports) == 1 and str(reports[0]) in lines[0]
    assert "ZeroDivisionError: a bug" in reports[0].read_text()
