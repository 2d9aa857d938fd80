"""Checks and conversions of the rows a run writes (pure functions, no database).

Each ``*_record`` function takes one input row (a dict), checks it, and returns the
dict inserted into its table; a bad row raises
:class:`~kinetrace.store.schema.StoreError` naming where it is and what is allowed.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from .schema import ALARM_STATES, StoreError, to_utc

#: Columns of a daily production frame; the first seven are required. [kg] except hours [h]
DAILY_COLUMNS = ("production_kg", "target_kg", "gap_kg", "gap_feed_kg", "gap_conversion_kg",
                 "gap_downtime_kg", "gap_data_kg", "hours_with_data")
GAP_PARTS = ("gap_feed_kg", "gap_conversion_kg", "gap_downtime_kg", "gap_data_kg")
PARAMETER_COLUMNS = ("name", "value", "std_error", "ci_low", "ci_high", "ci_level", "unit_of_measure", "method")
ALARM_COLUMNS = ("kind", "variable", "onset", "detected", "magnitude", "magnitude_unit", "evidence",
                 "state", "closed", "rate", "last_check")
FORECAST_COLUMNS = ("activity_now", "activity_needed", "miss_earliest", "miss_expected", "miss_latest",
                    "statement")
WHATIF_COLUMNS = ("lever", "current_value", "proposed_value", "safe_low", "safe_high", "unit_of_measure",
                  "restores_target", "note")

#: Relative tolerance of the check that the gap parts add up to the gap (round-off only). [-]
GAP_RTOL = 1e-9


def frame_columns(frame: pd.DataFrame, allowed: tuple[str, ...], required: tuple[str, ...],
                  what: str) -> None:
    """Refuse a frame with missing or unknown columns (both listed in one message)."""
    if not isinstance(frame, pd.DataFrame):
        raise StoreError(f"{what}: expected a pandas DataFrame, got {type(frame).__name__}")
    unknown = [c for c in frame.columns if c not in allowed]
    missing = [c for c in required if c not in frame.columns]
    if unknown or missing:
        parts = []
        if missing:
            parts.append(f"missing column(s) {missing}")
        if unknown:
            parts.append(f"unknown column(s) {unknown}")
        raise StoreError(f"{what}: {'; '.join(parts)}; allowed columns are {list(allowed)}")


def check_gap(rec: dict, where: str) -> None:
    """Gap = target - production, and the four parts add up to the gap (within round-off)."""
    gap, prod, target = rec["gap_kg"], rec["production_kg"], rec["target_kg"]
    tol = GAP_RTOL * max(1.0, abs(target or 0.0), abs(prod or 0.0))
    if gap is not None and prod is not None and target is not None and abs(target - prod - gap) > tol:
        raise StoreError(f"{where}: gap {gap!r} kg is not target - production = {target - prod!r} kg")
    if gap is None:
        return
    parts = {c: rec[c] for c in GAP_PARTS}
    missing = [c for c, v in parts.items() if v is None]
    if missing:
        raise StoreError(f"{where}: gap is {gap!r} kg but part(s) {missing} are missing; the attribution "
                         "must add up to the gap (put what cannot be judged in gap_data_kg)")
    total = sum(parts.values())
    if abs(total - gap) > tol:
        raise StoreError(f"{where}: gap parts add up to {total!r} kg but the gap is {gap!r} kg; "
                         "the attribution must add up to the gap")


def as_float(v) -> float | None:
    """A float, or ``None`` (stored as NULL) for a missing or NaN value.

    >>> as_float("2.5"), as_float(float("nan")), as_float(None)
    (2.5, None, None)
    """
    if v is None:
        return None
    f = float(v)
    return None if np.isnan(f) else f


def time_or_none(v, what: str) -> pd.Timestamp | None:
    """A UTC time stamp, or ``None`` for a missing value (None, NaT, NaN)."""
    if v is None or (not isinstance(v, str) and pd.isna(v)):
        return None
    return to_utc(v, what)


def parameter_record(row: dict, where: str) -> dict:
    """One fitted-parameter row checked and converted for the ``parameters`` table."""
    name = row.get("name")
    if not isinstance(name, str) or not name:
        raise StoreError(f"{where}: parameter name must be a non-empty string, got {name!r}")
    rec = {c: as_float(row.get(c)) for c in ("value", "std_error", "ci_low", "ci_high", "ci_level")}
    lo, hi, v = rec["ci_low"], rec["ci_high"], rec["value"]
    if lo is not None and hi is not None and lo > hi:
        raise StoreError(f"{where}: parameter {name!r} has ci_low {lo} above ci_high {hi}")
    if v is not None and lo is not None and hi is not None and not lo <= v <= hi:
        raise StoreError(f"{where}: parameter {name!r} value {v} lies outside its interval [{lo}, {hi}]")
    rec.update(name=name, unit_of_measure=str(row.get("unit_of_measure") or ""),
               method=str(row.get("method") or ""))
    return rec


def forecast_record(row: dict, where: str) -> dict:
    """One forecast row checked and converted for the ``forecasts`` table."""
    rec = {c: as_float(row[c]) for c in ("activity_now", "activity_needed")}
    times = {c: time_or_none(row[c], f"{where}: {c}") for c in ("miss_earliest", "miss_expected",
                                                                 "miss_latest")}
    known = [t for t in times.values() if t is not None]
    if known != sorted(known):
        raise StoreError(f"{where}: miss_earliest <= miss_expected <= miss_latest is required, got "
                         f"{times}")
    rec.update(times, statement=str(row["statement"] or ""))
    return rec


def whatif_record(row: dict, where: str) -> dict:
    """One what-if row checked: a proposal outside its safe limits is refused."""
    lever = row.get("lever")
    if not isinstance(lever, str) or not lever:
        raise StoreError(f"{where}: lever must be a non-empty string, got {lever!r}")
    rec = {c: as_float(row.get(c)) for c in ("current_value", "proposed_value", "safe_low", "safe_high")}
    lo, hi, p = rec["safe_low"], rec["safe_high"], rec["proposed_value"]
    if lo is None or hi is None or lo > hi:
        raise StoreError(f"{where}: lever {lever!r} needs finite safe limits with safe_low <= safe_high, "
                         f"got [{lo}, {hi}]")
    if p is not None and not lo <= p <= hi:
        raise StoreError(f"{where}: lever {lever!r} proposes {p}, outside its safe limits [{lo}, {hi}]; "
                         "a setting outside the safe limits is never stored")
    restores = row.get("restores_target")
    if not isinstance(restores, (bool, np.bool_)):
        raise StoreError(f"{where}: restores_target of lever {lever!r} must be True or False, "
                         f"got {restores!r}")
    if restores and p is None:
        raise StoreError(f"{where}: lever {lever!r} says it restores the target but proposes no value")
    rec.update(lever=lever, unit_of_measure=str(row.get("unit_of_measure") or ""),
               restores_target=bool(restores), note=str(row.get("note") or ""))
    return rec


def alarm_record(row: dict, where: str, unit: str, run_id: int) -> dict:
    """One alarm row checked and converted for the ``alarms`` table."""
    for c in ("kind", "variable"):
        if not isinstance(row.get(c), str) or not row[c]:
            raise StoreError(f"{where}: {c} must be a non-empty string, got {row.get(c)!r}")
    if row["state"] not in ALARM_STATES:
        raise StoreError(f"{where}: state {row['state']!r} is not one of {list(ALARM_STATES)}")
    rec = {
        "kind": row["kind"], "variable": row["variable"], "state": row["state"],
        "detected": to_utc(row["detected"], f"{where}: detected"),
        "onset": time_or_none(row.get("onset"), f"{where}: onset"),
        "closed": time_or_none(row.get("closed"), f"{where}: closed"),
        "magnitude": as_float(row.get("magnitude")),
        "magnitude_unit": str(row.get("magnitude_unit") or ""),
        "evidence": str(row.get("evidence") or ""),
        "rate": as_float(row.get("rate")),
        "last_check": time_or_none(row.get("last_check"), f"{where}: last_check"),
        "unit_id": unit, "run_id": run_id,
    }
    if rec["onset"] is not None and rec["onset"] > rec["detected"]:
        raise StoreError(f"{where}: onset {rec['onset']} is after detection {rec['detected']}")
    if (rec["state"] == "closed") != (rec["closed"] is not None):
        raise StoreError(f"{where}: a closed alarm needs its closed time and an open one must not "
                         f"have one (state {rec['state']!r}, closed {rec['closed']})")
    return rec
