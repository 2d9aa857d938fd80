"""One configured unit run through its scenario plan: segments, feed wander, ground truth.

:func:`simulate_unit` turns a :class:`kinetrace.config.UnitModel` and a
:class:`~kinetrace.simulator.scenario.UnitPlan` into the true trajectory of the
unit on the 1-minute grid, as a DataFrame of SI columns (see
:data:`TRUTH_COLUMNS`). The run starts from the steady state at the first
operating point with fresh catalyst.

References
----------
.. [1] Uhlenbeck, G. E., Ornstein, L. S. (1930). On the theory of the Brownian motion.
   Phys. Rev. 36, 823-841 (the mean-reverting feed composition wander, sampled exactly
   at the knots).
.. [2] Levenspiel, O. (1999). Chemical Reaction Engineering, 3rd ed., ch. 21 (a = exp(-kd t)).
"""

from __future__ import annotations

import math
import zlib

import numpy as np
import pandas as pd

from ..errors import KinetraceError
from .cstr import CstrRun, FeedProfile, LevelControl, Segment, integrate_cstr
from .ratelaws import Kinetics

#: Ground-truth columns and their units ({S}: species, {R}: reaction id).
TRUTH_COLUMNS: dict[str, str] = {
    "timestamp": "UTC",
    "running": "bool (False while the feed is stopped)",
    "feed_flow": "m^3/s",
    "outlet_flow": "m^3/s",
    "volume": "m^3",
    "level": "- (fraction of span; NaN for a fixed-volume unit)",
    "temperature": "K",
    "temperature_setpoint": "K",
    "conc_{S}": "mol/m^3 (in the reactor and outlet)",
    "feed_conc_{S}": "mol/m^3",
    "activity": "- (catalyst activity a = exp(-kd t))",
    "k_ref_{R}": "(mol/m^3)^(1-n)/s (rate constant at T_ref, times activity if catalysed)",
    "rate_{R}": "mol/(m^3 s)",
    "conversion": "- (1 - C_key / C_key,in)",
    "product_rate": "mol/s (Q_out C_product)",
}


def rng_for(seed: int, *names: str) -> np.random.Generator:
    """A random generator fixed by the seed and a tuple of names (stable across runs and platforms).

    >>> float(rng_for(1, "a").random()) == float(rng_for(1, "a").random())
    True
    """
    return np.random.default_rng([int(seed)] + [zlib.crc32(n.encode()) for n in names])


def feed_profile(model, plan, duration: float, seed: int) -> FeedProfile:
    """Feed composition wandering about the configured feed: C_in = C_spec (1 + x(t)).

    Each species with a non-zero feed gets its own Ornstein-Uhlenbeck deviation x(t),
    stationary std ``plan.feed_wander_sigma`` and correlation time ``plan.feed_wander_time``,
    sampled exactly at knots ``plan.feed_knot_spacing`` apart and joined by a cubic spline.

    Parameters
    ----------
    model : UnitModel
    plan : UnitPlan
    duration : float
        Run length. [s]
    seed : int

    Returns
    -------
    FeedProfile
        [mol/m^3]
    """
    nominal = np.array([plan.extra_feed.get(s, model.feed.get(s, 0.0)) for s in model.species])
    n_knots = int(math.ceil(duration / plan.feed_knot_spacing)) + 2
    phi = math.exp(-plan.feed_knot_spacing / plan.feed_wander_time)
    rng = rng_for(seed, "feed", model.id)
    eps = rng.standard_normal((n_knots, len(nominal)))
    x = np.empty_like(eps)
    x[0] = plan.feed_wander_sigma * eps[0]
    scale = plan.feed_wander_sigma * math.sqrt(1.0 - phi * phi)
    for k in range(1, n_knots):   # knots are hourly: a short loop, not a hot path
        x[k] = phi * x[k - 1] + scale * eps[k]
    return FeedProfile.from_knots(plan.feed_knot_spacing, np.maximum(nominal * (1.0 + x), 0.0))


def level_to_volume(model, level_fraction):
    """Liquid volume from level through the configured table. [m^3]; level in [-] (fraction of span).

    >>> from types import SimpleNamespace
    >>> tank = SimpleNamespace(level_table=np.array([[0.0, 0.6], [0.5, 8.1], [1.0, 15.6]]))
    >>> round(float(level_to_volume(tank, 0.6)), 6), round(float(volume_to_level(tank, 9.6)), 6)
    (9.6, 0.6)
    """
    tab = model.level_table
    return np.interp(level_fraction, tab[:, 0], tab[:, 1])


def volume_to_level(model, volume):
    """Level [-] (fraction of span) from liquid volume [m^3], inverse of the configured table."""
    tab = model.level_table
    return np.interp(volume, tab[:, 1], tab[:, 0])


def build_segments(model, plan, duration: float) -> list[Segment]:
    """Cut the run [0, duration) [s] into segments of constant feed rate and set points.

    Schedule entries after the end are ignored; during the shutdown the feed is zero, the
    temperature set point is the shutdown's and a level controller is in manual with the outlet
    closed (an overflow unit simply stops overflowing).

    Parameters
    ----------
    model : UnitModel
    plan : UnitPlan
    duration : float
        Run length. [s]

    Returns
    -------
    list of Segment
        Flows [m^3/s], set points [K] and [m^3], times [s].

    >>> from kinetrace.config import load_config, unit_model
    >>> from kinetrace.simulator.generate import DEFAULT_SCENARIO, DEFAULT_CONFIG
    >>> from kinetrace.simulator import load_scenario
    >>> model = unit_model(load_config(DEFAULT_CONFIG).units[0])
    >>> segs = build_segments(model, load_scenario(DEFAULT_SCENARIO).plan("R-210"), 90 * 86400.0)
    >>> [(round(s.start / 86400, 2), round(s.feed_flow * 3600, 2), s.manual_outlet) for s in segs]
    [(0.0, 4.6, None), (10.33, 4.9, None), (23.58, 4.9, None), (34.25, 0.0, 0.0), (35.5, 4.9, None), (45.33, 4.9, None)]
    """
    cuts = {0.0, float(duration)}
    cuts.update(s.at for s in plan.steps if 0.0 < s.at < duration)
    if plan.shutdown:
        cuts.update(t for t in (plan.shutdown.start, plan.shutdown.end) if 0.0 < t < duration)
    cuts = sorted(cuts)
    level = model.level_table is not None
    segments = []
    for a, b in zip(cuts, cuts[1:]):
        flow = temp = lvl = None
        for s in plan.steps:
            if s.at <= a:
                flow = s.feed_flow if s.feed_flow is not None else flow
                temp = s.temperature if s.temperature is not None else temp
                lvl = s.level if s.level is not None else lvl
        if level and lvl is None:
            raise KinetraceError(f"unit {model.id}: the first schedule entry needs a level set point [%]")
        sd = plan.shutdown
        stopped = bool(sd and sd.start <= a < sd.end)
        if stopped:
            flow, temp = 0.0, sd.temperature
        segments.append(Segment(a, b, flow, temp, float(level_to_volume(model, lvl / 100.0)) if level else None,
                                0.0 if (stopped and level) else None))
    return segments


def _initial_state(model, plan, kin, seg0: Segment, feed: FeedProfile):
    """Steady state at the first operating point, fresh catalyst (a pre-run of 40 residence times)."""
    vol = seg0.volume_setpoint if seg0.volume_setpoint is not None else model.fixed_volume
    tau = vol / seg0.feed_flow
    c_in = feed.at(0.0)
    pre = integrate_cstr(model.nu, kin, [Segment(0.0, 40.0 * tau, seg0.feed_flow, seg0.temperature_setpoint,
                                                 seg0.volume_setpoint)],
                         FeedProfile.constant(c_in), initial_moles=vol * c_in, initial_volume=vol,
                         initial_temperature=seg0.temperature_setpoint, level_control=_controller(plan, model),
                         step=40.0 * tau, rtol=1e-10)
    ns = len(model.species)
    return pre.final_state[:ns], pre.final_state[ns], pre.final_state[ns + 1]


def _controller(plan, model) -> LevelControl | None:
    if model.level_table is None:
        return None
    if plan.level_gain is None:
        raise KinetraceError(f"unit {model.id} is level-controlled: the scenario plan needs level_control.gain")
    return LevelControl(plan.level_gain, plan.level_integral_time)


def simulate_unit(model, plan, duration: float, *, seed: int, step: float = 60.0, rtol: float = 1e-7):
    """Simulate one unit over [0, duration) and return its ground truth and the raw run.

    Parameters
    ----------
    model : UnitModel
        The configured unit, SI (:func:`kinetrace.config.unit_model`).
    plan : UnitPlan
        Its scenario plan.
    duration : float
        Run length. [s]
    seed : int
        Seed of the feed composition wander.
    step : float
        Output grid spacing. [s]
    rtol : float
        Relative tolerance of the integrator. [-]

    Returns
    -------
    tuple (CstrRun, FeedProfile)
        The integrated run (SI arrays on the grid) and the feed composition used;
        :func:`truth_frame` makes the table.

    >>> import kinetrace.config as kc
    >>> import kinetrace.simulator as sim
    >>> sc = sim.load_scenario(sim.generate.DEFAULT_SCENARIO)
    >>> unit = kc.unit_model(kc.load_config(sim.generate.DEFAULT_CONFIG).units[1])
    >>> run, feed = simulate_unit(unit, sc.plan("R-220"), 86400.0, seed=sc.seed)
    >>> run.t.shape, round(float(run.volume[0]), 3)          # 1440 minutes, 1500 US gal
    ((1440,), 5.678)
    """
    kin = Kinetics.from_unit_model(model, plan.catalysed)
    unknown = set(plan.catalysed) - set(model.reaction_ids)
    if unknown:
        raise KinetraceError(f"scenario plan of {model.id}: catalysed names unknown reactions {sorted(unknown)}; "
                             f"the unit has {list(model.reaction_ids)}")
    segments = build_segments(model, plan, duration)
    feed = feed_profile(model, plan, duration, seed)
    n0, v0, i0 = _initial_state(model, plan, kin, segments[0], feed)
    run = integrate_cstr(model.nu, kin, segments, feed, initial_moles=n0, initial_volume=v0,
                         initial_temperature=segments[0].temperature_setpoint,
                         deactivation_rate=plan.deactivation_rate, level_control=_controller(plan, model),
                         temperature_time_constant=plan.temperature_time_constant, step=step,
                         initial_integral=i0, rtol=rtol)
    return run, feed


def truth_frame(model, plan, run: CstrRun, feed: FeedProfile, start) -> pd.DataFrame:
    """Ground-truth table of a run: one row per grid time, columns of :data:`TRUTH_COLUMNS` (SI).

    Parameters
    ----------
    model : UnitModel
    plan : UnitPlan
    run : CstrRun
    feed : FeedProfile
    start : datetime
        Run start (UTC); row times are ``start + run.t``.

    Returns
    -------
    DataFrame
        One row per grid time; units in :data:`TRUTH_COLUMNS`.
    """
    kin = Kinetics.from_unit_model(model, plan.catalysed)
    conc = run.conc
    feed_conc = feed.on_grid(run.t)
    rates = kin.rates(conc, run.temperature, run.activity)
    kref = kin.k_ref[None, :] * np.where(kin.catalysed[None, :], run.activity[:, None], 1.0)
    k, p = model.key_index, model.product_index
    sd = plan.shutdown
    running = np.ones(run.t.shape, bool) if sd is None else ~((run.t >= sd.start) & (run.t < sd.end))
    cols = {
        "timestamp": pd.Timestamp(start).tz_convert("UTC") + pd.to_timedelta(run.t, unit="s"),
        "running": running, "feed_flow": run.feed_flow, "outlet_flow": run.outlet_flow, "volume": run.volume,
        "level": volume_to_level(model, run.volume) if model.level_table is not None else np.full(run.t.shape, np.nan),
        "temperature": run.temperature, "temperature_setpoint": run.temperature_setpoint,
    }
    cols.update({f"conc_{s}": conc[:, i] for i, s in enumerate(model.species)})
    cols.update({f"feed_conc_{s}": feed_conc[:, i] for i, s in enumerate(model.species)})
    cols["activity"] = run.activity
    cols.update({f"k_ref_{r}": kref[:, j] for j, r in enumerate(model.reaction_ids)})
    cols.update({f"rate_{r}": rates[:, j] for j, r in enumerate(model.reaction_ids)})
    with np.errstate(invalid="ignore", divide="ignore"):
        cols["conversion"] = 1.0 - conc[:, k] / feed_conc[:, k]
    cols["product_rate"] = run.outlet_flow * conc[:, p]
    return pd.DataFrame(cols)
