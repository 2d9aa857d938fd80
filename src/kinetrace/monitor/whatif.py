"""What would restore the target at today's activity, searched only inside the safe limits.

Three levers, one at a time, the others held at their present values:

``temperature``     reactor temperature, inside ``UnitModel.temperature_limits`` [K]
``feed_flow``       feed flow, inside ``UnitModel.feed_flow_limits`` [m^3/s]
``residence_time``  hold-up V at the present feed flow (tau = V / Q), inside
                    ``volume_limits`` [m^3] given by the caller (e.g. from the
                    configured level limits and the level-volume table)

Production at a setting comes from the steady-state CSTR model of the unit, the
main reaction at k = a k_fresh(T) and any side reactions at their configured
constants (:mod:`kinetrace.monitor._unit`, :mod:`kinetrace.kinetics.cstr`).
The search evaluates production on a grid spanning the safe range only, takes
the lowest setting whose production reaches the target and refines it by
Brent's method between grid points; it never evaluates, let alone returns, a
setting outside the range. When no setting in the range reaches the target,
the result says so and gives the best production the range allows. Every
result carries :data:`~kinetrace.monitor._common.CAUTIONS`.

:func:`predict_setting` evaluates one setting of all three levers (conversion,
production, margin to each limit) with the same model, for the dashboard's
interactive what-if; it refuses a setting outside the safe ranges.
:func:`model_from_parameters` rebuilds the unit as a check used it from the
parameters that check stored.

Caution
-------
Estimates only. A higher temperature or throughput changes heat release,
pressure and by-products; any change must be checked against the unit's safe
operating envelope, relief and runaway studies and site management of change,
and defers to site procedures, local codes and licensed engineering practice.

References
----------
.. [1] Fogler, H. S. (2016). Elements of Chemical Reaction Engineering, 5th ed., ch. 5.
.. [2] Brent, R. P. (1973). Algorithms for Minimization without Derivatives.
   Prentice Hall, ch. 4.
"""

from __future__ import annotations

import dataclasses
import re
from dataclasses import dataclass

import numpy as np
from scipy import optimize

from kinetrace.config.model import UnitModel
from kinetrace.errors import KinetraceError
from kinetrace.units import display
from kinetrace.monitor._common import CAUTIONS, as_array, as_result
from kinetrace.monitor._unit import UnitReactions, unit_reactions

__all__ = [
    "WhatIf",
    "SettingPrediction",
    "CAUTIONS",
    "model_from_parameters",
    "predict_setting",
    "safe_ranges",
    "list_levers",
    "production_at",
    "safe_hold_up",
    "what_if",
    "volume_limits_from_level",
]

_LEVERS = {
    "temperature": ("K", "reactor temperature"),
    "feed_flow": ("m3/s", "feed flow"),
    "residence_time": ("s", "residence time"),
}


def list_levers() -> list[str]:
    """Levers :func:`what_if` can search.

    Examples
    --------
    >>> list_levers()
    ['temperature', 'feed_flow', 'residence_time']
    """
    return list(_LEVERS)


@dataclass(frozen=True)
class WhatIf:
    """The setting of one lever that would restore the target (see :func:`what_if`).

    Attributes
    ----------
    lever : str
        ``temperature``, ``feed_flow`` or ``residence_time``.
    feasible : bool
        True when a setting inside the safe limits reaches the target.
    setting : float or None
        That setting [K, m^3/s or s]; None when not feasible. Always inside ``limits``.
    unit : str
        Unit of ``setting``, ``current`` and ``limits``.
    current : float
        Present value of the lever.
    limits : tuple of float
        Safe range searched.
    production : float
        Predicted product rate at ``setting``, or the best inside the limits
        when not feasible. [mol/s]
    target : float
        Product rate wanted. [mol/s]
    message : str
        The result in plain words.
    volume : float or None
        Hold-up for the ``residence_time`` lever. [m^3]
    cautions : str
        Standard cautions; always shown with the result.
    """

    lever: str
    feasible: bool
    setting: float | None
    unit: str
    current: float
    limits: tuple[float, float]
    production: float
    target: float
    message: str
    volume: float | None = None
    cautions: str = CAUTIONS


def production_at(
    model: UnitModel,
    *,
    activity,
    feed_flow,
    temperature,
    volume,
    feed_conc: dict | None = None,
    fresh_k_ref: float | None = None,
    yield_factor: float = 1.0,
):
    """Steady-state product rate of the unit's CSTR model.

    Parameters
    ----------
    model : UnitModel
        The unit.
    activity : float or array_like
        Catalyst activity. [-]
    feed_flow : float or array_like
        Feed flow. [m^3/s]
    temperature : float or array_like
        Reactor temperature. [K]
    volume : float or array_like
        Liquid volume. [m^3]
    feed_conc, fresh_k_ref, yield_factor
        As in :func:`kinetrace.monitor.forecast.required_activity`.

    Returns
    -------
    float, ndarray or Series
        Product rate [mol/s]: a float for scalars, a Series (same index) when an
        input is a Series, NaN where an input is NaN.

    References
    ----------
    .. [1] Fogler, H. S. (2016). Elements of Chemical Reaction Engineering, 5th ed., ch. 5.

    Examples
    --------
    A first-order unit: k tau = 4 at full activity gives X = 0.8; the activity
    needed for X = 0.5 is 1/4 (k tau = 1).

    >>> import numpy as np
    >>> from kinetrace.config.model import RateLawModel, UnitModel
    >>> law = RateLawModel("power_law", 0.01, 60e3, 350.0, {"orders": {"A": 1.0}})
    >>> m = UnitModel("R-1", ("A", "P"), np.array([0.1, 0.1]), ("r1",), np.array([[-1.0], [1.0]]),
    ...     {"r1": law}, "A", "P", 0.5, 0.4, None, {"A": 1000.0}, (), (330.0, 370.0), (1e-4, 2e-3))
    >>> round(float(production_at(m, activity=1.0, feed_flow=1e-3, temperature=350.0, volume=0.4)), 6)
    0.8
    >>> from kinetrace.monitor.forecast import required_activity
    >>> round(required_activity(m, feed_flow=1e-3, temperature=350.0, volume=0.4), 6)
    0.25
    """
    rx = unit_reactions(model, feed_conc=feed_conc, fresh_k_ref=fresh_k_ref, yield_factor=yield_factor)
    p = rx.production(*(as_array(v) for v in (activity, feed_flow, temperature, volume)))
    return as_result(p, activity, feed_flow, temperature, volume)


def volume_limits_from_level(model: UnitModel, level_limits) -> tuple[float, float]:
    """Hold-up range from level limits and the unit's level-volume table.

    Parameters
    ----------
    model : UnitModel
        The unit (``level_table``: level fraction, volume [m^3]).
    level_limits : tuple of float
        Lowest and highest safe level. [% of span, as in the configuration]

    Returns
    -------
    tuple of float
        (V_min, V_max). [m^3]
    """
    if model.level_table is None:
        raise KinetraceError(f"unit {model.id}: no level-volume table; give volume limits in m^3 instead")
    lo, hi = (float(v) / 100.0 for v in level_limits)
    if not 0.0 <= lo < hi <= 1.0:
        raise KinetraceError(f"level limits must satisfy 0 <= low < high <= 100 %, got {level_limits!r}")
    table = model.level_table
    return float(np.interp(lo, table[:, 0], table[:, 1])), float(np.interp(hi, table[:, 0], table[:, 1]))


def safe_hold_up(model: UnitModel, level_limits) -> tuple[float, float] | None:
    """Safe hold-up range [m^3]: from the level limits and table, (V, V) for a fixed volume, else None.

    ``level_limits`` [% of span] as in the configuration, or None (see :func:`volume_limits_from_level`).
    """
    if model.level_table is not None and level_limits is not None:
        return volume_limits_from_level(model, level_limits)
    return None if model.fixed_volume is None else (model.fixed_volume, model.fixed_volume)


def _check_limits(limits, name: str) -> tuple[float, float]:
    try:
        lo, hi = (float(v) for v in limits)
    except (TypeError, ValueError):
        raise KinetraceError(f"{name} must be a pair (low, high), got {limits!r}") from None
    if not (np.isfinite(lo) and np.isfinite(hi) and 0.0 < lo <= hi):
        raise KinetraceError(f"{name} must satisfy 0 < low <= high, got {limits!r}")
    return lo, hi


def _search(prod, lo: float, hi: float, target: float, n_grid: int = 129):
    """Lowest x in [lo, hi] with prod(x) >= target (to a relative 1e-10), or (None, best production)."""
    grid = np.linspace(lo, hi, n_grid) if hi > lo else np.array([lo])
    p = np.asarray(prod(grid), dtype=float)
    ok = np.isfinite(p) & (p >= target)
    if not ok.any():
        return None, float(np.nanmax(p)) if np.isfinite(p).any() else float("nan")
    i = int(np.argmax(ok))
    if i == 0:
        return float(grid[0]), float(p[0])
    a, b = float(grid[i - 1]), float(grid[i])
    f = lambda x: float(np.asarray(prod(np.array([x])))[0]) - target  # noqa: E731
    try:
        x = optimize.brentq(f, a, b, xtol=1e-12 * max(abs(b), 1.0), rtol=1e-12)
    except ValueError:
        x = b
    if f(x) < -1e-10 * max(abs(target), 1e-300):  # not met even to rounding: take the grid point that is
        x = b
    x = min(max(x, lo), hi)
    return x, float(prod(np.array([x]))[0])


def _message(lever: str, feasible: bool, setting, current, limits, unit, production, target, already, extra="",
             show: dict | None = None):
    name = _LEVERS[lever][1]
    to = (show or {}).get(unit)
    rng = f"{display(limits[0], unit, to)} to {display(limits[1], unit, to)}"
    if already:
        return (f"The unit meets its target at the present {name} ({display(current, unit, to)}); no change is "
                "needed. " + extra).strip()
    if feasible:
        return (f"At today's activity, a {name} of about {display(setting, unit, to)} (now {display(current, unit, to)}) would "
                f"restore the target, predicted {display(production, 'mol/s')} against {display(target, 'mol/s')}; "
                f"this is inside the configured safe range {rng}. " + extra).strip()
    return (f"No {name} inside the configured safe range {rng} restores the target at today's activity: the most "
            f"the model predicts there is {display(production, 'mol/s')} against {display(target, 'mol/s')}. "
            + extra).strip()


def _lever_result(rx: UnitReactions, lever, *, activity, feed_flow, temperature, volume, target, limits, show=None):
    if lever == "temperature":
        current = temperature
        prod = lambda x: rx.production(activity, feed_flow, x, volume)  # noqa: E731
        unit = "K"
    elif lever == "feed_flow":
        current = feed_flow
        prod = lambda x: rx.production(activity, x, temperature, volume)  # noqa: E731
        unit = "m3/s"
    else:
        current = volume / feed_flow
        prod = lambda x: rx.production(activity, feed_flow, temperature, x * feed_flow)  # noqa: E731
        unit = "s"
    lo, hi = limits
    now = float(np.asarray(prod(np.array([current])))[0])
    inside = lo <= current <= hi
    extra = {"feed_flow": "A higher feed lowers conversion and sends more unconverted reactant downstream.",
             "temperature": "A higher temperature raises heat release and may favour side reactions.",
             "residence_time": ""}[lever]
    if inside and np.isfinite(now) and now >= target:
        setting, p, already = float(current), now, True
    else:
        setting, p = _search(prod, lo, hi, target)
        already = False
    feasible = setting is not None
    if feasible and not lo <= setting <= hi:  # the search cannot leave the range; refuse if it ever did
        raise KinetraceError(f"internal error: {lever} setting {setting} outside the safe range {limits}")
    msg = _message(lever, feasible, setting, float(current), (lo, hi), unit, p, target, already, extra, show)
    vol = None if lever != "residence_time" or setting is None else float(setting * feed_flow)
    return WhatIf(lever, feasible, setting, unit, float(current), (lo, hi), p, float(target), msg, vol)


def what_if(
    model: UnitModel,
    *,
    activity: float,
    feed_flow: float,
    temperature: float,
    volume: float,
    volume_limits: tuple[float, float] | None = None,
    levers=("temperature", "feed_flow", "residence_time"),
    target_rate: float | None = None,
    feed_conc: dict | None = None,
    fresh_k_ref: float | None = None,
    yield_factor: float = 1.0,
) -> list[WhatIf]:
    """Settings of temperature, feed flow or residence time that restore the target, inside the safe limits.

    Parameters
    ----------
    model : UnitModel
        The unit; ``temperature_limits`` [K] and ``feed_flow_limits`` [m^3/s] bound the search.
    activity : float
        Today's catalyst activity. [-]
    feed_flow : float
        Present feed flow. [m^3/s]
    temperature : float
        Present reactor temperature. [K]
    volume : float
        Present liquid volume. [m^3]
    volume_limits : tuple of float, optional
        Safe hold-up range for the residence-time lever [m^3] (see
        :func:`volume_limits_from_level`); without it that lever is not searched
        and the result says so.
    levers : sequence of str
        Levers to search (see :func:`list_levers`).
    target_rate : float, optional
        Product rate wanted [mol/s]; default ``model.target_rate``.
    feed_conc, fresh_k_ref, yield_factor
        As in :func:`kinetrace.monitor.forecast.required_activity`.

    Returns
    -------
    list of WhatIf
        One per lever, each with the standard cautions.

    References
    ----------
    .. [1] Fogler, H. S. (2016). Elements of Chemical Reaction Engineering, 5th ed., ch. 5.

    Examples
    --------
    >>> import numpy as np
    >>> from kinetrace.config.model import RateLawModel, UnitModel
    >>> law = RateLawModel("power_law", 0.01, 60e3, 350.0, {"orders": {"A": 1.0}})
    >>> m = UnitModel("R-1", ("A", "P"), np.array([0.1, 0.1]), ("r1",), np.array([[-1.0], [1.0]]),
    ...     {"r1": law}, "A", "P", 0.8, 0.4, None, {"A": 1000.0}, (), (330.0, 370.0), (1e-4, 2e-3))
    >>> res = what_if(m, activity=0.5, feed_flow=1e-3, temperature=350.0, volume=0.4, levers=["temperature"])
    >>> res[0].feasible, 350.0 < res[0].setting <= 370.0, "management of change" in res[0].cautions
    (True, True, True)
    """
    rx = unit_reactions(model, feed_conc=feed_conc, fresh_k_ref=fresh_k_ref, yield_factor=yield_factor)
    target = model.target_rate if target_rate is None else float(target_rate)
    for name, v in (("activity", activity), ("feed_flow", feed_flow), ("temperature", temperature),
                    ("volume", volume)):
        if not (np.isfinite(v) and v > 0):
            raise KinetraceError(f"what-if for unit {model.id}: {name} must be a positive number, got {v!r}")
    out = []
    for lever in levers:
        if lever not in _LEVERS:
            raise KinetraceError(f"unknown lever {lever!r}; allowed: {', '.join(_LEVERS)}")
        kw = dict(activity=activity, feed_flow=feed_flow, temperature=temperature, volume=volume, target=target)
        if lever == "temperature":
            limits = _check_limits(model.temperature_limits, f"unit {model.id} temperature_limits")
        elif lever == "feed_flow":
            limits = _check_limits(model.feed_flow_limits, f"unit {model.id} feed_flow_limits")
        else:
            if volume_limits is None:
                out.append(WhatIf(lever, False, None, "s", volume / feed_flow, (np.nan, np.nan), float("nan"),
                                  target, "Residence time was not searched: no safe hold-up (level) limits were "
                                  "given. Change of residence time through the feed flow is covered by the "
                                  "feed-flow result."))
                continue
            v_lo, v_hi = _check_limits(volume_limits, f"unit {model.id} volume_limits")
            limits = (v_lo / feed_flow, v_hi / feed_flow)
        out.append(_lever_result(rx, lever, limits=limits, show=model.display_units, **kw))
    return out


@dataclass(frozen=True)
class SettingPrediction:
    """The model's prediction at one setting inside the safe limits (see :func:`predict_setting`).

    Attributes
    ----------
    temperature, feed_flow, residence_time, volume : float
        The setting. [K], [m^3/s], [s], [m^3] (volume = residence time x feed flow)
    conversion : float
        Conversion of the key reactant. [-]
    production : float
        Product rate. [mol/s]
    production_mass : float
        Product rate. [kg/s]
    target : float
        Product rate wanted. [mol/s]
    limits : dict
        ``lever -> (low, high)``: the safe range of each lever at this setting; the residence
        time range is the hold-up range divided by this feed flow. [K], [m^3/s], [s]
    margins : dict
        ``lever -> (above low, below high)``: distance of the setting to each limit, never
        negative. [unit of the lever]
    cautions : str
        Standard cautions; always shown with the result.
    """

    temperature: float
    feed_flow: float
    residence_time: float
    volume: float
    conversion: float
    production: float
    production_mass: float
    target: float
    limits: dict
    margins: dict
    cautions: str = CAUTIONS


def safe_ranges(model: UnitModel, *, feed_flow: float, volume_limits) -> dict[str, tuple[float, float]]:
    """Safe range of each lever: the configured temperature and feed-flow limits, and the residence
    times the safe hold-up range allows at ``feed_flow`` (tau = V / Q).

    Parameters
    ----------
    model : UnitModel
    feed_flow : float
        Feed flow of the setting. [m^3/s]
    volume_limits : tuple of float
        Safe hold-up range. [m^3]

    Returns
    -------
    dict
        ``temperature`` [K], ``feed_flow`` [m^3/s], ``residence_time`` [s] -> (low, high).
    """
    t = _check_limits(model.temperature_limits, f"unit {model.id} temperature_limits")
    q = _check_limits(model.feed_flow_limits, f"unit {model.id} feed_flow_limits")
    v = _check_limits(volume_limits, f"unit {model.id} volume_limits")
    if not (np.isfinite(feed_flow) and feed_flow > 0):
        raise KinetraceError(f"unit {model.id}: feed flow must be a positive number, got {feed_flow!r}")
    return {"temperature": t, "feed_flow": q, "residence_time": (v[0] / feed_flow, v[1] / feed_flow)}


def predict_setting(
    model: UnitModel,
    *,
    activity: float,
    temperature: float,
    feed_flow: float,
    residence_time: float,
    volume_limits,
    target_rate: float | None = None,
    feed_conc: dict | None = None,
    fresh_k_ref: float | None = None,
    yield_factor: float = 1.0,
    rel_tol: float = 1e-9,
) -> SettingPrediction:
    """Conversion, production and margin to each safe limit at one setting of the three levers.

    The same steady-state CSTR model as :func:`what_if` and :func:`production_at`. A setting
    outside the safe limits is refused (never evaluated); ``rel_tol`` only absorbs the rounding
    of a setting taken from a limit shown in display units.

    Parameters
    ----------
    model : UnitModel
        The unit, with the rate-law parameters the check used (:func:`model_from_parameters`).
    activity : float
        Catalyst activity. [-]
    temperature : float
        Reactor temperature. [K]
    feed_flow : float
        Feed flow. [m^3/s]
    residence_time : float
        Residence time V / Q. [s]
    volume_limits : tuple of float
        Safe hold-up range. [m^3]
    target_rate : float, optional
        Product rate wanted [mol/s]; default ``model.target_rate``.
    feed_conc, fresh_k_ref, yield_factor
        As in :func:`kinetrace.monitor.forecast.required_activity`.

    Returns
    -------
    SettingPrediction

    Raises
    ------
    KinetraceError
        A setting outside its safe range (naming the lever, the value and the range), or a
        non-positive input.

    References
    ----------
    .. [1] Fogler, H. S. (2016). Elements of Chemical Reaction Engineering, 5th ed., ch. 5.

    Examples
    --------
    A first-order unit at k tau = 4 converts 80 % (X = k tau / (1 + k tau)):

    >>> import numpy as np
    >>> from kinetrace.config.model import RateLawModel, UnitModel
    >>> law = RateLawModel("power_law", 0.01, 60e3, 350.0, {"orders": {"A": 1.0}})
    >>> m = UnitModel("R-1", ("A", "P"), np.array([0.1, 0.1]), ("r1",), np.array([[-1.0], [1.0]]),
    ...     {"r1": law}, "A", "P", 0.5, 0.4, None, {"A": 1000.0}, (), (330.0, 370.0), (1e-4, 2e-3))
    >>> p = predict_setting(m, activity=1.0, temperature=350.0, feed_flow=1e-3, residence_time=400.0,
    ...                     volume_limits=(0.2, 0.6))
    >>> round(p.conversion, 6), round(p.production, 6), p.margins["temperature"]
    (0.8, 0.8, (20.0, 20.0))
    >>> predict_setting(m, activity=1.0, temperature=375.0, feed_flow=1e-3, residence_time=400.0,
    ...                 volume_limits=(0.2, 0.6))
    Traceback (most recent call last):
    ...
    kinetrace.errors.KinetraceError: unit R-1: reactor temperature 375 K is outside the safe range 330 to 370 K; settings outside the configured safe limits are never evaluated
    """
    for name, v in (("activity", activity), ("temperature", temperature), ("feed_flow", feed_flow),
                    ("residence_time", residence_time)):
        if not (np.isfinite(v) and v > 0):
            raise KinetraceError(f"unit {model.id}: {name} must be a positive number, got {v!r}")
    ranges = safe_ranges(model, feed_flow=feed_flow, volume_limits=volume_limits)
    setting = {"temperature": float(temperature), "feed_flow": float(feed_flow),
               "residence_time": float(residence_time)}
    margins = {}
    for lever, (lo, hi) in ranges.items():
        x, slack = setting[lever], rel_tol * max(abs(lo), abs(hi))
        if not lo - slack <= x <= hi + slack:
            unit = _LEVERS[lever][0]
            raise KinetraceError(f"unit {model.id}: {_LEVERS[lever][1]} {x:.6g} {unit} is outside the safe range "
                                 f"{lo:.6g} to {hi:.6g} {unit}; settings outside the configured safe limits are "
                                 "never evaluated")
        margins[lever] = (max(x - lo, 0.0), max(hi - x, 0.0))
    volume = setting["residence_time"] * setting["feed_flow"]
    rx = unit_reactions(model, feed_conc=feed_conc, fresh_k_ref=fresh_k_ref, yield_factor=yield_factor)
    args = (np.array([float(activity)]), np.array([setting["feed_flow"]]), np.array([setting["temperature"]]),
            np.array([volume]))
    production = float(np.asarray(rx.production(*args))[0])
    conversion = float(np.asarray(rx.key_conversion(*args))[0])
    mm = float(model.molar_masses[model.product_index])
    target = model.target_rate if target_rate is None else float(target_rate)
    return SettingPrediction(setting["temperature"], setting["feed_flow"], setting["residence_time"], volume,
                             conversion, production, production * mm, float(target), ranges, margins)


_PARAM = re.compile(r"(k_ref_fitted|activation_energy|K_(?P<ks>[^:]+)|order_(?P<os>[^:]+)):(?P<rid>.+)")


def model_from_parameters(model: UnitModel, parameters) -> UnitModel:
    """The unit with the rate-law parameters a check stored, as that check's forecast and what-if used them.

    When the stored ``parameter_set`` row says the run fitted its parameters (value 1), each
    ``k_ref_fitted:<reaction>``, ``activation_energy:<reaction>``, ``K_<species>:<reaction>`` and
    ``order_<species>:<reaction>`` row replaces the configured value (the same replacement as the
    check's calibration step, :func:`kinetrace.pipeline.calibration_step.fitted_model`); otherwise
    the configured unit is returned unchanged.

    Parameters
    ----------
    model : UnitModel
        The configured unit.
    parameters : DataFrame
        Stored parameter rows of the unit (``name``, ``value``), newest run. [SI]

    Returns
    -------
    UnitModel
    """
    rows = dict(zip(parameters["name"], parameters["value"])) if len(parameters) else {}
    if rows.get("parameter_set") != 1.0:
        return model
    laws = {rid: dataclasses.replace(law, params={k: (dict(v) if isinstance(v, dict) else v)
                                                  for k, v in law.params.items()})
            for rid, law in model.rate_laws.items()}
    for name, value in rows.items():
        m = _PARAM.fullmatch(str(name))
        if m is None or m.group("rid") not in laws or not np.isfinite(value):
            continue
        rid = m.group("rid")
        law = laws[rid]
        if name.startswith("k_ref_fitted:"):
            laws[rid] = dataclasses.replace(law, k_ref=float(value), source="fitted")
        elif name.startswith("activation_energy:"):
            laws[rid] = dataclasses.replace(law, activation_energy=float(value), source="fitted")
        elif m.group("ks") and m.group("ks") in (law.params.get("adsorption") or {}):
            law.params["adsorption"][m.group("ks")] = float(value)
        elif m.group("os") and m.group("os") in (law.params.get("orders") or {}):
            law.params["orders"][m.group("os")] = float(value)
    return dataclasses.replace(model, rate_laws=laws)
