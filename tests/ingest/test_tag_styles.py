"""Tag names are opaque strings: the demo plant's own style is one choice, and any other style a
historian exports (node prefixes with colons, dotted fields, paths, spaces, non-ASCII) reads the same.

Reference: the same invented readings read under the demo plant's tag names; renaming the tags in
the source and in the config must give identical values and quality counts (the names never enter
a computation).
"""

import numpy as np
import pandas as pd
import pytest

from kinetrace.ingest import read_unit

from .synth import R220, config, readings, write_long, write_sqlite

SINCE, UNTIL = "2026-09-01T01:00:00Z", "2026-09-01T03:00:00Z"

#: Other tag styles: each maps a demo tag (``CB2~R220~FEED~GPM``) to another spelling of it.
STYLES = {
    "colon-node-dotted-field": lambda t: "CB2:" + "_".join(t.split("~")[1:3]) + "." + t.split("~")[3],
    "slash-path": lambda t: "/".join(t.split("~")).lower(),
    "spaces-and-brackets": lambda t: f"{t.split('~')[1]} {t.split('~')[2]} [{t.split('~')[3]}]",
    "non-ascii": lambda t: "·".join(t.split("~")) + "-µ",
}


def _only_r220(style):
    return lambda t: style(t) if t.startswith("CB2~") else t


def _read(tmp_path, frame, rename, kind):
    rename = _only_r220(rename)

    def tweak(raw):
        for unit in raw["units"]:
            for t in unit["tags"]:
                t["tag"] = rename(t["tag"])
            if unit.get("volume", {}).get("level_tag"):
                unit["volume"]["level_tag"] = rename(unit["volume"]["level_tag"])

    data = frame.assign(tag=frame["tag"].map(rename))
    if kind == "csv":
        src = {"kind": "csv", "path": str(write_long(data, tmp_path / "long.csv"))}
    else:
        src = {"kind": "sqlite", "path": str(write_sqlite(data, tmp_path / "h.sqlite")), "table": "readings"}
    cfg = config({"good_quality": ["OK"], **src}, grid="10 min", tweak=tweak)
    return read_unit(cfg, "R-220", config_path=tmp_path / "plant.toml", since=SINCE, until=UNTIL)


@pytest.mark.parametrize("kind", ["csv", "sqlite"])
@pytest.mark.parametrize("style", list(STYLES))
def test_any_tag_style_reads_the_same(tmp_path, style, kind):
    frame = readings(hours=3, seed=11)
    (tmp_path / "a").mkdir()
    (tmp_path / "b").mkdir()
    ref = _read(tmp_path / "a", frame, lambda t: t, kind)
    got = _read(tmp_path / "b", frame, STYLES[style], kind)
    assert got.values.index.equals(ref.values.index)
    np.testing.assert_array_equal(got.values.to_numpy(), ref.values.to_numpy())
    # the quality table is keyed by tag: the same counts under the other names
    renamed = ref.quality.rename(index=_only_r220(STYLES[style]))
    cols = ["rows_read", "good", "missing_intervals", "valid_intervals"]
    pd.testing.assert_frame_equal(got.quality.loc[renamed.index, cols], renamed[cols])
    assert set(got.quality.index) >= {STYLES[style](t) for t in R220}
