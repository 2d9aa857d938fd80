"""Synthetic results of the invented Calder Bank works units R-210 and R-220 for the dashboard tests.

The numbers are made up for the tests and the benchmark only: smooth seeded curves of
plausible magnitude (conversion ~0.8, temperatures ~70 degC, slow catalyst decay) written
through the store's own write API, so the dashboard is tested against a store it did not
fill itself with its own code. Nothing here is a kinetrace computation.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from kinetrace.store import fingerprint, open_store

FP = fingerprint(b"dashboard test plant (invented)")
REACTION = {"R-210": "addition", "R-220": "hydrolysis"}
#: Target production of each unit. [kg/s]  (17.5 t/d and 14.0 t/d)
TARGET = {"R-210": 17500.0 / 86400.0, "R-220": 14000.0 / 86400.0}
UNITS_OF = {"feed_flow": "m3/s", "outlet_flow": "m3/s", "temperature": "K", "volume": "m3",
            "residence_time": "s", "conversion": "-", "activity": "-", "production": "mol/s",
            "production_mass": "kg/s", "target_mass": "kg/s", "production_ratio": "-", "steady": "bool",
            "activity_fit": "-", "activity_band_low": "-", "activity_band_high": "-",
            "closure:total_mass": "-", "global_test": "-", "global_test_limit": "-"}


def unit_series(unit: str, start, end, freq: str = "1h", *, seed: int = 0, reconciliation: bool = True,
                steady: bool = True) -> pd.DataFrame:
    """Wide frame of result series of one unit on ``[start, end)`` (SI units); without
    ``steady`` the unit never reaches a steady window (flag all 0)."""
    idx = pd.date_range(start, end, freq=freq, tz="UTC", inclusive="left")
    n = len(idx)
    rng = np.random.default_rng(seed + (0 if unit == "R-210" else 7))
    days = (idx - idx[0]).total_seconds().to_numpy() / 86400.0
    rxn = REACTION[unit]
    kd = 0.007                                               # [1/d]
    activity = np.exp(-kd * days) * (1 + 0.01 * rng.standard_normal(n))
    temp = 343.15 + 1.5 * np.sin(2 * np.pi * days / 9.0) + 0.2 * rng.standard_normal(n)
    feed = 4.0 / 3600 * (1 + 0.03 * np.sin(2 * np.pi * days / 3.3)) + 1e-5 * rng.standard_normal(n)
    vol = np.full(n, 11.0) + 0.05 * rng.standard_normal(n)
    k_ref = 6.0e-4 * activity
    k_app = k_ref * np.exp(-58000.0 / 8.314462618 * (1 / temp - 1 / 343.15))
    tau = vol / feed
    conv = k_app * tau / (1 + k_app * tau)
    prod_mass = TARGET[unit] * 1.05 * conv / 0.8 * (feed * 3600 / 4.0)
    frame = pd.DataFrame({
        "feed_flow": feed, "outlet_flow": feed * 0.998, "temperature": temp, "volume": vol,
        "residence_time": tau, "conversion": conv, f"rate:{rxn}": conv * 4000 / tau,
        f"k_apparent:{rxn}": k_app, f"k_ref:{rxn}": k_ref, f"k_ref_low:{rxn}": k_ref * 0.95,
        f"k_ref_high:{rxn}": k_ref * 1.05, "activity": activity, "production": prod_mass / 0.118,
        "production_mass": prod_mass, "target_mass": np.full(n, TARGET[unit]),
        "production_ratio": prod_mass / TARGET[unit],
        "activity_fit": np.exp(-kd * days), "activity_band_low": np.exp(-kd * days) - 0.03,
        "activity_band_high": np.exp(-kd * days) + 0.03,
    }, index=idx)
    frame["steady"] = (np.sin(2 * np.pi * days / 2.0) > -0.3).astype(float) if steady else np.zeros(n)
    if reconciliation and unit == "R-210":     # the names the pipeline writes
        frame["closure:MA"] = 0.002 * rng.standard_normal(n)
        frame["closure:volume"] = 0.001 * rng.standard_normal(n)
        frame["global_test"] = rng.chisquare(3, n)
        frame["global_test_dof"] = np.full(n, 3.0)
        frame["global_test_alarm"] = (frame["global_test"] > 7.815).astype(float)
        frame["adjust_z:feed_flow"] = rng.standard_normal(n)
        frame["adjust_z:outlet_flow"] = rng.standard_normal(n)
        frame[f"k_ref:{rxn}_measured"] = k_ref * 1.01
    elif reconciliation:                       # the other names the dashboard accepts
        frame["closure:total_mass"] = 0.002 * rng.standard_normal(n)
        frame["global_test"] = rng.chisquare(3, n)
        frame["global_test_limit"] = np.full(n, 7.81)
        frame[f"adjustment:{unit.replace('-', '')}-FT-101"] = 0.01 * rng.standard_normal(n)
        frame[f"adjustment:{unit.replace('-', '')}-TT-101"] = 0.1 * rng.standard_normal(n)
    return frame


def daily_rows(unit: str, frame: pd.DataFrame) -> pd.DataFrame:
    """Daily production rows from the series (kg per day), gap split exactly into four parts."""
    per_day = (frame["production_mass"] * 3600 * (pd.Timedelta(frame.index.freq or "1h").total_seconds() / 3600)
               ).groupby(frame.index.floor("D")).sum()
    days = per_day.index
    prod = per_day.to_numpy()
    target = np.full(len(days), TARGET[unit] * 86400)
    gap = target - prod
    parts = np.column_stack([0.4 * gap, 0.3 * gap, 0.2 * gap, gap - 0.4 * gap - 0.3 * gap - 0.2 * gap])
    return pd.DataFrame({"production_kg": prod, "target_kg": target, "gap_kg": gap,
                         "gap_feed_kg": parts[:, 0], "gap_conversion_kg": parts[:, 1],
                         "gap_downtime_kg": parts[:, 2], "gap_data_kg": parts[:, 3],
                         "hours_with_data": np.full(len(days), 24.0)},
                        index=pd.Index([d.date() for d in days], name="day"))


def parameter_rows(unit: str) -> pd.DataFrame:
    rxn = REACTION[unit]
    return pd.DataFrame([
        {"name": f"k_ref:{rxn}", "value": 5.1e-4, "std_error": 1.2e-5, "ci_low": 4.87e-4, "ci_high": 5.33e-4,
         "ci_level": 0.95, "unit_of_measure": "1/s", "method": "saturating"},
        {"name": f"activation_energy:{rxn}", "value": 58000.0, "std_error": 2100.0, "ci_low": 53900.0,
         "ci_high": 62100.0, "ci_level": 0.95, "unit_of_measure": "J/mol", "method": "saturating"},
        {"name": "decay:kd", "value": 0.007 / 86400, "std_error": 0.0004 / 86400, "ci_low": 0.0062 / 86400,
         "ci_high": 0.0078 / 86400, "ci_level": 0.95, "unit_of_measure": "1/s", "method": "exponential"},
        {"name": "ratelaw_aicc:saturating", "value": -412.3, "unit_of_measure": "-", "method": "saturating"},
        {"name": "ratelaw_aicc:power", "value": -398.7, "unit_of_measure": "-", "method": "power"},
    ])


def fill_store(url: str, start="2026-09-01T00:00Z", end="2026-12-01T00:00Z", freq: str = "1h", *,
               units=("R-210", "R-220"), reconciliation: bool = True, extras: bool = True):
    """Open ``url`` and write one run of synthetic results for the units; returns the store."""
    store = open_store(url)
    start, end = pd.Timestamp(start), pd.Timestamp(end)
    with store.write_run((start, end), config_fingerprint=FP) as run:
        for i, unit in enumerate(units):
            frame = unit_series(unit, start, end, freq, seed=i, reconciliation=reconciliation,
                                steady=(unit != "R-220") or extras)
            units_of = {c: UNITS_OF.get(c, "1/s" if c.startswith("k_") else "") for c in frame.columns}
            run.write_series(unit, frame, units=units_of)
            run.write_daily(unit, daily_rows(unit, frame))
            run.set_watermark(unit, frame.index[-1])
            if not extras:
                continue
            run.write_parameters(unit, parameter_rows(unit))
            last = frame.index[-1]
            run.write_forecast(unit, activity_now=float(frame["activity"].iloc[-24:].mean()),
                               # the need the invented decay exp(-0.007 t) reaches on the expected day
                               activity_needed=float(np.exp(-0.007 * ((end - start).days + 38 + 10 * i))),
                               miss_earliest=end + pd.Timedelta(days=30 + 10 * i),
                               miss_expected=end + pd.Timedelta(days=38 + 10 * i),
                               miss_latest=end + pd.Timedelta(days=47 + 10 * i),
                               statement=f"at the present decline {unit} falls below target in 30-47 days")
            tag = unit.replace("-", "")
            run.write_alarms(unit, pd.DataFrame([
                {"kind": "sensor_bias" if unit == "R-210" else "bias", "variable": f"{tag}-FT-101", "onset": last - pd.Timedelta(days=6),
                 "detected": last - pd.Timedelta(days=5), "magnitude": 0.042, "magnitude_unit": "m3/h",
                 "evidence": "CUSUM of the flow adjustment crossed h = 5", "state": "open", "closed": None},
                {"kind": "drift", "variable": "activity", "onset": last - pd.Timedelta(days=20),
                 "detected": last - pd.Timedelta(days=18), "magnitude": -0.03, "magnitude_unit": "-",
                 "evidence": "EWMA of activity below its lower limit", "state": "closed",
                 "closed": last - pd.Timedelta(days=10)},
            ]))
            q = pd.DataFrame({"rows_read": [2162 + i, 2184, 2134 + i], "good": [2150, 2180, 2100],
                              "bad_quality_code": [12 + i, 0, 3], "out_of_range": [0, 4, 1], "frozen": [0, 0, 30 + i],
                              "intervals": [24, 24, 24], "missing_intervals": [0, 2, 5]},
                             index=pd.Index([f"{tag}-FT-101", f"{tag}-TT-101", f"{tag}-AT-105"], name="tag"))
            run.write_quality(unit, q, period_start=end - pd.Timedelta(days=1), period_end=end)
            q2 = q.copy()
            q2["bad_quality_code"] = [1, 1, 1]
            run.write_quality(unit, q2, period_start=end - pd.Timedelta(days=2), period_end=end - pd.Timedelta(days=1))
            temp = float(frame["temperature"].iloc[-1])
            run.write_whatif(unit, pd.DataFrame([
                {"lever": "temperature", "current_value": temp, "proposed_value": min(temp + 3.0, 353.15),
                 "safe_low": 318.15, "safe_high": 353.15, "unit_of_measure": "K", "restores_target": True,
                 "note": "about +3 K restores the target at today's activity"},
                {"lever": "feed_flow", "current_value": 4.0 / 3600, "proposed_value": np.nan,
                 "safe_low": 1.5 / 3600, "safe_high": 7.0 / 3600, "unit_of_measure": "m3/s",
                 "restores_target": False, "note": "no feed rate within the safe limits meets the target"},
            ]))
    return store
