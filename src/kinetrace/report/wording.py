"""Plain-language texts of the report: numbers, alarms, forecasts, what-if settings, cautions."""

from __future__ import annotations

import math

import pandas as pd

from ..units import display

#: Shown with every what-if setting, in the HTML page and in the workbook.
CAUTIONS = (
    "These settings are estimates from a fitted model, not instructions. Before any change, check it "
    "against the unit's safe operating envelope and its relief and runaway studies, and take it through "
    "the site's management-of-change procedure. Site procedures, local codes and licensed engineering "
    "practice take precedence over anything shown here."
)

KIND_WORDS = {
    "drift": "Gradual drift",
    "cusum": "Gradual drift (CUSUM)",
    "ewma": "Gradual drift (EWMA)",
    "step": "Sudden step",
    "sensor_drift": "Analyzer drifting against the lab",
}

LEVER_WORDS = {"temperature": "temperature", "feed_flow": "feed rate", "residence_time": "residence time"}


def number(value: float, decimals: int = 0) -> str:
    """A number with thousands separators, or an em dash when unknown.

    >>> number(24012.6), number(-3.14159, 2), number(float("nan"))
    ('24,013', '-3.14', '—')
    """
    if value is None or not math.isfinite(value):
        return "—"
    return f"{value:,.{decimals}f}"


def sig(value: float, digits: int = 4) -> str:
    """A number to ``digits`` significant figures (general format), em dash when unknown.

    >>> sig(6.0123e-4), sig(343.15)
    ('0.0006012', '343.1')
    """
    if value is None or not math.isfinite(value):
        return "—"
    return f"{value:.{digits}g}"


def when(ts) -> str:
    """Short UTC time of an event.

    >>> when(pd.Timestamp("2026-11-30T05:07Z"))
    '30 Nov 05:07 UTC'
    """
    if ts is None or pd.isna(ts):
        return "unknown time"
    return pd.Timestamp(ts).tz_convert("UTC").strftime("%d %b %H:%M UTC").lstrip("0")


def alarm_sentence(row, as_of=None) -> str:
    """One alarm in plain words (kind, variable, onset, detection, state and how long it has been
    open at ``as_of``; size and evidence apart).

    >>> alarm_sentence({"kind": "step", "variable": "R210-TT-101", "onset": pd.Timestamp("2026-11-30T07:00Z"),
    ...                 "detected": pd.Timestamp("2026-11-30T07:30Z"), "state": "open", "closed": None})
    'Sudden step on R210-TT-101, began about 30 Nov 07:00 UTC, detected 30 Nov 07:30 UTC; still open.'
    >>> alarm_sentence({"kind": "sensor_bias", "variable": "R210-FT-101", "onset": pd.Timestamp("2026-10-26T00:00Z"),
    ...                 "detected": pd.Timestamp("2026-10-26T02:00Z"), "state": "open", "closed": None},
    ...                as_of=pd.Timestamp("2026-11-30T00:00Z"))
    'Sensor bias on R210-FT-101, began about 26 Oct 00:00 UTC, detected 26 Oct 02:00 UTC; open for 34 days.'
    """
    kind = KIND_WORDS.get(row["kind"], row["kind"].replace("_", " ").capitalize())
    onset = "" if pd.isna(row["onset"]) else f", began about {when(row['onset'])}"
    state = "still open" if row["state"] == "open" else f"cleared {when(row['closed'])}"
    if row["state"] == "open" and as_of is not None and not pd.isna(row["detected"]):
        days = (pd.Timestamp(as_of) - pd.Timestamp(row["detected"])) / pd.Timedelta(days=1)
        if days >= 1:
            state = f"open for {int(days)} days"   # whole days
        elif days > 0:
            state = f"open for {days * 24:.0f} h"
    return f"{kind} on {row['variable']}{onset}, detected {when(row['detected'])}; {state}."


def whatif_sentence(row, units: dict | None = None) -> str:
    """One what-if lever in plain words, within its safe limits, in display units (the
    workbook keeps the stored SI values).

    >>> whatif_sentence({"lever": "temperature", "unit_of_measure": "K", "safe_low": 323.15,
    ...                  "safe_high": 348.15, "restores_target": True, "current_value": 335.15,
    ...                  "proposed_value": 339.65})
    'Estimated to restore the target: temperature from 62.0 degC to 66.5 degC (safe limits 50.0 degC to 75.0 degC).'

    In the unit's own instrument units:

    >>> whatif_sentence({"lever": "feed_flow", "unit_of_measure": "m3/s", "safe_low": 1e-3, "safe_high": 2e-3,
    ...                  "restores_target": True, "current_value": 1.5e-3, "proposed_value": 1.5e-3}, {"m3/s": "gpm"})
    'On target at the present feed rate (23.8 gpm; safe limits 15.9 gpm to 31.7 gpm): no change needed.'
    """
    lever = LEVER_WORDS.get(row["lever"], row["lever"].replace("_", " "))
    u = row["unit_of_measure"]
    to = (units or {}).get(u)
    limits = f"safe limits {display(row['safe_low'], u, to)} to {display(row['safe_high'], u, to)}"
    if row["restores_target"]:
        if row["proposed_value"] == row["current_value"]:
            return f"On target at the present {lever} ({display(row['current_value'], u, to)}; {limits}): no change needed."
        return (f"Estimated to restore the target: {lever} from {display(row['current_value'], u, to)} to "
                f"{display(row['proposed_value'], u, to)} ({limits}).")
    return f"No {lever} within the {limits} is estimated to meet the target."


def mass_text(kg: float, mass: str = "kg") -> str:
    """An amount in kg written in the site's production mass unit (pint), to a sensible precision.

    >>> mass_text(16513.2), mass_text(16513.2, "t"), mass_text(float("nan"), "t")
    ('16,513 kg', '16.51 t', '—')
    """
    if kg is None or not math.isfinite(kg):
        return "—"
    if mass == "kg":
        return f"{number(kg)} kg"
    from ..units import convert

    v = float(convert(kg, "kg", mass))
    return f"{number(v, 2 if abs(v) < 1000 else 0)} {mass}"


def gap_sentence(gap: float, parts: dict[str, float], mass: str = "kg") -> str:
    """The day's gap and its four causes in plain, positive words (no double negatives).

    >>> gap_sentence(1000.0, {"gap_feed_kg": 600.0, "gap_conversion_kg": 400.0,
    ...                       "gap_downtime_kg": 0.0, "gap_data_kg": 0.0})
    'Short by 1,000 kg: feed below plan 600 kg, conversion below expectation 400 kg.'
    >>> gap_sentence(-3061.0, {"gap_feed_kg": -1352.0, "gap_conversion_kg": -1709.0,
    ...                        "gap_downtime_kg": 0.0, "gap_data_kg": 0.0})
    'Ahead by 3,061 kg: feed above plan 1,352 kg, conversion above expectation 1,709 kg.'
    >>> gap_sentence(200.0, {"gap_feed_kg": -300.0, "gap_conversion_kg": 500.0,
    ...                      "gap_downtime_kg": 0.0, "gap_data_kg": 0.0})
    'Short by 200 kg: conversion below expectation 500 kg; offset by feed above plan 300 kg.'
    """
    if not math.isfinite(gap):
        return "Gap unknown (no production data)."
    short = {"gap_feed_kg": "feed below plan", "gap_conversion_kg": "conversion below expectation",
             "gap_downtime_kg": "downtime", "gap_data_kg": "data too poor to judge"}
    ahead = {"gap_feed_kg": "feed above plan", "gap_conversion_kg": "conversion above expectation",
             "gap_downtime_kg": "less downtime than planned", "gap_data_kg": "data correction"}
    shown = {k: v for k, v in parts.items() if math.isfinite(v) and round(v) != 0}
    against = [f"{short[k]} {mass_text(v, mass)}" for k, v in shown.items() if v > 0]
    helping = [f"{ahead[k]} {mass_text(-v, mass)}" for k, v in shown.items() if v < 0]
    main, other = (against, helping) if gap > 0 else (helping, against)
    head = f"Short by {mass_text(gap, mass)}" if gap > 0 else f"Ahead by {mass_text(-gap, mass)}"
    if not main and not other:
        return head + "."
    text = head + ": " + ", ".join(main)
    if other:
        text += ("; offset by " if main else "") + ", ".join(other)
    return text + "."


QUALITY_WORDS = {
    "bad_timestamp": "unreadable time stamp", "ambiguous_time": "ambiguous local time",
    "nonexistent_time": "non-existent local time", "bad_quality_code": "bad quality code",
    "bad_value": "empty or non-numeric value", "duplicate": "duplicate", "conflicting_duplicate":
    "conflicting duplicate", "out_of_range": "out of range", "spike": "spike", "frozen": "frozen (flat-lined)",
}


def quality_word(measure: str) -> str:
    """Plain name of a data-quality count.

    >>> quality_word("out_of_range"), quality_word("late_arrival")
    ('out of range', 'late arrival')
    """
    return QUALITY_WORDS.get(measure, measure.replace("_", " "))
