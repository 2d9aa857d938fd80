"""Synthetic results for the store and report tests (invented unit ids and numbers).

Values are drawn from a seeded generator; they only exercise the store and have no
physical meaning beyond plausible magnitudes.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from kinetrace.store import fingerprint

UNITS = ("R-210", "R-340")
FP = fingerprint(b"synthetic store test config")


def series_frame(start, end, *, freq="1min", variables=("conversion", "temperature", "activity"),
                 seed=0) -> pd.DataFrame:
    """Wide frame of result series on [start, end), with a few NaN holes and a boolean column."""
    idx = pd.date_range(start, end, freq=freq, tz="UTC", inclusive="left")
    rng = np.random.default_rng(seed)
    data = {v: rng.normal(0.8 if v != "temperature" else 343.15, 0.01, len(idx)) for v in variables}
    frame = pd.DataFrame(data, index=idx)
    if len(idx) > 10:
        frame.iloc[3, 0] = np.nan
        frame.iloc[7, :] = np.nan
    frame["steady"] = (np.arange(len(idx)) % 5) != 0
    return frame


SERIES_UNITS = {"conversion": "-", "temperature": "K", "activity": "-", "steady": "bool"}


def daily_frame(days, *, seed=0, target=24000.0) -> pd.DataFrame:
    """Daily production rows whose four gap parts add up to the gap (built that way)."""
    rng = np.random.default_rng(seed)
    n = len(days)
    prod = target - rng.uniform(-500, 2500, n)
    gap = target - prod
    share = rng.dirichlet([1, 1, 1, 1], n)
    parts = share * gap[:, None]
    parts[:, 3] = gap - parts[:, 0] - parts[:, 1] - parts[:, 2]   # exact closure
    return pd.DataFrame({
        "production_kg": prod, "target_kg": np.full(n, target), "gap_kg": gap,
        "gap_feed_kg": parts[:, 0], "gap_conversion_kg": parts[:, 1],
        "gap_downtime_kg": parts[:, 2], "gap_data_kg": parts[:, 3],
        "hours_with_data": rng.integers(18, 25, n).astype(float),
    }, index=pd.Index([pd.Timestamp(d).date() for d in days], name="day"))


def parameter_frame(seed=0) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    k = 6.0e-4 * (1 + 0.1 * rng.standard_normal())
    kd = 2.0e-8 * (1 + 0.1 * rng.standard_normal())
    return pd.DataFrame([
        {"name": "k_ref:addition", "value": k, "std_error": 0.05 * k, "ci_low": 0.9 * k, "ci_high": 1.1 * k,
         "ci_level": 0.95, "unit_of_measure": "1/s", "method": "saturating"},
        {"name": "decay_constant", "value": kd, "std_error": 0.1 * kd, "ci_low": 0.8 * kd,
         "ci_high": 1.2 * kd, "ci_level": 0.95, "unit_of_measure": "1/s", "method": "exponential"},
    ])


def alarm_frame(start, *, seed=0) -> pd.DataFrame:
    start = pd.Timestamp(start)
    return pd.DataFrame([
        {"kind": "drift", "variable": "activity", "onset": start + pd.Timedelta("2h"),
         "detected": start + pd.Timedelta("5h"), "magnitude": -0.04 - 0.001 * seed, "magnitude_unit": "-",
         "evidence": "EWMA of activity below its lower limit for 3 h", "state": "open", "closed": None},
        {"kind": "step", "variable": "R210-TT-101", "onset": start + pd.Timedelta("7h"),
         "detected": start + pd.Timedelta("7h30min"), "magnitude": 1.8, "magnitude_unit": "K",
         "evidence": "standardised residual CUSUM crossed h = 5", "state": "closed",
         "closed": start + pd.Timedelta("9h")},
    ])


def quality_frame(seed=0) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    tags = ["R210-FT-101", "R210-TT-101", "R210-AT-105"]
    return pd.DataFrame({"good": rng.integers(1300, 1440, 3), "bad_quality_code": rng.integers(0, 20, 3),
                         "out_of_range": rng.integers(0, 5, 3)}, index=pd.Index(tags, name="tag"))


def whatif_frame(current=343.15) -> pd.DataFrame:
    return pd.DataFrame([
        {"lever": "temperature", "current_value": current, "proposed_value": current + 2.5,
         "safe_low": 333.15, "safe_high": 353.15, "unit_of_measure": "K", "restores_target": True,
         "note": "about +2.5 K restores the target at today's activity"},
        {"lever": "feed_flow", "current_value": 2.0e-3, "proposed_value": np.nan, "safe_low": 1.0e-3,
         "safe_high": 2.2e-3, "unit_of_measure": "m3/s", "restores_target": False,
         "note": "no feed rate within the safe limits meets the target"},
    ])


def fill_window(run, start, end, *, seed=0, units=UNITS, freq="1min") -> None:
    """Write one complete window's results for every unit (what a daily run writes)."""
    start, end = pd.Timestamp(start), pd.Timestamp(end)
    days = pd.date_range(start.normalize(), end - pd.Timedelta("1us"), freq="D").date
    for i, unit in enumerate(units):
        s = seed * 10 + i
        frame = series_frame(start, end, freq=freq, seed=s)
        run.write_series(unit, frame, units=SERIES_UNITS)
        run.write_daily(unit, daily_frame(days, seed=s))
        run.write_parameters(unit, parameter_frame(seed=s))
        run.write_alarms(unit, alarm_frame(start, seed=s))
        run.write_quality(unit, quality_frame(seed=s))
        run.write_forecast(unit, activity_now=0.82, activity_needed=0.74,
                           miss_earliest=end + pd.Timedelta(days=100 + i),
                           miss_expected=end + pd.Timedelta(days=104 + i),
                           miss_latest=end + pd.Timedelta(days=109 + i),
                           statement=f"at the present decline, unit {unit} falls below its target in 100-109 days")
        run.write_whatif(unit, whatif_frame())
        run.set_watermark(unit, frame.index[-1])
