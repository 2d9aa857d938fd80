"""When will the unit stop making its target? Activity needed, and the date the trend crosses it.

The activity needed comes from the steady-state CSTR model of the unit
(:mod:`kinetrace.monitor._unit`): the catalyst activity multiplies the main
reaction's rate constant, other reactions with rate laws keep theirs.

* One reaction: the target fixes the extent and the conversion of the key
  reactant, X_req = -nu_A (target/Q - C_P0) / (nu_P C_A0); every rate law here is
  linear in k, so the design equation gives k_req = xi / (tau g(C_req, T)) exactly
  (:func:`kinetrace.kinetics.cstr.required_rate_constant`) and a_req = k_req / k_fresh(T).
* Several reactions: P(a) = target is solved for a by a bracketed root search
  (Brent) on the multi-reaction steady state.

Activity is as defined by Butt & Petersen (1988). No activity can meet a target
that needs complete conversion, a conversion beyond equilibrium, or more than
the feed can give.

The crossing date is the first time the fitted decay trend (and the ends of
its prediction band) fall below a_req, searched on an hourly grid from
``now`` to ``now + horizon``: the lower end of the band gives the earliest
date, the upper end the latest.

References
----------
.. [1] Fogler, H. S. (2016). Elements of Chemical Reaction Engineering, 5th ed.,
   ch. 5 (CSTR design equation) and ch. 10 (catalyst decay).
.. [2] Butt, J. B., Petersen, E. E. (1988). Activation, Deactivation, and
   Poisoning of Catalysts. Academic Press.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from kinetrace.config.model import UnitModel
from kinetrace.errors import KinetraceError
from kinetrace.monitor._common import as_array, as_result, format_day, format_range, utc_timestamp
from kinetrace.monitor._unit import unit_reactions
from kinetrace.monitor.trend import ActivityTrend

__all__ = ["required_activity", "Forecast", "forecast_crossing"]


def required_activity(
    model: UnitModel,
    *,
    feed_flow,
    temperature,
    volume,
    target_rate: float | None = None,
    feed_conc: dict | None = None,
    fresh_k_ref: float | None = None,
    yield_factor: float = 1.0,
):
    """Catalyst activity needed to make the target at a feed rate and temperature.

    Parameters
    ----------
    model : UnitModel
        The unit (reactions and rate laws, feed, target).
    feed_flow : float or array_like
        Feed flow, present or planned. [m^3/s]
    temperature : float or array_like
        Reactor temperature, present or planned. [K]
    volume : float or array_like
        Liquid volume. [m^3]
    target_rate : float, optional
        Product rate wanted. [mol/s] Default ``model.target_rate``.
    feed_conc : dict, optional
        Feed concentrations. [mol/m^3] Default ``model.feed``.
    fresh_k_ref : float, optional
        Fresh-catalyst k at the reference temperature [SI]; default the rate law's k_ref.
    yield_factor : float
        Fraction of the product formed that the model should count, for losses it
        does not carry (side reactions with a configured rate law are modelled). [-]

    Returns
    -------
    float, ndarray or Series
        Activity needed [-] (Series when an input is a Series): 0 where the feed alone meets the target, inf where
        no activity can (conversion 1 or equilibrium in the way), NaN for bad inputs.

    References
    ----------
    .. [1] Fogler, H. S. (2016). Elements of Chemical Reaction Engineering, 5th ed., ch. 5.

    Examples
    --------
    See :func:`kinetrace.monitor.whatif.production_at` for the round trip.
    """
    rx = unit_reactions(model, feed_conc=feed_conc, fresh_k_ref=fresh_k_ref, yield_factor=yield_factor)
    target = model.target_rate if target_rate is None else float(target_rate)
    a = rx.required_activity(*(as_array(v) for v in (feed_flow, temperature, volume)), target)
    return as_result(a, feed_flow, temperature, volume)


@dataclass(frozen=True)
class Forecast:
    """When the activity trend falls below the activity needed (see :func:`forecast_crossing`).

    Attributes
    ----------
    status : str
        ``crossing`` (found within the horizon), ``below_now``, ``beyond_horizon``,
        ``not_declining`` or ``unreachable`` (no activity meets the target).
    required_activity : float
        Activity needed. [-]
    activity_now : float
        Fitted activity at ``now``. [-]
    now : Timestamp
        Start of the forecast (UTC).
    central, earliest, latest : Timestamp or None
        Crossing of the fitted trend and of the lower and upper band ends
        (``latest`` None when the upper end stays above within the horizon).
    level : float
        Coverage of the band. [-]
    text : str
        The forecast in plain words.
    """

    status: str
    required_activity: float
    activity_now: float
    now: pd.Timestamp
    central: pd.Timestamp | None
    earliest: pd.Timestamp | None
    latest: pd.Timestamp | None
    level: float
    text: str


def _first_below(times: pd.DatetimeIndex, values: np.ndarray, limit: float):
    hit = np.flatnonzero(values < limit)
    return times[hit[0]] if hit.size else None


def forecast_crossing(
    trend: ActivityTrend,
    required: float,
    *,
    unit: str = "(unnamed)",
    now=None,
    horizon_days: float = 365.0,
    level: float = 0.95,
    band: str = "prediction",
    tz: str = "UTC",
) -> Forecast:
    """Date at which the fitted activity trend falls below the activity needed, with an interval.

    Parameters
    ----------
    trend : ActivityTrend
        Fitted decay of the current charge.
    required : float
        Activity needed (:func:`required_activity`). [-]
    unit : str
        Unit name used in the text.
    now : timestamp, optional
        Start of the search; default the trend's last observation (UTC).
    horizon_days : float
        How far ahead to look. [d]
    level : float
        Coverage of the band. [-]
    band : {"prediction", "confidence"}
        Band of :meth:`ActivityTrend.predict`.
    tz : str
        Time zone in which dates are written in the text.

    Returns
    -------
    Forecast

    References
    ----------
    .. [1] Seber, G. A. F., Wild, C. J. (1989). Nonlinear Regression. Wiley, sec. 5.1.

    Examples
    --------
    >>> import numpy as np, pandas as pd
    >>> from kinetrace.monitor.trend import fit_activity_trend
    >>> t = pd.date_range("2027-01-01", periods=24 * 30, freq="h", tz="UTC")
    >>> a = pd.Series(np.exp(-0.01 * np.arange(t.size) / 24.0), index=t)
    >>> a = a + np.random.default_rng(2).normal(0.0, 0.005, t.size)
    >>> trend = fit_activity_trend(a, method="exponential", detect_changes=False)
    >>> fc = forecast_crossing(trend, float(np.exp(-0.01 * 70)), unit="R-210")
    >>> true = pd.Timestamp("2027-01-01", tz="UTC") + pd.Timedelta(days=70)
    >>> fc.status, fc.earliest <= true <= fc.latest
    ('crossing', True)
    """
    if not 0 < level < 1:
        raise KinetraceError(f"level must be between 0 and 1, got {level!r}")
    if required is None or np.isnan(required):
        raise KinetraceError(f"unit {unit}: the activity needed is not known ({required!r}); check the operating "
                             "point (feed flow, temperature, volume) it was computed from")
    now = trend.last_observation if now is None else utc_timestamp(now, "now")
    grid = pd.date_range(now, now + pd.Timedelta(days=float(horizon_days)), freq="h")
    pred = trend.predict(grid, level=level, band=band)
    mean, lo, hi = (pred[c].to_numpy() for c in ("activity", "lower", "upper"))
    a_now = float(mean[0])
    pct = f"{level * 100:g} %"
    law = trend.fit.describe()
    local = lambda ts: ts.tz_convert(tz)  # noqa: E731
    if not np.isfinite(required):
        text = (f"No catalyst activity lets unit {unit} make its target at this feed rate and temperature: "
                "the target needs complete conversion or a conversion beyond equilibrium.")
        return Forecast("unreachable", float(required), a_now, now, None, None, None, level, text)
    if a_now < required:
        text = (f"Unit {unit} is already below the activity needed for its target at this feed rate and temperature "
                f"(needed {required:.3f}, fitted today {a_now:.3f}).")
        return Forecast("below_now", float(required), a_now, now, now, now, now, level, text)
    central = _first_below(grid, mean, required)
    earliest = _first_below(grid, lo, required)
    latest = _first_below(grid, hi, required)
    end = grid[-1]
    if central is None:
        declining = mean[-1] < mean[0] - 1e-12
        status = "beyond_horizon" if declining else "not_declining"
        text = (f"At the present trend ({law}) unit {unit} stays above the activity needed for its target "
                f"({required:.3f}; fitted today {a_now:.3f}) until at least {format_day(local(end))}"
                + (f"; the {pct} band allows a fall below it from {format_day(local(earliest))}."
                   if earliest is not None else "."))
        return Forecast(status, float(required), a_now, now, None, earliest, latest, level, text)
    lo_t = earliest if earliest is not None else now
    if latest is not None:
        window = format_range(local(lo_t), local(latest))
        when_text = f"around {window}"
    else:
        when_text = f"from about {format_day(local(lo_t))} (the band's upper end stays above it until " \
                    f"{format_day(local(end))})"
    text = (f"At the present decline, unit {unit} falls below its target {when_text}; central estimate "
            f"{format_day(local(central))} ({pct} band; {law}; activity needed {required:.3f}, fitted today "
            f"{a_now:.3f}).")
    return Forecast("crossing", float(required), a_now, now, central, earliest, latest, level, text)
