"""Local time stamps and daylight saving (Europe/Berlin, America/Chicago), checked against the stdlib zoneinfo.

Reference: Python's zoneinfo with the IANA tz database; PEP 495 ``fold`` = 0 is the
first (daylight) pass of a repeated hour and, for a skipped time, the offset
before the change. Transition dates (2026): Berlin forward 29 March, back
25 October (EU rule: last Sundays of March/October, 01:00 UTC); Chicago forward
8 March, back 1 November (US rule: second Sunday of March, first of November,
02:00 local) - from memory, and confirmed by zoneinfo in the tests below.
"""

from datetime import datetime, timedelta, timezone
from zoneinfo import ZoneInfo

import numpy as np
import pandas as pd
import pytest

from kinetrace.ingest import parse_timestamps, read_unit
from kinetrace.ingest.fates import AMBIGUOUS_TIME, GOOD, NONEXISTENT_TIME

from .synth import R220, config

UTC = timezone.utc


def _utc_ns(wall: str, zone: str, fold: int) -> int:
    d = datetime.fromisoformat(wall).replace(tzinfo=ZoneInfo(zone), fold=fold)
    return int(d.astimezone(UTC).timestamp()) * 10**9


@pytest.mark.parametrize("zone, day", [("Europe/Berlin", "2026-10-25"), ("America/Chicago", "2026-11-01")])
def test_transition_dates_are_what_we_think(zone, day):
    z = ZoneInfo(zone)
    before = datetime.fromisoformat(f"{day}T00:00").replace(tzinfo=z).utcoffset()
    after = datetime.fromisoformat(f"{day}T12:00").replace(tzinfo=z).utcoffset()
    assert before - after == timedelta(hours=1)


@pytest.mark.parametrize("zone, wall", [("Europe/Berlin", "2026-03-29T02:30:00"), ("America/Chicago", "2026-03-08T02:30:00")])
def test_skipped_hour_flag_and_shift(zone, wall):
    _, st, _ = parse_timestamps([wall], zone)
    assert st.tolist() == [NONEXISTENT_TIME]
    utc, st, _ = parse_timestamps([wall], zone, dst_missing="shift")
    assert st.tolist() == [GOOD]
    assert utc[0] == _utc_ns(wall, zone, fold=0)     # offset before the change (PEP 495 fold=0)


@pytest.mark.parametrize("zone, wall", [("Europe/Berlin", "2026-10-25T02:30:00"), ("America/Chicago", "2026-11-01T01:30:00")])
def test_repeated_hour_policies(zone, wall):
    first, second = _utc_ns(wall, zone, 0), _utc_ns(wall, zone, 1)
    assert second - first == 3600 * 10**9
    utc, st, sec = parse_timestamps([wall], zone)
    assert st.tolist() == [AMBIGUOUS_TIME] and utc[0] == first and sec[0] == second
    assert parse_timestamps([wall], zone, dst_ambiguous="daylight")[0][0] == first
    assert parse_timestamps([wall], zone, dst_ambiguous="standard")[0][0] == second
    assert parse_timestamps([wall], zone, dst_ambiguous="flag")[1].tolist() == [AMBIGUOUS_TIME]


def test_offsets_are_exact_and_not_reinterpreted():
    utc, st, _ = parse_timestamps(["2026-11-01T01:30:00-05:00", "2026-11-01T01:30:00-06:00", "2026-11-01T06:30:00Z"],
                                  "America/Chicago")
    assert st.tolist() == [0, 0, 0]
    assert (utc[1] - utc[0]) == 3600 * 10**9 and utc[0] == utc[2]


def _logger_file(path, zone, start_utc, hours, step_min=10):
    """A wide export written by a logger whose clock shows local wall time without offset."""
    t = pd.date_range(start_utc, periods=int(hours * 60 / step_min), freq=f"{step_min}min", tz="UTC")
    wall = t.tz_convert(zone).tz_localize(None).strftime("%Y-%m-%dT%H:%M:%S")
    minutes = ((t - t[0]).total_seconds() / 60).to_numpy()
    cols = {tag: base + 0.001 * minutes for tag, (base, _) in R220.items()}
    lines = ["timestamp," + ",".join(cols)]
    for k, w in enumerate(wall):
        lines.append(w + "," + ",".join(repr(float(v[k])) for v in cols.values()))
    path.write_text("\n".join(lines) + "\n")
    utc_lines = ["timestamp," + ",".join(cols)] + [
        t[k].strftime("%Y-%m-%dT%H:%M:%SZ") + "," + ",".join(repr(float(v[k])) for v in cols.values())
        for k in range(len(t))]
    (path.parent / ("utc_" + path.name)).write_text("\n".join(utc_lines) + "\n")
    return t


@pytest.mark.parametrize("zone, start", [("Europe/Berlin", "2026-10-24T22:00Z"), ("America/Chicago", "2026-11-01T04:00Z"),
                                         ("Europe/Berlin", "2026-03-28T23:00Z"), ("America/Chicago", "2026-03-08T06:00Z")])
def test_logger_in_local_time_across_a_transition_equals_utc(tmp_path, zone, start):
    """Across either transition a local-time export ingests exactly like the same data in UTC."""
    t = _logger_file(tmp_path / "local.csv", zone, start, hours=5)
    local = read_unit(config({"kind": "csv", "path": "local.csv", "timezone": zone}, grid="10 min"), "R-220",
                      config_path=tmp_path / "plant.toml")
    ref = read_unit(config({"kind": "csv", "path": "utc_local.csv"}, grid="10 min"), "R-220",
                    config_path=tmp_path / "plant.toml")
    assert local.values.index[0] == t[0] and len(local.values) == len(t)
    pd.testing.assert_frame_equal(local.values, ref.values, rtol=1e-12, atol=0)
    assert int(local.quality["good"].sum()) == 5 * len(t)
    assert int(local.quality[["ambiguous_time", "nonexistent_time"]].to_numpy().sum()) == 0


def test_repeated_hour_out_of_order_rows_are_placed_by_file_order(tmp_path):
    # Chicago, 1 Nov 2026: 01:00, 01:20, 01:40 (CDT), then the clock goes back: 01:00, 01:20 (CST)
    walls = ["2026-11-01T00:40:00", "2026-11-01T01:00:00", "2026-11-01T01:20:00", "2026-11-01T01:40:00",
             "2026-11-01T01:00:00", "2026-11-01T01:20:00", "2026-11-01T02:00:00"]
    expect = [_utc_ns(w, "America/Chicago", f) for w, f in zip(walls, [0, 0, 0, 0, 1, 1, 0])]
    lines = ["timestamp,tag,value"] + [f"{w},CB2~R220~TEMP~F,{150 + k}" for k, w in enumerate(walls)]
    for tag in R220:
        if tag != "CB2~R220~TEMP~F":
            lines += [f"{w},{tag},{R220[tag][0]}" for w in walls]
    (tmp_path / "x.csv").write_text("\n".join(lines) + "\n")
    d = read_unit(config({"kind": "csv", "path": "x.csv", "timezone": "America/Chicago"}, grid="20 min"), "R-220",
                  config_path=tmp_path / "p.toml")
    assert d.quality.loc["CB2~R220~TEMP~F", "good"] == 7
    # the 20-min grid of UTC intervals holds the readings in true time order: value k at expect[k]
    idx = d.values.index.asi8
    first_interval = np.searchsorted(idx, np.array(expect), side="right") - 1
    assert np.all(np.diff(first_interval) > 0)           # placed in true time order
    # each reading sits at the start of its 20-min interval, so that interval's average is the reading
    got = d.values["CB2~R220~TEMP~F"].to_numpy()[first_interval]
    np.testing.assert_allclose(got, (150 + np.arange(7) - 32) / 1.8 + 273.15, rtol=1e-12)
