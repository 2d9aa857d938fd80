"""Liquid volume from a volume transmitter in any volume unit, or from a level in a length unit
through its table (issue 12, item 6). Factors: NIST SP 811 (2008), Appendix B: 1 L = 1e-3 m3,
1 US gallon = 3.785411784e-3 m3, 1 ft = 0.3048 m, all exact."""

import numpy as np
import pandas as pd
import pytest

from kinetrace.config import unit_model
from kinetrace.errors import ConfigError
from kinetrace.ingest import read_unit

from .synth import config

T0 = pd.Timestamp("2026-09-01T00:00Z")


def _r210(tmp_path, tag: dict, volume: dict, value: float, hours: int = 3, limits_level=True):
    rows = []
    for k in range(hours * 60):
        t = (T0 + pd.Timedelta(minutes=k)).strftime("%Y-%m-%dT%H:%M:%SZ")
        rows += [(t, "R210-FT-101", 4.0), (t, "R210-FT-102", 4.0), (t, "R210-TT-103", 70.0), (t, tag["tag"], value)]
        if k % 10 == 0:
            rows += [(t, "R210-AT-104", 0.8), (t, "R210-AT-105", 1.1)]
    (tmp_path / "r210.csv").write_text("timestamp,tag,value,quality\n"
                                       + "\n".join(f"{t},{g},{v},OK" for t, g, v in rows) + "\n")

    def tweak(raw):
        u = next(u for u in raw["units"] if u["id"] == "R-210")
        u["tags"] = [t for t in u["tags"] if t["tag"] != "R210-LT-107"] + [tag]
        u["volume"] = volume
        if not limits_level:
            u["limits"].pop("level", None)

    cfg = config({"kind": "csv", "path": "r210.csv", "good_quality": ["OK"]}, grid="1 h", tweak=tweak)
    return cfg, read_unit(cfg, "R-210", config_path=tmp_path / "p.toml")


@pytest.mark.parametrize("unit, value, m3", [
    ("L", 8100.0, 8.1),                       # NIST SP 811: 1 L = 1e-3 m3
    ("m3", 8.1, 8.1),
    ("gal", 2000.0, 2000.0 * 3.785411784e-3),   # NIST SP 811: US gallon = 3.785411784e-3 m3
    ("bbl", 50.0, 50.0 * 42 * 3.785411784e-3),  # NIST SP 811: barrel (42 US gal)
])
def test_volume_transmitter_in_any_volume_unit(tmp_path, unit, value, m3):
    tag = {"tag": "R210-VT-108", "role": "volume", "unit": unit}
    _, d = _r210(tmp_path, tag, {"volume_tag": "R210-VT-108"}, value)
    np.testing.assert_allclose(d.volume.to_numpy(), m3, rtol=1e-12)
    assert d.quality.loc["R210-VT-108", "good"] == 180


def test_level_in_feet_through_its_table_in_feet(tmp_path):
    # table in the level tag's unit: 0 ft -> 0.6 m3, 10 ft -> 15.6 m3; 2.5 ft by linear interpolation -> 4.35 m3
    tag = {"tag": "R210-LT-109", "role": "level", "unit": "ft"}
    cfg, d = _r210(tmp_path, tag, {"level_tag": "R210-LT-109", "table": [[0.0, 0.6], [10.0, 15.6]]}, 2.5,
                   limits_level=False)
    np.testing.assert_allclose(d.volume.to_numpy(), 0.6 + 15.0 * 0.25, rtol=1e-12)
    np.testing.assert_allclose(d.values["R210-LT-109"].to_numpy(), 2.5 * 0.3048, rtol=1e-12)  # NIST: ft = 0.3048 m
    model = unit_model(cfg.units[0])
    np.testing.assert_allclose(model.level_table[:, 0], [0.0, 3.048], rtol=1e-12)


def test_level_in_millimetres(tmp_path):
    tag = {"tag": "R210-LT-109", "role": "level", "unit": "mm"}
    _, d = _r210(tmp_path, tag, {"level_tag": "R210-LT-109", "table": [[0.0, 0.0], [2000.0, 10.0]]}, 500.0,
                 limits_level=False)
    np.testing.assert_allclose(d.volume.to_numpy(), 2.5, rtol=1e-12)


def test_level_limits_in_percent_need_a_percent_level(tmp_path):
    tag = {"tag": "R210-LT-109", "role": "level", "unit": "m"}
    with pytest.raises(ConfigError) as info:
        _r210(tmp_path, tag, {"level_tag": "R210-LT-109", "table": [[0.0, 0.6], [3.0, 15.6]]}, 1.0)
    assert any(p.where == "units[0].limits.level" and "level limits are in % of span" in p.message
               for p in info.value.problems), info.value


def test_one_volume_source_only(tmp_path):
    tag = {"tag": "R210-VT-108", "role": "volume", "unit": "L"}
    with pytest.raises(ConfigError) as info:
        _r210(tmp_path, tag, {"volume_tag": "R210-VT-108", "fixed": "8 m3"}, 8000.0)
    assert any(p.where == "units[0].volume" and "give one of fixed" in p.message for p in info.value.problems)
