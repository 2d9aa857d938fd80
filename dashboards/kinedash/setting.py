"""What the interactive what-if needs of one unit: its model as the last check used it, today's
activity, the present operating point and the safe ranges (no Streamlit in here).

Everything comes from the plant configuration (``KINETRACE_CONFIG``: rate laws, limits,
level-volume table, display units) and the results store (fitted parameters, activity,
the operating point the check evaluated, the analysed feed). The prediction itself is
:func:`kinetrace.monitor.whatif.predict_setting`, the same steady-state model as the check's
what-if: the page never computes a conversion or a production of its own.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from kinetrace.config.model import UnitModel
from kinetrace.errors import KinetraceError
from kinetrace.monitor.whatif import model_from_parameters, safe_hold_up
from kinetrace.store import Store
from kinetrace.units import UnitError, convert

#: Readable name of each lever. [-]
LEVER_LABELS = {"temperature": "Reactor temperature", "feed_flow": "Feed flow", "residence_time": "Residence time"}
#: SI unit of each lever.
LEVER_SI = {"temperature": "K", "feed_flow": "m3/s", "residence_time": "s"}
#: Display unit of each lever when the unit's instruments name none.
LEVER_SHOWN = {"temperature": "degC", "feed_flow": "m3/h", "residence_time": "h"}
#: Input step of each lever in its display unit, by display unit. [display unit]
STEPS = {"degC": 0.1, "degF": 0.1, "K": 0.1, "m3/h": 0.01, "gpm": 0.1, "L/min": 0.1, "h": 0.01, "min": 0.5}


class SettingUnavailable(KinetraceError):
    """The what-if cannot be set up for this unit (no configuration of it, no activity, ...)."""


@dataclass(frozen=True)
class UnitSetting:
    """One unit ready for :func:`kinetrace.monitor.whatif.predict_setting`.

    Attributes
    ----------
    model : UnitModel
        Configured unit with the stored fitted rate-law parameters.
    activity : float
        Today's catalyst activity (the check's forecast, else the median of the last steady rows). [-]
    present : dict
        ``temperature`` [K], ``feed_flow`` [m^3/s], ``residence_time`` [s] of the present operation.
    volume_limits : tuple of float
        Safe hold-up range [m^3]; low == high for a unit of fixed hold-up.
    feed_conc : dict
        Feed composition of the model (reconciled analysed feed, else the specification). [mol/m^3]
    feed_text : str
        Where that feed comes from, in words.
    shown : dict
        Display unit of each lever.
    as_of : Timestamp
        Time of the stored results used. [UTC]
    """

    model: UnitModel
    activity: float
    present: dict
    volume_limits: tuple
    feed_conc: dict
    feed_text: str
    shown: dict
    as_of: pd.Timestamp

    @property
    def fixed_hold_up(self) -> bool:
        return self.volume_limits[0] == self.volume_limits[1]


def config_path(environ=None) -> Path:
    """The plant configuration the dashboard reads (``KINETRACE_CONFIG``, else the demo plant)."""
    from .source import DEFAULT_CONFIG

    environ = os.environ if environ is None else environ
    return Path(environ.get("KINETRACE_CONFIG") or DEFAULT_CONFIG)


def unit_setting(store: Store, unit: str, path: Path) -> UnitSetting:
    """Gather the what-if inputs of ``unit`` from the configuration at ``path`` and the store.

    Raises
    ------
    SettingUnavailable
        The configuration cannot be read or has no such unit, or the store lacks the activity
        or the operating point.
    """
    from kinetrace.config import load_config
    from kinetrace.config.model import unit_model
    from kinetrace.pipeline.feed import monitoring_feed

    try:
        cfg = load_config(path)
    except (KinetraceError, OSError) as exc:
        raise SettingUnavailable(f"plant configuration {path} cannot be read: {exc}") from None
    unit_cfg = next((u for u in cfg.units if u.id == unit), None)
    if unit_cfg is None:
        raise SettingUnavailable(f"unit {unit} is not in the plant configuration {path} "
                                 "(set KINETRACE_CONFIG to the configuration of this store)")
    model = model_from_parameters(unit_model(unit_cfg), store.parameters(unit))
    last = store.watermark(unit)
    if last is None:
        raise SettingUnavailable(f"no results of {unit} in the store yet")
    last = pd.Timestamp(last)
    cat = set(store.series_catalog(unit)["variable"])
    feed_cols = [v for v in cat if v.startswith(("reconciled:feed_conc:", "feed_analysed:"))]
    op_cols = [c for c in ("feed_flow", "temperature", "volume", "steady", "activity") if c in cat]
    recent = store.series(unit, feed_cols + op_cols, last - pd.Timedelta(hours=36), last + pd.Timedelta("1us"))
    present = _present(store.whatif(unit), recent)
    if not all(np.isfinite(v) and v > 0 for v in present.values()) or len(present) < 3:
        raise SettingUnavailable(f"no operating point of {unit} in the store (temperature, feed flow, hold-up)")
    fc = store.forecasts(unit)
    activity = float(fc["activity_now"].iloc[-1]) if len(fc) and np.isfinite(fc["activity_now"].iloc[-1]) else np.nan
    if not np.isfinite(activity) and "activity" in recent:
        steady = recent["steady"] == 1.0 if "steady" in recent else True
        activity = float(recent.loc[steady, "activity"].iloc[-24:].median())
    if not (np.isfinite(activity) and activity > 0):
        raise SettingUnavailable(f"no catalyst activity of {unit} in the store")
    feed, _, feed_text = monitoring_feed(recent.iloc[-24:] if len(recent) else recent, model)
    vol = safe_hold_up(model, unit_cfg.limits.level)
    if vol is None:      # no safe range and no fixed volume: the present hold-up, held
        v = present["residence_time"] * present["feed_flow"]
        vol = (v, v)
    shown = {lever: model.display_units.get(si, LEVER_SHOWN[lever]) for lever, si in LEVER_SI.items()}
    shown["residence_time"] = "h"
    return UnitSetting(model, activity, present, tuple(float(x) for x in vol), feed, feed_text, shown, last)


def _present(whatif: pd.DataFrame, recent: pd.DataFrame) -> dict:
    """The operating point the check evaluated (its what-if rows), else the median of the last 24 steady rows."""
    got = {}
    if len(whatif):
        w = whatif[whatif["as_of"] == whatif["as_of"].max()].set_index("lever")["current_value"]
        got = {k: float(w[k]) for k in ("temperature", "feed_flow", "residence_time") if k in w}
    if len(got) < 3 and len(recent):
        last = recent.iloc[-24:]
        if "steady" in last and (last["steady"] == 1.0).any():
            last = last[last["steady"] == 1.0]
        med = last.median(numeric_only=True)
        got.setdefault("temperature", float(med.get("temperature", np.nan)))
        got.setdefault("feed_flow", float(med.get("feed_flow", np.nan)))
        if "residence_time" not in got and np.isfinite(med.get("volume", np.nan)):
            got["residence_time"] = float(med["volume"]) / got["feed_flow"]
    return got


def to_shown(value: float, si: str, shown: str) -> float:
    """A lever value in its display unit. [display unit]

    >>> round(to_shown(343.15, "K", "degC"), 9), round(to_shown(7200.0, "s", "h"), 9)
    (70.0, 2.0)
    """
    try:
        return float(convert(value, si, shown))
    except UnitError:
        return float(value)


def from_shown(value: float, si: str, shown: str) -> float:
    """A lever value from its display unit back to SI. [SI]

    >>> round(from_shown(70.0, "K", "degC"), 9)
    343.15
    """
    try:
        return float(convert(value, shown, si))
    except UnitError:
        return float(value)


def input_bounds(lo: float, hi: float, si: str, shown: str) -> tuple[float, float, float]:
    """Bounds and step of an input in the display unit that never leave ``[lo, hi]`` (SI): the low
    bound rounded up and the high bound rounded down to the step.

    Returns
    -------
    (float, float, float)
        Lowest and highest value the input offers, and its step. [display unit]

    >>> input_bounds(318.15, 358.15, "K", "degC")
    (45.0, 85.0, 0.1)
    >>> input_bounds(5.1 / 1.4e-3, 14.1 / 1.4e-3, "s", "h")
    (1.02, 2.79, 0.01)
    """
    step = STEPS.get(shown, 0.01)
    a, b = sorted((to_shown(lo, si, shown), to_shown(hi, si, shown)))
    digits = max(0, -int(math.floor(math.log10(step))))
    a_r = round(math.ceil(round(a / step, 6)) * step, digits)
    b_r = round(math.floor(round(b / step, 6)) * step, digits)
    if b_r < a_r:              # a range narrower than one step: offer its middle only
        mid = round(0.5 * (a + b), digits + 3)
        return mid, mid, step
    return a_r, b_r, step
