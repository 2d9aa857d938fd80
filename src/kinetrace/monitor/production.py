"""Production against target: totals per day and per shift, and where each day's gap came from.

Totals
------
Each row of the hourly series stands for the interval from its time stamp to
the next grid time (``step``, default the median spacing of the index). The
amount made in it is the production rate times ``step``. Rows without a
production value add nothing to ``produced``; the target of a period is the
target rate times the period's length, whether or not data exist.

Attribution of the gap
----------------------
The day's gap G = target - produced [mol] is split into four parts that add up
to G exactly (up to floating-point rounding), hour by hour:

* each row is *down* when its feed flow is below ``run_threshold`` times the plan
  feed flow; *poor* when it is flagged invalid or lacks the production rate, the
  feed flow or the key-reactant feed concentration; *running* otherwise;
* for a running row the product rate is written P = F * Y with F = Q C_A0 the
  molar feed rate of the key reactant [mol/s] and Y = P / F the product made per
  mole of key reactant fed [-] (Y = X S |nu_P / nu_A|: conversion times
  selectivity). The plan is F* Y* = target rate. The row's gap is split by the
  symmetric (Shapley) rule for a product of two factors:

      feed       = (F* - F) (Y* + Y) / 2
      conversion = (Y* - Y) (F* + F) / 2

  whose sum is exactly F* Y* - F Y, with no dependence on the order of the factors;
* a down row's gap (target share minus whatever was made) is *downtime*;
* a poor row's gap (target share minus the production recorded, if any), and
  the target share of any time with no row at all, is *data* (too poor to judge).

A negative part means that factor was better than plan and offset the others.
The plan is given either as a plan feed flow Q* [m^3/s] (then F* = Q* C_A0*, and
Y* = target / F*, the yield the target assumes), or as an expected yield Y*
[-] (e.g. from the fresh-catalyst model at design temperature; then F* =
target / Y*). ``plan_feed_conc`` C_A0* defaults to the median measured key
reactant feed concentration of the rows given.

References
----------
.. [1] Shapley, L. S. (1953). A value for n-person games. In: Contributions to
   the Theory of Games II, Annals of Mathematics Studies 28, 307-317.
.. [2] Ang, B. W. (2004). Decomposition analysis for policymaking in energy:
   which is the preferred method? Energy Policy 32(9), 1131-1139 (symmetric
   factor decomposition of a product, exact with no residual).
.. [3] Fogler, H. S. (2016). Elements of Chemical Reaction Engineering, 5th ed.,
   ch. 2 and 8 (conversion, selectivity, yield).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from kinetrace.errors import KinetraceError
from kinetrace.monitor._common import float_values, utc_index

__all__ = ["period_labels", "production_totals", "attribute_shortfall", "CAUSES"]

#: The causes a gap is split into, in column order.
CAUSES = ("feed", "conversion", "downtime", "data")


def _step(idx: pd.DatetimeIndex, step) -> pd.Timedelta:
    if step is not None:
        return pd.Timedelta(step)
    if len(idx) < 2:
        return pd.Timedelta(hours=1)
    return pd.Timedelta((idx[1:] - idx[:-1]).median())


def period_labels(
    index: pd.DatetimeIndex,
    *,
    period: str = "day",
    tz: str = "UTC",
    day_start: str = "00:00",
    shift_starts: tuple[str, ...] = ("06:00", "14:00", "22:00"),
) -> tuple[pd.DatetimeIndex, pd.DatetimeIndex]:
    """Start and end of the day or shift each time belongs to.

    Parameters
    ----------
    index : DatetimeIndex
        Times (UTC).
    period : {"day", "shift"}
        Production day (starting at ``day_start``) or shift.
    tz : str
        Site time zone in which the day and shift clock times are read.
    day_start : str
        Clock time a production day starts, "HH:MM".
    shift_starts : tuple of str
        Clock times the shifts start, "HH:MM", in increasing order.

    Returns
    -------
    (start, end) : tuple of DatetimeIndex
        Period bounds in ``tz``, one per time of ``index``.

    Examples
    --------
    >>> import pandas as pd
    >>> t = pd.DatetimeIndex(["2026-11-02 05:00", "2026-11-02 06:00"], tz="UTC")
    >>> start, end = period_labels(t, period="shift")
    >>> [f"{s:%d %H:%M}" for s in start], [f"{e:%d %H:%M}" for e in end]
    (['01 22:00', '02 06:00'], ['02 06:00', '02 14:00'])
    """
    if period not in ("day", "shift"):
        raise KinetraceError(f"period must be 'day' or 'shift', got {period!r}")
    starts = [day_start] if period == "day" else list(shift_starts)
    try:
        offs = pd.to_timedelta([s + ":00" if s.count(":") == 1 else s for s in starts])
    except (ValueError, AttributeError):
        raise KinetraceError(f"period start times must be 'HH:MM' strings, got {starts!r}") from None
    if not (offs.is_monotonic_increasing and offs.is_unique and offs[0] >= pd.Timedelta(0)
            and offs[-1] < pd.Timedelta(days=1)):
        raise KinetraceError(f"period start times must increase within one day, got {starts!r}")
    local = index.tz_convert(tz)
    midnight = local.normalize().tz_localize(None)
    clock = local.tz_localize(None) - midnight
    pos = offs.searchsorted(clock, side="right") - 1
    day = midnight - pd.to_timedelta(np.where(pos < 0, 1, 0), unit="D")
    pos = np.where(pos < 0, len(offs) - 1, pos)
    start = day + offs[pos]
    nxt = np.where(pos + 1 < len(offs), pos + 1, 0)
    end = day + offs[nxt] + pd.to_timedelta(np.where(pos + 1 < len(offs), 0, 1), unit="D")
    # a clock time that occurs twice (end of summer time) is read as the first (summer-time) one, one that
    # does not occur is moved forward: never NaT, so no row loses its period
    loc = lambda x: pd.DatetimeIndex(x).tz_localize(tz, ambiguous=np.ones(len(x), bool),  # noqa: E731
                                                      nonexistent="shift_forward")
    return loc(start), loc(end)


def production_totals(
    production: pd.Series,
    target_rate: float,
    *,
    period: str = "day",
    tz: str = "UTC",
    day_start: str = "00:00",
    shift_starts: tuple[str, ...] = ("06:00", "14:00", "22:00"),
    step=None,
) -> pd.DataFrame:
    """Amount made per day or shift against the target.

    Parameters
    ----------
    production : Series
        Product rate on a UTC DatetimeIndex. [mol/s] (or [kg/s]: the totals come
        out in the same amount unit)
    target_rate : float
        Target product rate. [mol/s] (same basis as ``production``)
    period, tz, day_start, shift_starts
        See :func:`period_labels`.
    step : str or Timedelta, optional
        Interval each row stands for; default the median spacing of the index.

    Returns
    -------
    DataFrame
        Index the period start (in ``tz``); columns ``end``, ``hours`` (period
        length), ``hours_with_data``, ``produced`` [mol], ``target`` [mol],
        ``gap`` = target - produced [mol], ``shortfall`` = max(gap, 0) [mol],
        ``ratio`` = produced / target [-].

    Examples
    --------
    >>> import pandas as pd
    >>> t = pd.date_range("2026-11-01", periods=48, freq="h", tz="UTC")
    >>> p = pd.Series(1.0, index=t)
    >>> tot = production_totals(p, 1.25)
    >>> tot["produced"].tolist(), tot["shortfall"].tolist()
    ([86400.0, 86400.0], [21600.0, 21600.0])
    """
    idx = utc_index(production, "production")
    if not (np.isfinite(target_rate) and target_rate >= 0):
        raise KinetraceError(f"target_rate must be a non-negative number [mol/s], got {target_rate!r}")
    dt = _step(idx, step).total_seconds()
    start, end = period_labels(idx, period=period, tz=tz, day_start=day_start, shift_starts=shift_starts)
    p = production.to_numpy(dtype=float, na_value=np.nan)
    frame = pd.DataFrame({"start": start, "end": end, "amount": np.where(np.isfinite(p), p * dt, 0.0),
                          "has": np.isfinite(p)})
    g = frame.groupby("start", sort=True)
    out = pd.DataFrame({"end": g["end"].first(), "produced": g["amount"].sum(),
                        "hours_with_data": g["has"].sum() * dt / 3600.0})
    out["hours"] = (out["end"] - out.index).dt.total_seconds() / 3600.0
    out["target"] = target_rate * out["hours"] * 3600.0
    out["gap"] = out["target"] - out["produced"]
    out["shortfall"] = out["gap"].clip(lower=0.0)
    with np.errstate(invalid="ignore", divide="ignore"):
        out["ratio"] = out["produced"] / out["target"]
    out.index.name = "start"
    return out[["end", "hours", "hours_with_data", "produced", "target", "gap", "shortfall", "ratio"]]


def attribute_shortfall(
    production: pd.Series,
    feed_flow: pd.Series,
    key_feed_conc,
    target_rate: float,
    *,
    plan_feed_flow: float | None = None,
    expected_yield: float | None = None,
    plan_feed_conc: float | None = None,
    valid: pd.Series | None = None,
    run_threshold: float = 0.05,
    period: str = "day",
    tz: str = "UTC",
    day_start: str = "00:00",
    shift_starts: tuple[str, ...] = ("06:00", "14:00", "22:00"),
    step=None,
) -> pd.DataFrame:
    """Split each period's production gap into feed, conversion, downtime and poor data (exactly).

    Parameters
    ----------
    production : Series
        Product rate on a UTC DatetimeIndex. [mol/s]
    feed_flow : Series
        Feed volumetric flow, same index. [m^3/s]
    key_feed_conc : float or Series
        Key-reactant concentration in the feed. [mol/m^3]
    target_rate : float
        Target product rate. [mol/s]
    plan_feed_flow : float, optional
        Plan feed flow Q*. [m^3/s] Give this or ``expected_yield``.
    expected_yield : float, optional
        Product per mole of key reactant fed that the plan expects, Y*. [-]
    plan_feed_conc : float, optional
        Plan key-reactant feed concentration. [mol/m^3] Default the median of
        ``key_feed_conc``.
    valid : Series of bool, optional
        Rows whose data are good enough (e.g. passed reconciliation); False rows are *poor*.
    run_threshold : float
        A row is *down* when its feed flow is below this fraction of the plan feed flow. [-]
    period, tz, day_start, shift_starts, step
        As in :func:`production_totals`.

    Returns
    -------
    DataFrame
        Index the period start; columns ``target``, ``produced``, ``gap`` [mol],
        ``feed``, ``conversion``, ``downtime``, ``data`` [mol] (summing to
        ``gap``), ``hours_running``, ``hours_down``, ``hours_poor``,
        ``hours_missing`` [h], and ``plan_feed_rate`` F* [mol/s] and
        ``plan_yield`` Y* [-] as attrs.

    References
    ----------
    .. [1] Shapley, L. S. (1953). Annals of Mathematics Studies 28, 307-317.
    .. [2] Ang, B. W. (2004). Energy Policy 32(9), 1131-1139.

    Examples
    --------
    One day at 80 % of plan feed with plan yield: the whole gap is feed.

    >>> import pandas as pd
    >>> t = pd.date_range("2026-11-01", periods=24, freq="h", tz="UTC")
    >>> q = pd.Series(0.8e-3, index=t)
    >>> p = q * 1000.0 * 0.5
    >>> att = attribute_shortfall(p, q, 1000.0, 0.5, plan_feed_flow=1e-3)
    >>> [round(float(att[c].iloc[0]), 6) for c in ("gap", "feed", "conversion", "downtime", "data")]
    [8640.0, 8640.0, 0.0, 0.0, 0.0]
    """
    idx = utc_index(production, "production")
    if not feed_flow.index.equals(production.index):
        raise KinetraceError("feed_flow must have the same time index as production")
    if (plan_feed_flow is None) == (expected_yield is None):
        raise KinetraceError("give exactly one of plan_feed_flow [m^3/s] and expected_yield [-]")
    if not (np.isfinite(target_rate) and target_rate > 0):
        raise KinetraceError(f"target_rate must be a positive number [mol/s], got {target_rate!r}")
    p = production.to_numpy(dtype=float, na_value=np.nan)
    q = feed_flow.to_numpy(dtype=float, na_value=np.nan)
    c = np.broadcast_to(float_values(key_feed_conc, "key_feed_conc"), p.shape).astype(float)
    if plan_feed_conc is None:
        finite = c[np.isfinite(c) & (c > 0)]
        if finite.size == 0:
            raise KinetraceError("key_feed_conc has no positive value; give plan_feed_conc [mol/m^3]")
        plan_feed_conc = float(np.median(finite))
    if plan_feed_flow is not None:
        if not plan_feed_flow > 0:
            raise KinetraceError(f"plan_feed_flow must be positive [m^3/s], got {plan_feed_flow!r}")
        f_star = float(plan_feed_flow) * plan_feed_conc
        y_star = target_rate / f_star
    else:
        if not expected_yield > 0:
            raise KinetraceError(f"expected_yield must be positive, got {expected_yield!r}")
        y_star = float(expected_yield)
        f_star = target_rate / y_star
        plan_feed_flow = f_star / plan_feed_conc
    dt = _step(idx, step).total_seconds()
    ok = np.ones(p.shape, bool) if valid is None else valid.reindex(idx, fill_value=False).to_numpy(dtype=bool)
    down = np.isfinite(q) & (q < run_threshold * plan_feed_flow)
    poor = ~down & (~ok | ~np.isfinite(p) | ~np.isfinite(q) | ~np.isfinite(c) | (c <= 0))
    running = ~down & ~poor
    made = np.where(np.isfinite(p), p, 0.0)
    t_row = target_rate * dt
    f = np.where(running, q * c, 0.0)
    y = np.where(running, made / np.where(running, f, 1.0), 0.0)
    parts = pd.DataFrame({
        "feed": np.where(running, (f_star - f) * (y_star + y) / 2.0 * dt, 0.0),
        "conversion": np.where(running, (y_star - y) * (f_star + f) / 2.0 * dt, 0.0),
        "downtime": np.where(down, t_row - made * dt, 0.0),
        "data": np.where(poor, t_row - made * dt, 0.0),
        "hours_running": running * dt / 3600.0,
        "hours_down": down * dt / 3600.0,
        "hours_poor": poor * dt / 3600.0,
        "produced": made * dt,
        "row_target": t_row,
    })
    start, end = period_labels(idx, period=period, tz=tz, day_start=day_start, shift_starts=shift_starts)
    parts["start"], parts["end"] = start, end
    g = parts.groupby("start", sort=True)
    out = g[["feed", "conversion", "downtime", "data", "hours_running", "hours_down", "hours_poor",
             "produced", "row_target"]].sum()
    hours = (g["end"].first() - out.index).dt.total_seconds() / 3600.0
    out["target"] = target_rate * hours * 3600.0
    absent = out["target"] - out["row_target"]  # time of the period with no row at all
    out["data"] = out["data"] + absent
    out["hours_missing"] = hours - out[["hours_running", "hours_down", "hours_poor"]].sum(axis=1)
    out["gap"] = out["target"] - out["produced"]
    out.index.name = "start"
    out = out[["target", "produced", "gap", *CAUSES, "hours_running", "hours_down", "hours_poor", "hours_missing"]]
    out.attrs.update(plan_feed_rate=f_star, plan_yield=y_star, plan_feed_flow=float(plan_feed_flow),
                     plan_feed_conc=float(plan_feed_conc))
    return out
