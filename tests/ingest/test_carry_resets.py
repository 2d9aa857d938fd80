"""A configured catalyst change stops a carried lab value (issue: a feed assay taken at the change was
carried 12 h into the fresh catalyst). Demo simulator, 4 days; the change is put where a
daily feed assay of R-210 (R210-LAB-FMA, carried up to 26 h) is being carried: from the change on, it is not."""

import pandas as pd
import pytest

from kinetrace.config import load_config
from kinetrace.ingest import read_unit
from kinetrace.simulator import generate_sample_historian
from tests.pipeline.demo import ROOT, demo_config

TAG = "R210-LAB-FMA"


def _read(cfg_path):
    cfg = load_config(cfg_path)
    unit = next(u for u in cfg.units if u.id == "R-210")
    return read_unit(cfg, unit, config_path=cfg_path)


@pytest.mark.parametrize("how", ["catalyst_changes", "shutdown event"])
def test_lab_value_not_carried_past_a_catalyst_change(tmp_path, how):
    paths = generate_sample_historian(ROOT / "config" / "demo_plant.toml", tmp_path / "hist", days=4, seed=5)
    plain = demo_config(tmp_path, paths["sqlite"], name="plain")
    base = _read(plain)
    v = base.values[TAG]
    carried = v.notna() & (v.diff() == 0)          # intervals holding the previous interval's value
    change = carried[carried].index[3] - pd.Timedelta("1h")    # an interval whose value was then carried
    stamp = f"{change:%Y-%m-%dT%H:%M:%SZ}"
    if how == "catalyst_changes":
        text = plain.read_text().replace('catalysed = ["addition"]',
                                         f'catalysed = ["addition"]\ncatalyst_changes = ["{stamp}"]')
    else:   # any configured event stops the carry: here a shutdown in [[units.events]] of R-210
        text = plain.read_text().replace('[units.activity]',
                                         f'[[units.events]]\nkind = "shutdown"\ntime = "{stamp}"\n'
                                         'note = "feed pump trip"\n\n[units.activity]', 1)
    changed = tmp_path / "changed.toml"
    changed.write_text(text)
    after = _read(changed).values[TAG]
    # the sample's own interval keeps its value; every interval after the change until the next
    # sample would have carried it, and now has none
    nxt = v.index[(v.index > change) & (v.diff() != 0) & v.notna()]
    window = (v.index >= change) & (v.index < (nxt[0] if len(nxt) else v.index[-1]))
    assert window.sum() >= 1
    assert after[window].isna().all() and v[window].notna().all()
    assert after[v.index < change].equals(v[v.index < change])   # intervals (labelled at their start) before it
