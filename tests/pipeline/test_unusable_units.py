"""A unit that is down, or whose readings are all unusable, is reported as such; the others are still checked.

Readings that cannot be used (negative flows, words such as 'NaN', thousands separators, a level
above 100 % of span) are flagged and counted by ingest; when none of a quantity the design equation
needs is left, the unit gets the verdict "no usable data" (no rates, no fit, no reconciled values
made up from nothing), and a unit whose feed is off throughout is "down". The expectations are
properties of the check (common practice, no source): a verdict instead of a crash, exit code 1
("needs attention"), the other unit's results as in a clean run.
"""

import os
import sqlite3
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from kinetrace.config import load_config, unit_model
from kinetrace.pipeline.usable import unit_verdict
from kinetrace.simulator import generate_sample_historian
from tests.pipeline.demo import demo_config

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "config" / "demo_plant.toml"


@pytest.fixture(scope="module")
def models():
    cfg = load_config(DEMO)
    return {u.id: unit_model(u) for u in cfg.units}


def _roles(model, n=48):
    """A role frame of a running unit (values are plausible, not a scenario). [SI]"""
    idx = pd.date_range("2026-11-01", periods=n, freq="1h", tz="UTC")
    q = 0.8 * (model.plan_feed_flow or model.feed_flow_limits[1])
    cols = {"feed_flow": q, "outlet_flow": q, "temperature": 340.0, "volume": 10.0,
            f"outlet_conc:{model.key_reactant}": 500.0}
    return pd.DataFrame({c: np.full(n, v) for c, v in cols.items()}, index=idx)


def test_verdict_of_a_running_unit_is_none(models):
    for m in models.values():
        assert unit_verdict(_roles(m), m) is None


def test_verdicts_name_the_missing_quantity_and_its_tags(models):
    m = models["R-220"]
    r = _roles(m)
    r[["feed_flow", "outlet_flow"]] = np.nan
    v = unit_verdict(r, m)
    assert v.status == "no usable data"
    assert "CB2~R220~FEED~GPM" in v.reason and "CB2~R220~PROD~GPM" in v.reason
    r = _roles(m)
    r["temperature"] = np.nan
    assert "CB2~R220~TEMP~F" in unit_verdict(r, m).reason
    r = _roles(m)
    r[f"outlet_conc:{m.key_reactant}"] = np.nan
    assert unit_verdict(r, m).status == "no usable data"
    m210 = models["R-210"]
    r = _roles(m210)
    r["volume"] = np.nan
    v = unit_verdict(r, m210)
    assert v.status == "no usable data" and "R210-LT-107" in v.reason
    # one flow left: the volume balance still closes the other, so the unit is checked
    r = _roles(m)
    r["feed_flow"] = np.nan
    assert unit_verdict(r, m) is None


def test_feed_off_throughout_is_down_and_partly_off_is_not(models):
    m = models["R-220"]
    r = _roles(m)
    r[["feed_flow", "outlet_flow"]] = 0.0
    v = unit_verdict(r, m)
    assert v.status == "down" and "CB2~R220~FEED~GPM" in v.reason
    r = _roles(m)
    r.iloc[:24, r.columns.get_loc("feed_flow")] = 0.0   # a shutdown inside the period: counted by the check
    assert unit_verdict(r, m) is None
    r = _roles(m)
    r["feed_flow"] = np.nan
    r["outlet_flow"] = 0.0                               # no feed reading, outlet off: down too
    assert unit_verdict(r, m).status == "down"
    assert unit_verdict(_roles(m).iloc[:0], m).status == "no usable data"


@pytest.fixture(scope="module")
def historian(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("unusable")
    return generate_sample_historian(DEMO, tmp / "hist", days=3, seed=11)["sqlite"]


def _spoil(src: Path, folder: Path, *statements: str) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    db = folder / "historian.sqlite"
    db.write_bytes(Path(src).read_bytes())
    with sqlite3.connect(db) as con:
        for s in statements:
            con.execute(s)
    return db


def _check(cfg: Path) -> subprocess.CompletedProcess:
    env = dict(os.environ, PYTHONPATH=str(ROOT / "src"))
    return subprocess.run([sys.executable, "-m", "kinetrace.cli", "check", "--config", str(cfg)],
                          capture_output=True, text=True, env=env, timeout=600)


R220_FLOWS = "tag IN ('CB2~R220~FEED~GPM', 'CB2~R220~PROD~GPM')"


def test_unusable_flows_give_no_usable_data_and_the_other_unit_is_checked(historian, tmp_path):
    # every R-220 flow reading unusable: negative, a word, a thousands separator, in turns
    db = _spoil(historian, tmp_path, f"UPDATE readings SET value = -abs(value) - 1 WHERE {R220_FLOWS} AND rowid % 3 = 0",
                f"UPDATE readings SET value = 'NaN' WHERE {R220_FLOWS} AND rowid % 3 = 1",
                f"UPDATE readings SET value = '1,234' WHERE {R220_FLOWS} AND rowid % 3 = 2")
    cfg = demo_config(tmp_path, db)
    p = _check(cfg)
    assert p.returncode == 1, p.stderr[-3000:]
    assert "Traceback" not in p.stdout + p.stderr
    assert "R-220: no usable data" in p.stdout
    assert "CB2~R220~FEED~GPM" in p.stdout
    summary = pd.read_csv(tmp_path / "plant-out" / "summary.csv").set_index("unit")
    assert summary.loc["R-220", "status"] == "no usable data"
    # no rates and no reconciled production made up for R-220
    assert np.isnan(summary.loc["R-220", ["production_kg_h", "conversion", "k_ref", "activity"]].astype(float)).all()
    # the bad readings are counted, not dropped
    q = pd.read_csv(tmp_path / "plant-out" / "R-220_quality.csv", index_col=0)
    assert q.loc["CB2~R220~FEED~GPM", "good"] == 0 and q.loc["CB2~R220~FEED~GPM", "rows_read"] > 0
    assert q.loc["CB2~R220~FEED~GPM", ["bad_value", "out_of_range"]].sum() > 0
    # R-210 is checked as usual
    assert summary.loc["R-210", "status"] in ("on target", "below target")
    assert summary.loc["R-210", "k_ref"] > 0 and summary.loc["R-210", "steady_hours"] > 0
    series = pd.read_csv(tmp_path / "plant-out" / "R-210.csv")
    assert len(series) > 48


def test_down_unit_and_level_above_span(historian, tmp_path):
    # R-220's flows read '-0' (feed off) throughout; every R-210 level reading is 120 % of span
    db = _spoil(historian, tmp_path, f"UPDATE readings SET value = '-0' WHERE {R220_FLOWS}",
                "UPDATE readings SET value = 120 WHERE tag = 'R210-LT-107'")
    p = _check(demo_config(tmp_path, db))
    assert p.returncode == 1, p.stderr[-3000:]
    assert "Traceback" not in p.stdout + p.stderr
    summary = pd.read_csv(tmp_path / "plant-out" / "summary.csv").set_index("unit")
    assert summary.loc["R-220", "status"] == "down"
    assert summary.loc["R-210", "status"] == "no usable data"
    assert "R210-LT-107" in p.stdout
    assert "R-220: down" in p.stdout
    assert np.isnan(summary.loc["R-220", ["conversion", "k_ref", "activity"]].astype(float)).all()
