"""The canonical frame of a unit: roles, level -> volume, mass-based units, lab carry-forward, schema."""

import pandas as pd
import pytest

from kinetrace.errors import IngestError
from kinetrace.ingest import UnitData, check_unit_data, read_unit

from .synth import config

T0 = pd.Timestamp("2026-09-01T00:00Z")


def _r210(tmp_path, level=50.0, hours=4):
    rows = []
    for k in range(hours * 60):
        t = (T0 + pd.Timedelta(minutes=k)).strftime("%Y-%m-%dT%H:%M:%SZ")
        rows += [(t, "R210-FT-101", 4.0), (t, "R210-FT-102", 4.0), (t, "R210-TT-103", 70.0),
                 (t, "R210-LT-107", level)]
        if k % 10 == 0:
            rows += [(t, "R210-AT-104", 0.8), (t, "R210-AT-105", 1.1)]
    rows += [(T0.strftime("%Y-%m-%dT%H:%M:%SZ"), "R210-LAB-MA", 0.82),
             ((T0 + pd.Timedelta("2h")).strftime("%Y-%m-%dT%H:%M:%SZ"), "R210-LAB-DIM", 0.01)]
    lines = ["timestamp,tag,value,quality"] + [f"{t},{g},{v},OK" for t, g, v in rows]
    (tmp_path / "r210.csv").write_text("\n".join(lines) + "\n")
    cfg = config({"kind": "csv", "path": "r210.csv", "good_quality": ["OK"]}, grid="1 h")
    return read_unit(cfg, "R-210", config_path=tmp_path / "p.toml")


def test_level_volume_through_the_table(tmp_path):
    # demo table: 0 % -> 0.6 m3, 50 % -> 8.1 m3, 100 % -> 15.6 m3; 25 % by linear interpolation
    d = _r210(tmp_path, level=25.0)
    assert d.volume.iloc[0] == pytest.approx(0.6 + (8.1 - 0.6) * 0.5, rel=1e-12)   # 4.35 m3, hand computed
    assert d.values["R210-LT-107"].iloc[0] == pytest.approx(0.25, rel=1e-12)       # level as a fraction


def test_roles_lab_carry_and_missing_optional_tag(tmp_path):
    d = _r210(tmp_path)
    assert d.roles[("outlet_conc", "MA")] == ["R210-AT-104", "R210-LAB-MA"]
    assert d.roles[("feed_flow", None)] == ["R210-FT-101"]
    # the outlet MA grab sample at 00:00 is carried up to max_age 8 h: all 4 hourly intervals
    lab = d.values["R210-LAB-MA"]
    assert lab.notna().all() and lab.iloc[0] == pytest.approx(820.0, rel=1e-12)   # 0.82 mol/L = 820 mol/m3
    assert d.quality.loc["R210-LAB-MA", "carried_intervals"] == 3
    # the dimer sample at 02:00: missing before it, carried after
    assert d.values["R210-LAB-DIM"].isna().tolist() == [True, True, False, False]
    # the feed-tank sample tag has no readings: an all-missing column and a note, not an error
    assert d.values["R210-LAB-FMA"].isna().all() and not d.valid["R210-LAB-FMA"].any()
    assert any(p.where == "R210-LAB-FMA" and "no readings" in p.message for p in d.notes)
    check_unit_data(d)


def test_mass_flow_and_mass_fraction_tags_end_to_end(tmp_path):
    rows = []
    for k in range(120):
        t = (T0 + pd.Timedelta(minutes=k)).strftime("%Y-%m-%dT%H:%M:%SZ")
        rows += [(t, "CB2~R220~FEED~GPM", 5000.0), (t, "CB2~R220~PROD~GPM", 20.0), (t, "CB2~R220~TEMP~F", 150.0),
                 (t, "CB2~R220~AA~AN", 6.0), (t, "CB2~R220~ACOH~AN", 1.8)]
    (tmp_path / "x.csv").write_text("timestamp,tag,value\n" + "\n".join(f"{t},{g},{v}" for t, g, v in rows) + "\n")

    def tweak(raw):
        u = raw["units"][1]
        u["density"] = "1050 kg/m3"
        u["tags"][0]["unit"] = "lb/h"
        u["tags"][0]["valid_range"] = [0.0, 1e5]
        u["tags"][3]["unit"] = "wt%"
        u["tags"][3]["valid_range"] = [0.0, 100.0]

    d = read_unit(config({"kind": "csv", "path": "x.csv"}, grid="1 h", tweak=tweak), "R-220",
                  config_path=tmp_path / "p.toml")
    # 5000 lb/h * 0.45359237 kg/lb (NIST SP 811) / 3600 s/h / 1050 kg/m3
    assert d.values["CB2~R220~FEED~GPM"].iloc[0] == pytest.approx(5000 * 0.45359237 / 3600 / 1050, rel=1e-12)
    # 6 wt% acetic anhydride: 0.06 * 1050 kg/m3 / 0.10209 kg/mol (C4H6O3 from standard atomic weights)
    assert d.values["CB2~R220~AA~AN"].iloc[0] == pytest.approx(0.06 * 1050 / 0.10209, rel=2e-4)


def test_check_unit_data_rejects_a_broken_frame(tmp_path):
    d = _r210(tmp_path)
    bad = UnitData(**{**d.__dict__, "valid": d.valid.iloc[:, :-1]})
    with pytest.raises(IngestError, match="valid: must have the shape"):
        check_unit_data(bad)
    nan_valid = d.valid.copy()
    nan_valid["R210-LAB-FMA"] = True
    with pytest.raises(IngestError, match="a NaN value is marked valid"):
        check_unit_data(UnitData(**{**d.__dict__, "valid": nan_valid}))


def test_unknown_unit_id(tmp_path):
    from kinetrace.errors import ConfigError

    with pytest.raises(ConfigError, match="no unit 'R-999'"):
        read_unit(config({"kind": "csv", "path": "x.csv"}), "R-999", config_path=tmp_path / "p.toml")


def test_quality_text_shows_where_readings_went(tmp_path):
    from pathlib import Path

    from kinetrace.ingest import quality_text

    data_dir = Path(__file__).parent / "data"
    cfg = config({"kind": "csv", "path": str(data_dir / "out_of_range.csv"), "good_quality": ["OK"]}, grid="10 min")
    d = read_unit(cfg, "R-220", config_path=tmp_path / "p.toml")
    text = quality_text(d)
    line = next(x for x in text.splitlines() if "CB2~R220~TEMP~F" in x)
    assert "13 read, 12 good, 1 out_of_range" in line and "1 flagged" in line
