"""The monitoring stage of one unit: a pure function of its back-calculated series.

:func:`assess_unit` chains the monitor steps on the hourly frame of
:func:`kinetrace.pipeline.backcalc.back_calculate` (columns ``activity``,
``steady``, ``production``, ``feed_flow``, ``temperature``, ``volume``; UTC
index):

1. activity trend of the current catalyst charge (:func:`~kinetrace.monitor.trend.fit_activity_trend`);
2. steps in activity (poisoning drops, catalyst changes) and EWMA and CUSUM
   charts on the AR(1) innovations of the standardised trend residuals
   (Alwan & Roberts 1988: hourly plant residuals are autocorrelated);
3. daily production against target with the exact gap attribution;
4. activity needed at the present operating point and the forecast of the miss date;
5. what-if settings inside the configured safe limits.

A step that cannot be done (too few data, no rate law, ...) is skipped and its
reason kept in ``problems``; the others still run. The ``*_rows`` methods give
frames with the column names of the results store.

Alarm state: an alarm is ``open`` while its detection is less than
``open_for`` before ``as_of``, else ``closed`` at detection + ``open_for``.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from kinetrace.config.model import UnitModel
from kinetrace.errors import KinetraceError
from kinetrace.monitor._unit import unit_reactions
from kinetrace.monitor.alarms import Alarm
from kinetrace.monitor.charts import ChartResult, ar1_innovations, cusum_alarms, ewma_alarms
from kinetrace.monitor.forecast import Forecast, forecast_crossing, required_activity
from kinetrace.monitor.production import CAUSES, attribute_shortfall
from kinetrace.monitor.steps import detect_steps
from kinetrace.monitor.trend import ActivityTrend, fit_activity_trend
from kinetrace.monitor.whatif import WhatIf, what_if

__all__ = ["UnitAssessment", "assess_unit"]


@dataclass
class UnitAssessment:
    """Everything the monitoring stage found for one unit (see :func:`assess_unit`)."""

    unit: str
    as_of: pd.Timestamp
    trend: ActivityTrend | None
    charts: list[ChartResult]
    alarms: list[Alarm]
    daily: pd.DataFrame
    operating_point: dict
    forecast: Forecast | None
    whatif: list[WhatIf]
    molar_mass: float
    open_for: pd.Timedelta
    problems: list[str] = field(default_factory=list)
    feed_basis: str = "feed composition: specification"   # which feed the model used, in words

    def daily_rows(self) -> pd.DataFrame:
        """Daily production and gap parts. [kg], hours [h]; index the production day (date)."""
        d = self.daily
        mm = self.molar_mass
        cols = {"production_kg": d["produced"] * mm, "target_kg": d["target"] * mm, "gap_kg": d["gap"] * mm,
                **{f"gap_{c}_kg": d[c] * mm for c in CAUSES},
                "hours_with_data": d["hours_running"] + d["hours_down"]}
        days = pd.Index([ts.date() for ts in d.index], dtype=object, name="day")
        return pd.DataFrame({k: v.to_numpy(dtype=float) for k, v in cols.items()}, index=days)

    def parameter_rows(self) -> pd.DataFrame:
        """Fitted decay-law parameters with standard errors and 95 % intervals."""
        if self.trend is None:
            return pd.DataFrame(columns=["name", "value", "std_error", "ci_low", "ci_high", "ci_level",
                                         "unit_of_measure", "method"])
        fit = self.trend.fit
        se = np.sqrt(np.clip(np.diag(fit.covariance), 0.0, None))
        from scipy import stats

        q = stats.t.ppf(0.975, max(fit.dof, 1))
        rows = []
        for (name, value), s in zip(fit.params.items(), se):
            unit = "1/s" if name in ("b", "kd") else "-"
            rows.append({"name": f"decay_{name}", "value": value, "std_error": s, "ci_low": value - q * s,
                         "ci_high": value + q * s, "ci_level": 0.95, "unit_of_measure": unit,
                         "method": fit.method})
        rows.append({"name": "decay_residual_sd", "value": fit.residual_sd, "unit_of_measure": "-",
                     "method": fit.method})
        return pd.DataFrame(rows)

    def alarm_rows(self) -> pd.DataFrame:
        """Alarms with kind ``<method>_<direction>``, state by the ``open_for`` rule."""
        rows = []
        for a in self.alarms:
            is_open = self.as_of - a.detected < self.open_for
            rows.append({"kind": f"{a.method}_{a.direction}", "variable": a.signal, "onset": a.onset,
                         "detected": a.detected, "magnitude": a.size,
                         "magnitude_unit": "-" if a.signal == "activity" else "sigma",
                         "evidence": a.evidence, "state": "open" if is_open else "closed",
                         "closed": None if is_open else a.detected + self.open_for})
        return pd.DataFrame(rows, columns=["kind", "variable", "onset", "detected", "magnitude", "magnitude_unit",
                                           "evidence", "state", "closed"])

    def forecast_row(self) -> dict | None:
        """Keyword arguments of the store's forecast write, or None without a forecast."""
        f = self.forecast
        if f is None:
            return None
        return {"activity_now": f.activity_now, "activity_needed": f.required_activity,
                "miss_earliest": f.earliest, "miss_expected": f.central, "miss_latest": f.latest,
                "statement": f.text}

    def whatif_rows(self) -> pd.DataFrame:
        """What-if settings of the levers searched (levers without safe limits are left out)."""
        rows = []
        for w in self.whatif:
            if not all(np.isfinite(w.limits)):
                continue
            rows.append({"lever": w.lever, "current_value": w.current,
                         "proposed_value": np.nan if w.setting is None else w.setting,
                         "safe_low": w.limits[0], "safe_high": w.limits[1], "unit_of_measure": w.unit,
                         "restores_target": bool(w.feasible), "note": w.message})   # cautions shown once, by the outputs
        return pd.DataFrame(rows, columns=["lever", "current_value", "proposed_value", "safe_low", "safe_high",
                                           "unit_of_measure", "restores_target", "note"])


def _operating_point(series: pd.DataFrame, hours: int) -> dict:
    last = series.iloc[-hours:]
    run = last.loc[last["feed_flow"] > 0] if "feed_flow" in last else last
    steady = run.loc[run["steady"].astype(bool)] if "steady" in run and run["steady"].any() else run
    return {c: float(steady[c].median()) for c in ("feed_flow", "temperature", "volume") if c in steady}


def assess_unit(
    series: pd.DataFrame,
    model: UnitModel,
    *,
    events=(),
    plan_feed_flow: float | None = None,
    key_feed_conc=None,
    feed_conc: dict | None = None,
    valid: pd.Series | None = None,
    volume_limits: tuple[float, float] | None = None,
    arl0: float = 370.0,
    min_step: float = 0.05,
    tz: str = "UTC",
    day_start: str = "00:00",
    horizon_days: float = 365.0,
    operating_hours: int = 24,
    operating_point: dict | None = None,
    open_for: str = "3D",
    decay_method: str = "auto",
) -> UnitAssessment:
    """Trend, alarms, production against target, forecast and what-if for one unit.

    Parameters
    ----------
    series : DataFrame
        Hourly back-calculated series of the unit (UTC index; SI columns ``activity``
        [-], ``steady`` [bool], ``production`` [mol/s], ``feed_flow`` [m^3/s],
        ``temperature`` [K], ``volume`` [m^3]).
    model : UnitModel
        The unit.
    events : sequence of timestamps
        Known catalyst changes: the trend restarts there, and the step detector and the EWMA
        and CUSUM charts start afresh there instead of signalling on them.
    plan_feed_flow : float, optional
        Plan feed flow [m^3/s] for the gap attribution; default: the expected yield
        is the fresh-catalyst model's at the present operating point, and the plan
        feed is target / (expected yield x C_A0).
    feed_conc : dict, optional
        Feed composition of the steady-state model used by the expected yield, the activity
        needed, the forecast and the what-if (species -> [mol/m^3]); default ``model.feed``
        (the specification). The daily check passes the reconciled analysed feed where there is one.
    key_feed_conc : float or Series, optional
        Key-reactant feed concentration [mol/m^3]; default the configured feed.
    valid : Series of bool, optional
        Rows good enough for production accounting.
    volume_limits : tuple, optional
        Safe hold-up range [m^3] for the residence-time what-if.
    arl0 : float
        In-control average run length of the residual charts (EWMA and CUSUM on the
        AR(1) innovations of the trend residuals). [observations]
    min_step : float
        Smallest sudden change of activity reported as a step. [-]
    tz, day_start : str
        Site time zone and start of the production day.
    horizon_days : float
        Forecast horizon. [d]
    operating_hours : int
        Hours at the end of the series whose (steady) median is the present operating point.
    operating_point : dict, optional
        A planned operating point instead (``feed_flow`` [m^3/s], ``temperature`` [K],
        ``volume`` [m^3]; keys not given keep their present values) for the
        activity needed, the forecast and the what-if.
    open_for : str
        How long an alarm stays open after detection (pandas Timedelta string).
    decay_method : str
        Decay law of the trend (``"auto"``: chosen by AICc; the daily check passes the family
        its joint calibration chose, so that one model is used throughout).

    Returns
    -------
    UnitAssessment

    References
    ----------
    See the modules of each step: :mod:`.decay`, :mod:`.charts`, :mod:`.steps`,
    :mod:`.production`, :mod:`.forecast`, :mod:`.whatif`.

    Examples
    --------
    An invented first-order unit, 30 days of hourly data, activity falling 0.7 %/day:

    >>> import numpy as np, pandas as pd
    >>> from kinetrace.config.model import RateLawModel, UnitModel
    >>> from kinetrace.monitor.whatif import production_at
    >>> law = RateLawModel("power_law", 0.01, 60e3, 350.0, {"orders": {"A": 1.0}})
    >>> unit = UnitModel("R-7", ("A", "P"), np.array([0.1, 0.1]), ("r1",), np.array([[-1.0], [1.0]]),
    ...     {"r1": law}, "A", "P", 0.7, 0.4, None, {"A": 1000.0}, (), (330.0, 370.0), (1e-4, 2e-3))
    >>> t = pd.date_range("2027-01-01", periods=24 * 30, freq="h", tz="UTC")
    >>> a = 0.98 * np.exp(-0.007 * np.arange(t.size) / 24)
    >>> s = pd.DataFrame({"activity": a + np.random.default_rng(0).normal(0, 0.01, t.size),
    ...                   "steady": True, "feed_flow": 1e-3, "temperature": 350.0, "volume": 0.4}, index=t)
    >>> s["production"] = production_at(unit, activity=a, feed_flow=1e-3, temperature=350.0, volume=0.4)
    >>> res = assess_unit(s, unit)
    >>> res.problems, res.forecast.status, len(res.daily_rows())
    ([], 'crossing', 30)
    >>> print(res.forecast.text[:62])
    At the present decline, unit R-7 falls below its target around
    """
    missing = [c for c in ("production", "feed_flow", "temperature", "volume") if c not in series]
    if missing:
        raise KinetraceError(f"unit {model.id}: back-calculated series lacks column(s) {missing}")
    problems: list[str] = []
    as_of = series.index[-1]
    op = _operating_point(series, operating_hours)
    if operating_point:
        unknown = sorted(set(operating_point) - {"feed_flow", "temperature", "volume"})
        if unknown:
            raise KinetraceError(f"operating_point keys must be feed_flow, temperature, volume; got {unknown}")
        op.update({k: float(v) for k, v in operating_point.items()})
    trend = None
    charts: list[ChartResult] = []
    alarms: list[Alarm] = []
    if "activity" in series and series["activity"].notna().sum() >= 10:
        steady = series["steady"].astype(bool) if "steady" in series else pd.Series(True, index=series.index)
        act = series["activity"].where(steady)
        try:
            trend = fit_activity_trend(act, events=events, method=decay_method)
        except KinetraceError as exc:
            problems.append(f"activity trend: {exc}")
        if act.notna().sum() >= 12:
            # a configured catalyst change is a known step: the windows restart there instead
            alarms += detect_steps(act.dropna(), name="activity", min_size=min_step, resets=events)
        if trend is not None and trend.residuals.notna().sum() >= 20:
            # hourly residuals are autocorrelated (feed wander, slow analyser drift): chart the AR(1)
            # innovations so that the in-control run length is the one the limits were set for
            try:
                inn, _ = ar1_innovations(trend.residuals.reindex(series.index), restarts=events)
                for func in (cusum_alarms, ewma_alarms):   # restarted at each configured catalyst change
                    res = func(inn.dropna(), mean=0.0, sigma=1.0, arl0=arl0, name="activity residual",
                               restarts=events)
                    charts.append(res)
                    alarms += res.alarms
            except KinetraceError as exc:
                problems.append(f"residual charts: {exc}")
    else:
        problems.append("activity trend: no activity column or fewer than 10 values")
    alarms.sort(key=lambda a: a.detected)
    c_key = model.feed.get(model.key_reactant) if key_feed_conc is None else key_feed_conc
    daily = pd.DataFrame()
    try:
        if plan_feed_flow is None:
            rx = unit_reactions(model, feed_conc=feed_conc)
            y_exp = float(rx.production(1.0, op["feed_flow"], op["temperature"], op["volume"])) / (
                op["feed_flow"] * rx.feed[model.key_reactant])
            plan = {"expected_yield": y_exp}
        else:
            plan = {"plan_feed_flow": plan_feed_flow}
        daily = attribute_shortfall(series["production"], series["feed_flow"], c_key, model.target_rate,
                                    valid=valid, tz=tz, day_start=day_start, **plan)
    except (KinetraceError, KeyError, ZeroDivisionError) as exc:
        problems.append(f"production against target: {exc}")
    forecast = None
    whatifs: list[WhatIf] = []
    if len(op) == 3 and all(np.isfinite(v) and v > 0 for v in op.values()):
        try:
            a_req = required_activity(model, feed_conc=feed_conc, **op)
            if trend is not None:
                forecast = forecast_crossing(trend, a_req, unit=model.id, now=as_of, horizon_days=horizon_days,
                                             tz=tz)
                a_now = forecast.activity_now
            else:
                a_now = float(series["activity"].dropna().iloc[-operating_hours:].median())
            if np.isfinite(a_now) and a_now > 0:
                whatifs = what_if(model, activity=a_now, volume_limits=volume_limits, feed_conc=feed_conc, **op)
        except KinetraceError as exc:
            problems.append(f"forecast / what-if: {exc}")
    else:
        problems.append(f"forecast / what-if: no valid operating point in the last {operating_hours} h ({op})")
    mm = float(model.molar_masses[model.product_index])
    return UnitAssessment(model.id, as_of, trend, charts, alarms, daily, op, forecast, whatifs, mm,
                          pd.Timedelta(open_for), problems)

