"""The simulator emits a volume transmitter (a tag of role ``volume``, any volume unit) from the simulated
liquid volume, and ingest reads it back as the unit's volume (``[units.volume] volume_tag``).
Factor: NIST SP 811 (2008), Appendix B, 1 L = 1e-3 m3 exactly (checked against pint).
"""

import numpy as np
import pandas as pd
import pint
import pytest

from kinetrace.errors import ConfigError
from kinetrace.ingest import read_unit
from kinetrace.simulator import generate_sample_historian
from tests.pipeline.demo import DEMO

VT = '''[[units.tags]]
tag = "R210-VT-108"
role = "volume"
unit = "L"
sigma = "20 L"
valid_range = [0.0, 20000.0]
'''


def _with_volume_tag(folder, volume_block):
    """The demo config with a volume transmitter on R-210, its volume from ``volume_block``."""
    text = DEMO.read_text()
    old = '''[units.volume]
level_tag = "R210-LT-107"
table = [[0.0, 0.6], [50.0, 8.1], [100.0, 15.6]]   # level %, liquid volume m3
'''
    assert old in text
    text = text.replace(old, volume_block + "\n" + VT, 1)
    cfg = folder / "plant.toml"
    cfg.write_text(text)
    return cfg


def test_volume_transmitter_reads_the_simulated_volume(tmp_path):
    level = '[units.volume]\nlevel_tag = "R210-LT-107"\ntable = [[0.0, 0.6], [50.0, 8.1], [100.0, 15.6]]\n'
    cfg = _with_volume_tag(tmp_path, level)
    paths = generate_sample_historian(cfg, tmp_path / "hist", days=0.5, seed=3, write_sql=False)
    rows = pd.read_csv(paths["csv"])
    vt = rows[rows["tag"] == "R210-VT-108"]
    truth = pd.read_parquet(paths["truth_R-210"])
    assert len(vt) == len(truth) > 0
    litre = pint.UnitRegistry()("1 L").to("m^3").magnitude          # 1e-3 m3 (NIST SP 811)
    # readings in L around the true volume: noise of 20 L (the tag's sigma), well inside 6 sigma
    # (the scenario's random bad-quality rows, empty or garbage, are left out)
    good = (vt["quality"] == "OK").to_numpy() & np.isfinite(vt["value"].to_numpy())
    assert good.mean() > 0.95
    err = (vt["value"].to_numpy() * litre - truth["volume"].to_numpy())[good]
    assert np.abs(err).max() < 6 * 20 * litre
    assert np.std(err) == pytest.approx(20 * litre, rel=0.15)

    # read back through ingest, the volume taken from the transmitter
    reader = tmp_path / "reader"
    reader.mkdir()
    reader_cfg = _with_volume_tag(reader, '[units.volume]\nvolume_tag = "R210-VT-108"\n')
    text = reader_cfg.read_text().replace("level = [30.0, 90.0]\n", "")
    src = f'[source]\nkind = "csv"\npath = "{paths["csv"]}"\ngood_quality = ["OK"]\n\n'
    reader_cfg.write_text(text[:text.index("[source]")] + src + text[text.index("[store]"):])
    from kinetrace.config import load_config

    d = read_unit(load_config(reader_cfg), "R-210", config_path=reader_cfg)
    t = truth.set_index("timestamp")["volume"]
    hourly_truth = t.groupby(t.index.floor("1h")).mean()
    common = d.volume.dropna().index.intersection(hourly_truth.index)
    assert len(common) >= 10
    np.testing.assert_allclose(d.volume.loc[common].to_numpy(), hourly_truth.loc[common].to_numpy(), rtol=2e-3)


def test_a_unit_with_only_a_volume_tag_is_refused_by_the_simulator(tmp_path):
    cfg = _with_volume_tag(tmp_path, '[units.volume]\nvolume_tag = "R210-VT-108"\n')
    cfg.write_text(cfg.read_text().replace("level = [30.0, 90.0]\n", ""))
    with pytest.raises(ConfigError) as err:
        generate_sample_historian(cfg, tmp_path / "hist", days=0.1, write_sql=False)
    assert "R-210 takes its volume from a volume tag only" in str(err.value)
