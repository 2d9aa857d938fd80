"""Sample historian output: schema of the writers, determinism, sensor noise, bias and faults.

The short (3-day) scenario of conftest.py moves every event and fault of the shipped scenario
inside the window.
"""

import json
import re
import sqlite3
from dataclasses import replace

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from kinetrace.config import ROLE_KIND
from kinetrace.errors import ConfigError
from kinetrace.simulator import generate_sample_historian, read_tag, scenario_from_dict
from kinetrace.simulator.sensors import sensor_sigma
from kinetrace.units import to_si

from .conftest import CONFIG, short_raw

STAMP = re.compile(r"^\d{4}-\d\d-\d\dT\d\d:\d\d:00Z$")


@pytest.fixture(scope="module")
def csv(short_output):
    return pd.read_csv(short_output["csv"], dtype={"timestamp": str, "tag": str, "quality": str},
                       keep_default_na=False, na_values={"value": [""]})


@pytest.fixture(scope="module")
def facts(short_output):
    return json.loads(short_output["facts"].read_text())


@pytest.fixture(scope="module")
def truth(short_output):
    return {u: pd.read_parquet(short_output[f"truth_{u}"]) for u in ("R-210", "R-220")}


def tag_rows(csv, tag):
    d = csv[csv["tag"] == tag].copy()
    d["t"] = pd.to_datetime(d["timestamp"], utc=True)
    return d


def test_csv_schema(csv, models):
    assert list(csv.columns) == ["timestamp", "tag", "value", "quality"]
    assert csv["timestamp"].map(lambda s: bool(STAMP.match(s))).all()
    assert set(csv["quality"]) == {"OK", "QUERIED", "BAD"}
    assert set(csv["tag"]) == {t.tag for m in models.values() for t in m.tags}
    assert not csv.loc[csv["quality"] != "BAD", "value"].isna().any()     # empty values only on BAD rows
    assert csv.loc[csv["quality"] == "BAD", "value"].isna().any()
    key = list(zip(csv["timestamp"], csv["tag"]))
    assert key == sorted(key) and len(set(key)) == len(key)


def test_sqlite_schema_and_same_rows(short_output, csv):
    con = sqlite3.connect(short_output["sqlite"])
    try:
        cols = [(r[1], r[2]) for r in con.execute("PRAGMA table_info(readings)")]
        assert cols == [("timestamp", "TEXT"), ("tag", "TEXT"), ("value", "REAL"), ("quality", "TEXT")]
        idx = [r[1] for r in con.execute("PRAGMA index_list(readings)")]
        assert [r[2] for r in con.execute(f"PRAGMA index_info({idx[0]})")] == ["tag", "timestamp"]
        db = pd.read_sql("SELECT * FROM readings ORDER BY timestamp, tag", con)
    finally:
        con.close()
    assert len(db) == len(csv)
    assert (db["timestamp"].to_numpy() == csv["timestamp"].to_numpy()).all()
    np.testing.assert_array_equal(db["value"].to_numpy(float), csv["value"].to_numpy(float))   # NULL == empty


def test_truth_schema(truth, models):
    for uid, t in truth.items():
        m = models[uid]
        assert len(t) == 3 * 1440
        assert str(t["timestamp"].dt.tz) == "UTC" and t["timestamp"].iloc[0] == pd.Timestamp("2026-09-01", tz="UTC")
        want = {"running", "feed_flow", "outlet_flow", "volume", "temperature", "activity", "conversion",
                "product_rate"} | {f"conc_{s}" for s in m.species} | {f"rate_{r}" for r in m.reaction_ids} \
            | {f"k_ref_{r}" for r in m.reaction_ids}
        assert want <= set(t.columns)
        # k_ref(t) = k_ref,fresh a(t) on catalysed reactions, a = exp(-kd t) (Levenspiel 1999 ch. 21)
        main = m.reaction_ids[0]
        t_s = (t["timestamp"] - t["timestamp"].iloc[0]).dt.total_seconds().to_numpy()
        kd = {"R-210": 0.007, "R-220": 0.0015}[uid] / 86400.0                 # scenario.toml
        np.testing.assert_allclose(t[f"k_ref_{main}"], m.rate_laws[main].k_ref * np.exp(-kd * t_s), rtol=1e-12)
        # product rate is Q_out C_product by definition
        np.testing.assert_allclose(t["product_rate"], t["outlet_flow"] * t[f"conc_{m.product}"], rtol=1e-12)


def test_deterministic_for_a_seed(tmp_path, short_scenario):
    sc = replace(short_scenario, days=1.0)
    a = generate_sample_historian(CONFIG, tmp_path / "a", scenario=sc, write_sql=False)
    b = generate_sample_historian(CONFIG, tmp_path / "b", scenario=sc, write_sql=False)
    c = generate_sample_historian(CONFIG, tmp_path / "c", scenario=sc, seed=sc.seed + 1, write_sql=False)
    for key in ("csv", "truth_R-210", "truth_R-220"):
        assert a[key].read_bytes() == b[key].read_bytes()
    assert json.loads(a["facts"].read_text())["faults"] == json.loads(b["facts"].read_text())["faults"]
    assert a["csv"].read_bytes() != c["csv"].read_bytes()


def excluded(d, facts, tag):
    """Rows inside any recorded fault window of a tag."""
    bad = np.zeros(len(d), bool)
    for f in facts["faults"]:
        if f["tag"] == tag and f["kind"] in ("frozen", "validation", "bias") and f["first_row"]:
            hi = f["last_row"] if f["kind"] != "bias" else "9999"
            bad |= (d["timestamp"] >= f["first_row"]).to_numpy() & (d["timestamp"] <= hi).to_numpy()
    return bad


@pytest.mark.parametrize("unit_id,tag", [("R-210", "R210-FT-101"), ("R-210", "R210-FT-102"),
                                         ("R-210", "R210-TT-103"), ("R-210", "R210-LT-107"),
                                         ("R-210", "R210-AT-104"), ("R-220", "CB2~R220~TEMP~F"),
                                         ("R-220", "CB2~R220~FEED~GPM"), ("R-220", "CB2~R220~ACOH~AN")])
def test_noise_std_matches_config_sigma(csv, truth, facts, models, unit_id, tag):
    m = models[unit_id]
    cfg = next(t for t in m.tags if t.tag == tag)
    kind = ROLE_KIND[cfg.role]
    d = tag_rows(csv, tag)
    d = d[(d["quality"] == "OK").to_numpy() & ~excluded(d, facts, tag)]
    tr = truth[unit_id].set_index("timestamp")
    lag = pd.Timedelta(seconds=facts["units"][unit_id]["analyzer_dead_time_s"].get(tag, 0.0))
    col = {"outlet_conc": f"conc_{cfg.species}"}.get(cfg.role, cfg.role)
    x = tr[col].reindex(d["t"] - lag).to_numpy()
    y = to_si(d["value"].to_numpy(float), cfg.unit, kind)
    keep = x > 0 if kind != "temperature" else np.isfinite(x)      # zero flows (shutdown) carry no noise
    rel, absolute = sensor_sigma(cfg, kind)
    z = (y[keep] - x[keep]) / (rel * x[keep] + absolute)
    n = len(z)
    assert n > 1000
    # sample variance of n standard normals: (n-1) s^2 ~ chi2(n-1); two-sided 99.9 % interval
    lo, hi = stats.chi2.ppf([0.0005, 0.9995], n - 1) / (n - 1)
    assert lo < np.var(z, ddof=1) < hi
    assert abs(z.mean()) < 4.0 / np.sqrt(n)


def test_flowmeter_bias_appears_at_onset(csv, truth, facts):
    bias = next(f for f in facts["faults"] if f["kind"] == "bias")
    assert bias["tag"] == "R210-FT-101" and bias["relative"] == 0.05
    onset = pd.Timestamp(bias["window_start"])
    d = tag_rows(csv, "R210-FT-101")
    d = d[d["quality"] == "OK"]
    x = to_si(d["value"].to_numpy(float), "m3/h", "volumetric_flow")
    q = truth["R-210"].set_index("timestamp")["feed_flow"].reindex(d["t"]).to_numpy()
    ok = q > 0
    ratio, after = x[ok] / q[ok] - 1.0, (d["t"] >= onset).to_numpy()[ok]
    se = 0.01 / np.sqrt(min(after.sum(), (~after).sum()))           # 1 % noise of reading
    assert abs(ratio[~after].mean()) < 4 * se
    assert abs(ratio[after].mean() - 0.05) < 4 * se
    assert d["t"][d["t"] >= onset].min() - onset < pd.Timedelta(minutes=5)   # starts at the onset


def test_faults_as_recorded(csv, facts, truth):
    by_kind = {}
    for f in facts["faults"]:
        by_kind.setdefault(f["kind"], []).append(f)
    fz = by_kind["frozen"][0]
    d = tag_rows(csv, fz["tag"])
    win = d[(d["timestamp"] >= fz["first_row"]) & (d["timestamp"] <= fz["last_row"])]
    assert fz["rows"] == 5 * 60
    assert ((win["quality"] == "OK") | (win["quality"] == "BAD")).all()
    assert win.loc[win["quality"] == "OK", "value"].nunique() == 1          # repeated exactly
    assert (win.loc[win["quality"] == "OK", "value"] == fz["value"]).all()  # the value the facts record
    for f in by_kind["dropout"]:
        d = tag_rows(csv, f["tag"])
        assert not ((d["timestamp"] >= f["window_start"]) & (d["timestamp"] < f["window_end"])).any()
        assert f["rows"] > 0
    for f in by_kind["bad_stretch"]:
        d = tag_rows(csv, f["tag"])
        win = d[(d["timestamp"] >= f["window_start"]) & (d["timestamp"] < f["window_end"])]
        assert len(win) == f["rows"] > 0 and (win["quality"] == "BAD").all() and win["value"].isna().all()
    for f in by_kind["validation"]:
        d = tag_rows(csv, f["tag"])
        sus = d[d["quality"] == "QUERIED"]
        assert len(sus) == f["rows"] == 3 * 20                              # 20 min a day for 3 days
        assert sus["value"].mean() == pytest.approx(f["check_standard"], rel=0.02)
    # scattered BAD rows: counts consistent with the binomial fraction of 0.1 %
    for f in by_kind["scattered_bad"]:
        n = (csv["tag"] == f["tag"]).sum()
        assert f["rows"] < stats.binom.ppf(0.99999, n, 0.001) + 1


def test_lab_samples_and_shutdown(csv, truth):
    lab = tag_rows(csv, "R210-LAB-MA")
    assert set(lab["t"].dt.hour) == {2, 10, 18} and (lab["t"].dt.minute == 0).all()
    stopped = truth["R-210"].loc[~truth["R-210"]["running"], "timestamp"]
    assert not lab["t"].between(stopped.min(), stopped.max()).any()          # no outlet sample while stopped
    feed = tag_rows(csv, "R210-LAB-FMA")
    assert list(feed["t"].dt.hour) == [7, 7, 7]
    ft = tag_rows(csv, "R210-FT-101")
    during = ft[ft["t"].between(stopped.min(), stopped.max()) & (ft["quality"] == "OK")]
    assert (during["value"] == 0.0).all() and len(during) > 500


def test_dead_time_shifts_analyzer(short_scenario, truth, models):
    m = models["R-210"]
    tag = next(t for t in m.tags if t.tag == "R210-AT-104")
    tr = truth["R-210"].copy()
    tr["conc_MA"] = np.where(np.arange(len(tr)) >= 100, 1000.0, 500.0)      # a step at row 100
    r = read_tag(tag, short_scenario.plan("R-210"), tr, short_scenario)
    v = r.value
    assert v[101] < 0.6 and v[102] > 0.9                                     # 2-min dead time, mol/L


def test_scenario_problems_reported_together(models):
    raw = short_raw()
    raw["faults"]["frozen"][0]["tag"] = "R210-TT-999"
    raw["units"][0]["schedule"][0]["temperature"] = "95 degC"                # above the 85 degC limit
    raw["units"][1]["catalysed"] = ["hydrolysis", "esterification"]
    raw["units"][0]["schedule"][2]["level"] = 95.0                          # above the 90 % limit
    sc = scenario_from_dict(raw, source="bad.toml")
    from kinetrace.simulator import check_scenario
    with pytest.raises(ConfigError) as exc:
        check_scenario(sc, list(models.values()), {"R-210": (30.0, 90.0)})
    msg = str(exc.value)
    assert "bad.toml: 4 configuration problems" in msg
    assert "R210-TT-999" in msg and "safe temperature limits" in msg and "esterification" in msg
    assert "units[0].schedule[2].level: 95 % is outside the unit's safe level limits (30.0, 90.0) %" in msg


def test_scenario_missing_keys(models):
    raw = short_raw()
    del raw["units"][0]["schedule"][0]["at"]
    raw["faults"]["dropout"][0]["duration"] = "three hours"
    with pytest.raises(ConfigError) as exc:
        scenario_from_dict(raw, source="bad.toml")
    assert "units[0].schedule[0].at: required key is missing" in str(exc.value)
    assert "faults.dropout[0].duration" in str(exc.value)
