"""The scenario of a simulated run, read from TOML: operating schedule, faults, sensors, seed.

Times are TOML offset date-times (``2026-09-12T08:00:00Z``); durations and other
quantities are "number unit" strings read with :func:`kinetrace.units.parse_quantity`.
Everything is held in SI; times as seconds from the run start. Every problem of the
file is reported together in one :class:`kinetrace.errors.ConfigError`.
See ``sample_historian/README.md`` for the keys.
"""

from __future__ import annotations

import math
import tomllib
from dataclasses import dataclass, field
from datetime import datetime, timezone
from pathlib import Path

from ..errors import ConfigError, KinetraceError, Problem, ProblemList
from ..units import UnitError, parse_quantity, parse_rate_constant

#: Quality codes written by the simulator: good, doubtful (analyzer validation run), bad.
QUALITY_CODES = {"good": "OK", "doubtful": "QUERIED", "bad": "BAD"}


@dataclass(frozen=True)
class Step:
    """One operating change at time ``at`` [s]: feed rate [m^3/s], temperature set point [K], level set point [%]."""

    at: float
    feed_flow: float | None = None
    temperature: float | None = None
    level: float | None = None


@dataclass(frozen=True)
class Shutdown:
    """Feed stopped on [start, end) [s]; ``temperature`` [K] is the set point while stopped;
    ``recovery`` [s] after the restart counts as upset (excluded from the target comparison)."""

    start: float
    end: float
    temperature: float
    recovery: float


@dataclass(frozen=True)
class UnitPlan:
    """How one unit is run in the scenario (SI)."""

    unit_id: str
    steps: tuple[Step, ...]
    shutdown: Shutdown | None
    catalysed: tuple[str, ...]
    deactivation_rate: float            # kd [1/s]
    temperature_time_constant: float    # [s]
    level_gain: float | None            # Kc [1/s]
    level_integral_time: float          # [s]
    feed_wander_sigma: float            # relative std of the feed composition wander [-]
    feed_wander_time: float             # correlation time [s]
    feed_knot_spacing: float            # [s]
    extra_feed: dict[str, float]        # feed of species the config leaves out [mol/m^3]
    dead_time: dict[str, float]         # analyzer dead time by tag [s]


@dataclass(frozen=True)
class Window:
    """A fault on ``tags`` over [start, start + duration) [s]; ``value`` is a fault size."""

    kind: str
    tags: tuple[str, ...]
    start: float
    duration: float = math.inf
    value: float = 0.0
    every: float = 0.0


@dataclass(frozen=True)
class Scenario:
    """A whole simulated run."""

    source: str
    start: datetime
    days: float
    seed: int
    step: float                          # [s]
    units: tuple[UnitPlan, ...]
    faults: tuple[Window, ...]
    scattered_bad_fraction: float
    garbage_fraction: float
    garbage_values: tuple[float, ...]
    lab_interval: float                  # [s]
    lab_offset: float                    # [s]
    feed_lab_interval: float             # [s]
    feed_lab_offset: float               # [s]
    significant_digits: int
    check_standard: dict[str, float] = field(default_factory=dict)  # tag -> value written during validation [tag unit]

    def plan(self, unit_id: str) -> UnitPlan:
        for p in self.units:
            if p.unit_id == unit_id:
                return p
        raise KinetraceError(f"scenario {self.source}: no plan for unit {unit_id!r}; "
                             f"plans exist for {[p.unit_id for p in self.units]}")


FAULT_KINDS = ("bias", "frozen", "dropout", "bad_stretch", "validation")


def load_scenario(path: str | Path) -> Scenario:
    """Read and check a scenario TOML file.

    Parameters
    ----------
    path : str or Path
        The scenario file, e.g. ``sample_historian/scenario.toml``.

    Returns
    -------
    Scenario
        Quantities in SI, times in seconds from ``run.start``.

    Raises
    ------
    ConfigError
        Listing every problem of the file with its key path.

    >>> from kinetrace.simulator.generate import DEFAULT_SCENARIO
    >>> sc = load_scenario(DEFAULT_SCENARIO)
    >>> sc.days, sc.step, [p.unit_id for p in sc.units]
    (90.0, 60.0, ['R-210', 'R-220'])
    >>> load_scenario("no/such/scenario.toml")
    Traceback (most recent call last):
    ...
    kinetrace.errors.ConfigError: no/such/scenario.toml: 1 configuration problem:
      - (file): scenario file not found
    """
    path = Path(path)
    if not path.is_file():
        raise ConfigError(str(path), [Problem("(file)", "scenario file not found")])
    try:
        raw = tomllib.loads(path.read_text(encoding="utf-8"))
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(str(path), [Problem("(TOML syntax)", str(exc))]) from None
    return scenario_from_dict(raw, source=str(path))


class _Reader:
    def __init__(self, problems: ProblemList, start: datetime | None):
        self.problems, self.start = problems, start

    def get(self, table: dict, key: str, where: str, kind: str | None = None, default=...):
        if key not in table:
            if default is ...:
                self.problems.add(f"{where}.{key}", "required key is missing")
            return None if default is ... else default
        v = table[key]
        try:
            if kind == "time_point":
                if not isinstance(v, datetime) or v.tzinfo is None:
                    raise UnitError(f"expected an offset date-time such as 2026-09-01T06:00:00Z, got {v!r}")
                return (v - self.start).total_seconds() if self.start else 0.0
            if kind == "rate":
                return parse_rate_constant(v, 1.0)
            if kind == "fraction":
                f = float(v)
                if not 0.0 <= f <= 1.0:
                    raise UnitError(f"expected a fraction in [0, 1], got {v!r}")
                return f
            if kind is not None:
                return parse_quantity(v, kind)
            return v
        except (UnitError, TypeError, ValueError) as exc:
            self.problems.add(f"{where}.{key}", str(exc))
            return None


def scenario_from_dict(raw: dict, source: str = "<scenario>") -> Scenario:
    """Build a :class:`Scenario` from a parsed TOML dict; see :func:`load_scenario`."""
    problems = ProblemList()
    run = raw.get("run", {})
    start = run.get("start")
    if not isinstance(start, datetime) or start.tzinfo is None:
        problems.add("run.start", f"expected an offset date-time such as 2026-09-01T00:00:00Z, got {start!r}")
        start = None
    rd = _Reader(problems, start)
    days = float(rd.get(run, "days", "run") or 0.0)
    seed = rd.get(run, "seed", "run")
    step = rd.get(run, "step", "run", "time", default="1 min")
    sensors = raw.get("sensors", {})
    units = []
    for i, u in enumerate(raw.get("units", [])):
        units.append(_unit_plan(u, f"units[{i}]", rd))
    if not units:
        problems.add("units", "at least one [[units]] plan is needed")
    faults = []
    for kind in FAULT_KINDS:
        for j, f in enumerate(raw.get("faults", {}).get(kind, [])):
            where = f"faults.{kind}[{j}]"
            tags = f.get("tags", [f["tag"]] if "tag" in f else None)
            if not tags:
                problems.add(where, "needs tag = '...' or tags = [...]")
                continue
            faults.append(Window(kind, tuple(tags), rd.get(f, "start", where, "time_point"),
                                 rd.get(f, "duration", where, "time", default=math.inf) if kind != "bias" else math.inf,
                                 float(f.get("relative", 0.0)),
                                 rd.get(f, "every", where, "time", default=0.0) if kind == "validation" else 0.0))
    scattered = raw.get("faults", {}).get("scattered_bad", {})
    check = {t: float(v) for t, v in sensors.get("check_standard", {}).items()}
    if problems:
        raise ConfigError(source, problems)
    return Scenario(
        source=source, start=start.astimezone(timezone.utc), days=days, seed=int(seed), step=step,
        units=tuple(units), faults=tuple(faults),
        scattered_bad_fraction=rd.get(scattered, "fraction", "faults.scattered_bad", "fraction", default=0.0),
        garbage_fraction=rd.get(scattered, "garbage_fraction", "faults.scattered_bad", "fraction", default=0.0),
        garbage_values=tuple(float(v) for v in scattered.get("garbage_values", [-9999.0])),
        lab_interval=rd.get(sensors, "lab_interval", "sensors", "time", default="8 h"),
        lab_offset=rd.get(sensors, "lab_offset", "sensors", "time", default="2 h"),
        feed_lab_interval=rd.get(sensors, "feed_lab_interval", "sensors", "time", default="1 d"),
        feed_lab_offset=rd.get(sensors, "feed_lab_offset", "sensors", "time", default="7 h"),
        significant_digits=int(sensors.get("significant_digits", 7)), check_standard=check,
    )


def _unit_plan(u: dict, at: str, rd: _Reader) -> UnitPlan:
    steps = []
    for k, s in enumerate(u.get("schedule", [])):
        where = f"{at}.schedule[{k}]"
        steps.append(Step(rd.get(s, "at", where, "time_point"),
                          rd.get(s, "feed_flow", where, "volumetric_flow", default=None),
                          rd.get(s, "temperature", where, "temperature", default=None),
                          float(s["level"]) if "level" in s else None))
    if not steps or any(x.at is None for x in steps):
        rd.problems.add(f"{at}.schedule", "a schedule of [[units.schedule]] entries with 'at' is needed")
    elif steps[0].at != 0.0 or steps[0].feed_flow is None or steps[0].temperature is None:
        rd.problems.add(f"{at}.schedule[0]", "the first entry must be at run.start and give feed_flow and temperature")
    sd = None
    if "shutdown" in u:
        s = u["shutdown"]
        w = f"{at}.shutdown"
        sd = Shutdown(rd.get(s, "start", w, "time_point"), rd.get(s, "end", w, "time_point"),
                      rd.get(s, "temperature", w, "temperature"), rd.get(s, "recovery", w, "time", default="1 d"))
        if sd.start is not None and sd.end is not None and not sd.start < sd.end:
            rd.problems.add(w, "start must be before end")
    lc = u.get("level_control", {})
    wander = u.get("feed_wander", {})
    return UnitPlan(
        unit_id=str(u.get("id", "")), steps=tuple(steps), shutdown=sd,
        catalysed=tuple(u.get("catalysed", [])),
        deactivation_rate=rd.get(u, "deactivation_rate", at, "rate", default="0 1/s"),
        temperature_time_constant=rd.get(u, "temperature_time_constant", at, "time", default="30 min"),
        level_gain=rd.get(lc, "gain", f"{at}.level_control", "rate", default=None),
        level_integral_time=rd.get(lc, "integral_time", f"{at}.level_control", "time", default=math.inf),
        feed_wander_sigma=float(wander.get("relative_sigma", 0.0)),
        feed_wander_time=rd.get(wander, "correlation_time", f"{at}.feed_wander", "time", default="3 d"),
        feed_knot_spacing=rd.get(wander, "knot_spacing", f"{at}.feed_wander", "time", default="1 h"),
        extra_feed={k: rd.get(u.get("extra_feed", {}), k, f"{at}.extra_feed", "concentration")
                    for k in u.get("extra_feed", {})},
        dead_time={k: rd.get(u.get("dead_time", {}), k, f"{at}.dead_time", "time") for k in u.get("dead_time", {})},
    )
