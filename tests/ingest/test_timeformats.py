"""Time stamps as exported: named spellings, detection of ISO 8601 and day/month dates, and refusals.

References: Python's ``datetime``/``zoneinfo`` (IANA tz database) and ``strptime`` for the
spellings (PEP 495 ``fold`` for the repeated hour); POSIX time (IEEE Std 1003.1, "Seconds Since
the Epoch"); spreadsheet serial day numbers count days from 1899-12-30 (common practice, no
source), reproduced here with pandas' own Timedelta arithmetic.
"""

from datetime import datetime, timedelta, timezone
from zoneinfo import ZoneInfo

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from kinetrace.ingest import parse_timestamps, read_unit
from kinetrace.ingest.fates import AMBIGUOUS_TIME, GOOD
from kinetrace.ingest.timeformats import (CONTRADICTS, DAY_FIRST, MONTH_FIRST, OK, UNDECIDED, explain,
                                          read_stamps)

from .synth import config

UTC = timezone.utc


def _ns(d: datetime) -> int:
    return int(round(d.timestamp() * 1e3)) * 10**6


def test_unix_and_spreadsheet_numbers():
    # 1788220800 s after 1970-01-01T00:00Z is 2026-09-01T00:00Z (stdlib datetime, POSIX time)
    assert datetime.fromtimestamp(1788220800, UTC) == datetime(2026, 9, 1, tzinfo=UTC)
    utc, status, _ = parse_timestamps(["1788220800", "1788220800.5"], time_format="unix_s")
    assert status.tolist() == [GOOD, GOOD]
    assert utc.tolist() == [1788220800 * 10**9, 1788220800 * 10**9 + 5 * 10**8]
    utc, _, _ = parse_timestamps(["1788220800123"], time_format="unix_ms")
    assert utc[0] == 1788220800123 * 10**6
    # serial day 46266.25: pandas' Timestamp + Timedelta from the 1899-12-30 origin, as local wall time
    ref = pd.Timestamp("1899-12-30") + pd.Timedelta(days=46266.25)
    assert str(ref) == "2026-09-01 06:00:00"
    utc, status, _ = parse_timestamps(["46266.25"], "Europe/Berlin", time_format="spreadsheet_days")
    assert status.tolist() == [GOOD]
    assert utc[0] == _ns(datetime(2026, 9, 1, 6, tzinfo=ZoneInfo("Europe/Berlin")))


@pytest.mark.parametrize("text, pattern", [
    ("09/14/2026 12:00 AM", "%m/%d/%Y %I:%M %p"), ("09/14/2026 12:30 PM", "%m/%d/%Y %I:%M %p"),
    ("09/14/2026 1:05 pm", "%m/%d/%Y %I:%M %p"), ("14-09-2026 23:59:58", "%d-%m-%Y %H:%M:%S"),
    ("14.09.2026 07:15:00,250", "%d.%m.%Y %H:%M:%S,%f"), ("2026/09/14 07:15", "%Y/%m/%d %H:%M"),
    ("2026-09-14 07:15:00.5", "%Y-%m-%d %H:%M:%S.%f")])
def test_detected_spellings_agree_with_strptime(text, pattern):
    want = datetime.strptime(text, pattern)
    st_ = read_stamps([text])
    assert st_.reason.tolist() == [OK]
    assert st_.ns[0] == _ns(want.replace(tzinfo=UTC))      # wall time, as nanoseconds of its own clock


@pytest.mark.parametrize("text", ["2026-09-14T07:15:00+05:30", "2026-09-14 07:15:00-0500", "2026-09-14 07:15+02",
                                  "2026-09-14T07:15:00.125Z", "14.09.2026 07:15:00 +05:30"])
def test_offsets_in_every_spelling_are_exact(text):
    iso = text.replace(" +", "+").replace(" ", "T")
    if "." in iso[:10]:
        iso = "2026-09-14T07:15:00+05:30"
    want = datetime.fromisoformat(iso.replace("Z", "+00:00"))
    utc, status, _ = parse_timestamps([text])
    assert status.tolist() == [GOOD]
    assert utc[0] == _ns(want)


def test_order_is_decided_by_the_source_and_contradictions_refused():
    st_ = read_stamps(["03/01/2026 18:00", "03/14/2026 18:00", "03/15/2026 18:00", "13/03/2026 18:00"])
    assert st_.order == MONTH_FIRST                       # the majority decides
    assert st_.reason.tolist() == [OK, OK, OK, CONTRADICTS]
    assert str(pd.Timestamp(st_.ns[0])) == "2026-03-01 18:00:00"
    assert read_stamps(["03/01/2026 18:00"], order=DAY_FIRST).ns[0] == pd.Timestamp("2026-01-03 18:00").value
    assert read_stamps(["05.05.2026 00:00"]).reason.tolist() == [OK]   # reads the same either way
    assert "reads both day-first and month-first" in explain("01.02.2026", UNDECIDED)


def test_undecided_batches_are_held_until_a_later_file_decides(tmp_path):
    """A folder of daily exports: the first day (01.09) reads both ways, the 13th decides day-first;
    nothing of the first file is lost or misplaced (common practice, no source: day-first exports)."""
    folder = tmp_path / "exports"
    folder.mkdir()
    tags = ["CB2~R220~FEED~GPM", "CB2~R220~PROD~GPM", "CB2~R220~TEMP~F", "CB2~R220~AA~AN", "CB2~R220~ACOH~AN"]
    for day in (1, 13):
        lines = ["timestamp," + ",".join(tags)]
        for h in range(24):
            lines.append(f"{day:02d}.09.2026 {h:02d}:00," + ",".join(str(20 + 0.1 * ((h * 3) % 7)) for _ in tags))
        (folder / f"day_{day:02d}.csv").write_text("\n".join(lines) + "\n")
    cfg = config({"kind": "csv", "path": str(folder), "timezone": "UTC"}, grid="1 h")
    data = read_unit(cfg, "R-220", config_path=tmp_path / "p.toml")
    q = data.quality.loc["CB2~R220~FEED~GPM"]
    assert (q["rows_read"], q["good"], q["bad_timestamp"]) == (48, 48, 0)
    assert data.values.index[0] == pd.Timestamp("2026-09-01T00:00Z")
    assert data.values.index[-1] == pd.Timestamp("2026-09-13T23:00Z")


ZONES = ["UTC", "Europe/Berlin", "America/Chicago", "Asia/Tokyo", "Asia/Kolkata", "America/St_Johns",
         "Australia/Lord_Howe", "Pacific/Kiritimati"]


def _render(kind: str, inst: datetime, zone: str) -> tuple[str, str | None, str | None]:
    """(text, time_format, date order given) of an instant in one supported spelling."""
    loc = inst.astimezone(ZoneInfo(zone))
    off = loc.strftime("%z")
    return {
        "iso_z": (inst.strftime("%Y-%m-%dT%H:%M:%S.%fZ"), None, None),
        "iso_offset_space": (loc.isoformat(sep=" "), None, None),
        "iso_offset_compact": (loc.strftime("%Y-%m-%dT%H:%M:%S") + off, None, None),
        "iso_naive_local": (loc.strftime("%Y-%m-%d %H:%M:%S.%f"), None, None),
        "dotted_day_first": (loc.strftime("%d.%m.%Y %H:%M:%S"), None, DAY_FIRST),
        "dotted_detected": (loc.strftime("%d.%m.%Y %H:%M:%S"), None, None),
        "slash_month_first_12h": (loc.strftime("%m/%d/%Y %I:%M:%S %p"), None, MONTH_FIRST),
        "dash_day_first_offset": (loc.strftime("%d-%m-%Y %H:%M:%S") + " " + off[:3] + ":" + off[3:], None, DAY_FIRST),
        "pattern_with_zone": (loc.strftime("%d/%m/%Y %H:%M:%S %z"), "%d/%m/%Y %H:%M:%S %z", None),
        "pattern_local": (loc.strftime("%Y%m%d %H%M%S"), "%Y%m%d %H%M%S", None),
        "unix_s": (repr(inst.timestamp()), "unix_s", None),
        "unix_ms": (str(int(round(inst.timestamp() * 1000))), "unix_ms", None),
        "spreadsheet_days": (repr((loc.replace(tzinfo=None) - datetime(1899, 12, 30)) / timedelta(days=1)),
                             "spreadsheet_days", None),
    }[kind]


@settings(max_examples=400, deadline=None)
@given(inst=st.datetimes(min_value=datetime(1971, 1, 1), max_value=datetime(2200, 12, 31)).map(
           lambda d: d.replace(microsecond=(d.microsecond // 1000) * 1000, tzinfo=UTC)),
       zone=st.sampled_from(ZONES),
       kind=st.sampled_from(["iso_z", "iso_offset_space", "iso_offset_compact", "iso_naive_local", "dotted_day_first",
                             "dotted_detected", "slash_month_first_12h", "dash_day_first_offset", "pattern_with_zone",
                             "pattern_local", "unix_s", "unix_ms", "spreadsheet_days"]))
def test_any_rendered_stamp_round_trips_or_is_refused_with_a_reason(inst, zone, kind):
    text, fmt, order = _render(kind, inst, zone)
    if kind in ("dotted_day_first", "slash_month_first_12h", "dash_day_first_offset", "dotted_detected",
                "pattern_with_zone", "pattern_local", "iso_offset_compact"):
        inst = inst.replace(microsecond=0)            # these spellings carry whole seconds
    want = _ns(inst)
    utc, status, second = parse_timestamps([text], zone, time_format=fmt, date_order=order)
    if status[0] == GOOD:
        assert utc[0] == want, (text, kind, zone)
    elif status[0] == AMBIGUOUS_TIME:                  # the repeated hour: one of its two readings
        assert want in (utc[0], second[0]), (text, kind, zone)
    else:
        st_ = read_stamps([text], fmt, order)
        assert st_.reason[0] != OK and explain(text, int(st_.reason[0]), fmt, order)
        assert kind == "dotted_detected" and st_.reason[0] == UNDECIDED, (text, kind, zone)


def test_numbers_within_the_range_only():
    _, status, _ = parse_timestamps(["1e30", "nan", ""], time_format="unix_s")
    assert (status != GOOD).all()
    assert np.all(read_stamps(["1e30"], "unix_s").reason != OK)
