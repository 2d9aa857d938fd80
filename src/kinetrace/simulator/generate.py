"""Generate the sample historian of a plant configuration and a scenario, with its ground truth.

:func:`generate_sample_historian` simulates every configured unit, reads its
tags, lays the scenario's faults over the readings and writes

* ``calder_bank_export.csv`` - long CSV ``timestamp,tag,value,quality``;
* ``calder_bank.sqlite`` - table ``readings(timestamp, tag, value, quality)``;
* ``truth_<unit>.parquet`` - ground truth of each unit at the grid step (SI);
* ``scenario_facts.json`` - what the scenario did (faults, shutdown, kd, first day below target).

The file stem (``calder_bank``) is a parameter. Output is byte-for-byte the same for
the same configuration, scenario and seed.
"""

from __future__ import annotations

import time
from datetime import timedelta
from pathlib import Path

import pandas as pd

from ..config import ROLE_KIND, load_config, unit_model
from ..errors import ConfigError, ProblemList
from .faults import apply_faults
from .plant import TRUTH_COLUMNS, simulate_unit, truth_frame
from .scenario import Scenario, load_scenario
from .sensors import read_tag, sensor_sigma
from .writers import readings_frame, round_significant, write_csv, write_json, write_sqlite, write_truth

#: The shipped scenario and demo plant (source tree layout: src/kinetrace/simulator -> repository root).
DEFAULT_SCENARIO = Path(__file__).resolve().parents[3] / "sample_historian" / "scenario.toml"
DEFAULT_CONFIG = Path(__file__).resolve().parents[3] / "config" / "demo_plant.toml"


def check_scenario(scenario: Scenario, models, level_limits: dict | None = None) -> None:
    """Cross-check a scenario against the configured units; raise ConfigError listing every problem.

    Checked: each unit has a plan and a hold-up the simulator can run (fixed or level-controlled),
    catalysed reactions, extra feed species, dead-time and fault tags exist, a level-controlled unit
    has a controller gain, every schedule and shutdown set point lies
    inside the unit's safe limits (feed, temperature, level), every validation tag has a
    check-standard value.

    Parameters
    ----------
    scenario : Scenario
    models : list of UnitModel
    level_limits : dict of unit id -> (low, high), optional
        Safe level limits [%] of the config (``units.limits.level``).

    >>> from kinetrace.config import load_config, unit_model
    >>> check_scenario(load_scenario(DEFAULT_SCENARIO), [unit_model(u) for u in load_config(DEFAULT_CONFIG).units])
    """
    problems = ProblemList()
    by_id = {m.id: m for m in models}
    tags = {t.tag: m for m in models for t in m.tags}
    for i, p in enumerate(scenario.units):
        where = f"units[{i}]"
        m = by_id.get(p.unit_id)
        if m is None:
            problems.add(f"{where}.id", f"unit {p.unit_id!r} is not in the plant configuration ({sorted(by_id)})")
            continue
        for r in p.catalysed:
            if r not in m.reaction_ids:
                problems.add(f"{where}.catalysed", f"reaction {r!r} is not a reaction of {m.id} ({list(m.reaction_ids)})")
        for s in p.extra_feed:
            if s not in m.species:
                problems.add(f"{where}.extra_feed.{s}", f"species {s!r} is not a species of {m.id}")
        for t in p.dead_time:
            if tags.get(t) is not m:
                problems.add(f"{where}.dead_time.{t}", f"tag {t!r} is not a tag of {m.id}")
        if m.level_table is None and m.fixed_volume is None:
            problems.add(f"{where}.id", f"{m.id} takes its volume from a volume tag only: the simulator needs a fixed "
                         "volume or a level tag with its table to simulate the hold-up (a volume tag is then read "
                         "from the simulated volume)")
        if m.level_table is not None and p.level_gain is None:
            problems.add(f"{where}.level_control.gain", f"{m.id} is level-controlled and needs a controller gain")
        for k, s in enumerate(p.steps):
            if s.feed_flow is not None and not m.feed_flow_limits[0] <= s.feed_flow <= m.feed_flow_limits[1]:
                problems.add(f"{where}.schedule[{k}].feed_flow", f"{s.feed_flow:.4g} m3/s is outside the unit's "
                             f"safe feed limits {m.feed_flow_limits} m3/s")
            if s.temperature is not None and not m.temperature_limits[0] <= s.temperature <= m.temperature_limits[1]:
                problems.add(f"{where}.schedule[{k}].temperature", f"{s.temperature:.2f} K is outside the unit's "
                             f"safe temperature limits {m.temperature_limits} K")
            lim = (level_limits or {}).get(m.id)
            if s.level is not None and lim is not None and not lim[0] <= s.level <= lim[1]:
                problems.add(f"{where}.schedule[{k}].level", f"{s.level:g} % is outside the unit's safe level "
                             f"limits {tuple(lim)} %")
        sd = p.shutdown
        if sd is not None and not m.temperature_limits[0] <= sd.temperature <= m.temperature_limits[1]:
            problems.add(f"{where}.shutdown.temperature", f"{sd.temperature:.2f} K is outside the unit's "
                         f"safe temperature limits {m.temperature_limits} K")
    for p_id in by_id:
        if p_id not in [p.unit_id for p in scenario.units]:
            problems.add("units", f"no plan for configured unit {p_id!r}")
    for j, f in enumerate(scenario.faults):
        for t in f.tags:
            if t not in tags:
                problems.add(f"faults.{f.kind}", f"tag {t!r} is not in the plant configuration")
            if f.kind == "validation" and t not in scenario.check_standard:
                problems.add(f"sensors.check_standard.{t}", f"tag {t!r} has validation runs but no check-standard value")
    if problems:
        raise ConfigError(scenario.source, problems)


def daily_production(truth: pd.DataFrame, target: float, shutdown, excluded_after: float) -> pd.DataFrame:
    """Mean true production rate of each UTC day against the target.

    Parameters
    ----------
    truth : DataFrame
        Ground truth of a unit (``timestamp``, ``product_rate`` [mol/s]).
    target : float
        Target production rate. [mol/s]
    shutdown : Shutdown or None
    excluded_after : float
        Run start as POSIX seconds, to place the shutdown window. [s]

    Returns
    -------
    DataFrame
        Index: day (date); columns ``product_rate`` [mol/s], ``ratio`` [-], ``upset`` (day touches the
        shutdown or its recovery), ``below`` (not upset and ratio < 1).
    """
    day = truth["timestamp"].dt.floor("D")
    out = truth.groupby(day)["product_rate"].mean().to_frame()
    out["ratio"] = out["product_rate"] / target
    out["upset"] = False
    if shutdown is not None:
        t0 = pd.Timestamp(excluded_after, unit="s", tz="UTC")
        a = t0 + pd.Timedelta(seconds=shutdown.start)
        b = t0 + pd.Timedelta(seconds=shutdown.end + shutdown.recovery)
        days = out.index
        out["upset"] = (days + pd.Timedelta(days=1) > a) & (days < b)
    out["below"] = ~out["upset"] & (out["ratio"] < 1.0)
    return out


def _iso(start, seconds):
    if seconds is None:
        return None
    return (start + timedelta(seconds=float(seconds))).strftime("%Y-%m-%dT%H:%M:%SZ")


def unit_facts(model, plan, truth: pd.DataFrame, scenario: Scenario) -> dict:
    """Scenario facts of one unit: kd, shutdown, first day below target, production summary."""
    daily = daily_production(truth, model.target_rate, plan.shutdown, scenario.start.timestamp())
    below = daily.index[daily["below"].to_numpy()]
    after = None
    flags = daily["below"].to_numpy() | daily["upset"].to_numpy()
    for k in range(len(daily)):
        if daily["below"].iloc[k] and flags[k:].all():
            after = daily.index[k]
            break
    sd = plan.shutdown
    mm = float(model.molar_masses[model.product_index])
    return {
        "deactivation_rate_per_s": plan.deactivation_rate,
        "deactivation_rate_per_day": plan.deactivation_rate * 86400.0,
        "catalysed_reactions": list(plan.catalysed),
        "target_rate_mol_s": model.target_rate,
        "target_rate_t_d": model.target_rate * mm * 86.4,
        "first_day_below_target": below[0].strftime("%Y-%m-%d") if len(below) else None,
        "below_target_every_day_from": after.strftime("%Y-%m-%d") if after is not None else None,
        "days_below_target": int(len(below)),
        "daily_rule": "UTC day mean of true product_rate < target; days touching the shutdown or its "
                      "recovery are excluded",
        "shutdown": None if sd is None else {"start": _iso(scenario.start, sd.start), "end": _iso(scenario.start, sd.end),
                                             "recovery_excluded_until": _iso(scenario.start, sd.end + sd.recovery),
                                             "temperature_setpoint_K": sd.temperature},
        "production_ratio_first_day": float(daily["ratio"].iloc[0]),
        "production_ratio_last_day": float(daily["ratio"].iloc[-1]),
        "analyzer_dead_time_s": {t.tag: plan.dead_time.get(t.tag, t.dead_time) for t in model.tags
                                 if t.sampling == "analyzer"},
    }


def generate_sample_historian(config_path, out_dir, *, scenario_path=None, scenario: Scenario | None = None,
                              seed: int | None = None, days: float | None = None, stem: str = "calder_bank",
                              write_sql: bool = True, timings: dict | None = None) -> dict[str, Path]:
    """Simulate the configured plant through a scenario and write historian, truth and facts.

    Parameters
    ----------
    config_path : str or Path
        Plant configuration TOML (e.g. ``config/demo_plant.toml``).
    out_dir : str or Path
        Folder for the output files (created).
    scenario_path : str or Path, optional
        Scenario TOML; default ``sample_historian/scenario.toml``.
    scenario : Scenario, optional
        An already loaded (possibly modified) scenario; overrides ``scenario_path``.
    seed : int, optional
        Overrides the scenario's seed.
    days : float, optional
        Overrides the scenario's run length. [d]
    stem : str
        File stem of the CSV and SQLite files.
    write_sql : bool
        Also write the SQLite historian.
    timings : dict, optional
        If given, filled with wall-clock times [s] of each stage (kept out of the files, which
        must not change between runs).

    Returns
    -------
    dict of str -> Path
        ``csv``, ``sqlite`` (if written), ``truth_<unit id>`` for each unit, ``facts``.

    >>> import tempfile, pandas as pd
    >>> with tempfile.TemporaryDirectory() as tmp:
    ...     paths = generate_sample_historian(DEFAULT_CONFIG, tmp, days=0.25, write_sql=False)
    ...     rows = pd.read_csv(paths["csv"])
    >>> sorted(paths), list(rows.columns)
    (['csv', 'facts', 'truth_R-210', 'truth_R-220'], ['timestamp', 'tag', 'value', 'quality'])
    """
    sc = scenario if scenario is not None else load_scenario(scenario_path or DEFAULT_SCENARIO)
    if seed is not None or days is not None:
        from dataclasses import replace
        sc = replace(sc, seed=sc.seed if seed is None else int(seed), days=sc.days if days is None else float(days))
    cfg = load_config(config_path)
    models = [unit_model(u) for u in cfg.units]
    check_scenario(sc, models, {u.id: u.limits.level for u in cfg.units})
    out_dir = Path(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    duration = sc.days * 86400.0
    paths: dict[str, Path] = {}
    readings, facts_units, fault_log = {}, {}, []
    timing = timings if timings is not None else {}
    for model in models:
        plan = sc.plan(model.id)
        t0 = time.perf_counter()
        run, feed = simulate_unit(model, plan, duration, seed=sc.seed, step=sc.step)
        timing[f"integrate {model.id}"] = time.perf_counter() - t0
        t0 = time.perf_counter()
        truth = truth_frame(model, plan, run, feed, sc.start)
        paths[f"truth_{model.id}"] = write_truth(truth, out_dir / f"truth_{model.id}.parquet", TRUTH_COLUMNS)
        facts_units[model.id] = unit_facts(model, plan, truth, sc)
        unit_readings = {t.tag: read_tag(t, plan, truth, sc) for t in model.tags}
        rel = {t.tag: sensor_sigma(t, ROLE_KIND[t.role])[0] for t in model.tags}
        unit_readings, log = apply_faults(unit_readings, sc, rel)
        readings.update(unit_readings)
        fault_log += [{**e, "unit": model.id} for e in log]
        timing[f"truth and readings {model.id}"] = time.perf_counter() - t0
    t0 = time.perf_counter()
    frame = readings_frame(readings, sc.start, sc.step, sc.significant_digits)
    paths["csv"] = write_csv(frame, out_dir / f"{stem}_export.csv")
    timing["csv"] = time.perf_counter() - t0
    if write_sql:
        t0 = time.perf_counter()
        paths["sqlite"] = write_sqlite(frame, out_dir / f"{stem}.sqlite", cfg.source.table)
        timing["sqlite"] = time.perf_counter() - t0
    for e in fault_log:
        if "value" in e:     # as written to the files
            e["value"] = float(round_significant([e["value"]], sc.significant_digits)[0])
        for key in ("window_start", "window_end"):
            if f"{key}_s" in e:
                v = e.pop(f"{key}_s")
                e[key] = _iso(sc.start, v) if v != float("inf") else None
        if "every_s" in e:
            e["every_h"] = e.pop("every_s") / 3600.0
        e["first_row"] = _iso(sc.start, e.pop("first_row_s", None))
        e["last_row"] = _iso(sc.start, e.pop("last_row_s", None))
    facts = {
        "scenario": Path(sc.source).name, "config": Path(config_path).name, "seed": sc.seed,
        "start": _iso(sc.start, 0.0), "end": _iso(sc.start, duration), "days": sc.days, "step_s": sc.step,
        "quality_codes": {"OK": "good", "QUERIED": "doubtful: analyzer validation run on its check standard",
                          "BAD": "bad; value empty or garbage"},
        "rows": int(len(frame)),
        "rows_by_quality": {q: int(n) for q, n in frame["quality"].value_counts().sort_index().items()},
        "units": facts_units, "faults": fault_log,
        "truth_columns": TRUTH_COLUMNS,
    }
    paths["facts"] = write_json(facts, out_dir / "scenario_facts.json")
    return paths


__all__ = ["generate_sample_historian", "check_scenario", "daily_production", "unit_facts", "DEFAULT_SCENARIO",
           "DEFAULT_CONFIG"]
