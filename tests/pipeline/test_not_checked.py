"""A unit whose data cannot be read is reported as not checked; the other units are still checked.

Exit codes are the project's contract (0 on target, 1 needs attention, 2 inputs unusable, 3 internal
error; common practice, no source). The historian holds invented R-220 readings only, so R-210's
tags are missing from it.
"""

from typer.testing import CliRunner

from kinetrace.cli import app
from tests.ingest.synth import readings, write_sqlite
from tests.pipeline.demo import demo_config


def test_a_unit_without_data_is_not_checked_and_the_others_are(tmp_path):
    db = write_sqlite(readings(hours=48.0, seed=3), tmp_path / "r220_only.sqlite")
    cfg = demo_config(tmp_path, db)
    result = CliRunner().invoke(app, ["check", "--config", str(cfg)])
    assert result.exit_code == 1, result.output
    assert "Traceback" not in result.output
    assert "unit R-210 not checked: its data could not be read: " in result.output
    assert "R210-FT-101: no readings in the source" in result.output
    assert "nearest tag names" not in result.output      # the source's tags are all R-220's own
    assert (tmp_path / "plant-out" / "R-220.csv").exists()       # R-220 was checked all the same
    assert not (tmp_path / "plant-out" / "R-210.csv").exists()


def test_no_unit_readable_is_exit_2(tmp_path):
    df = readings(hours=6.0, seed=3)
    df["tag"] = "CB7:ELSEWHERE." + df["tag"].str.slice(4)
    cfg = demo_config(tmp_path, write_sqlite(df, tmp_path / "none.sqlite"))
    result = CliRunner().invoke(app, ["check", "--config", str(cfg)])
    assert result.exit_code == 2, result.output
    assert result.output.startswith("kinetrace: no unit could be checked:"), result.output
    assert "nearest tag names in the source: 'CB7:ELSEWHERE.R220~" in result.output
