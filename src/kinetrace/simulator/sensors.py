"""Instrument readings of a simulated unit, from its ground truth, before faults.

Each configured tag reads the true value of its role (feed or outlet flow,
temperature, level, liquid volume (a volume transmitter), outlet or feed concentration of its
species), with

* a flowmeter bias (a relative error b(t), zero before its onset): y = x (1 + b);
* Gaussian noise of the tag's sigma (relative to reading, or absolute), as read by
  :func:`kinetrace.config.tag_sigma`;
* an analyzer dead time: an online analyzer at time t reads the outlet at t - theta;
* lab grab samples every ``lab_interval`` (outlet) or ``feed_lab_interval`` (feed),
  written at the sample time; no outlet sample is taken while the unit is stopped.

Values are converted from SI to each tag's engineering unit with
:func:`kinetrace.units.from_si`. A reading set is a dict ``tag -> Readings``.

References
----------
.. [1] JCGM 100:2008. Evaluation of measurement data - Guide to the expression of
   uncertainty in measurement (GUM), sec. 4 (standard uncertainty as the std of a
   Gaussian error).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..config import ROLE_KIND, tag_sigma
from ..errors import KinetraceError
from ..units import from_si, parse_quantity
from .plant import rng_for

#: Quality codes as small integers inside the simulator; names in :data:`QUALITY_NAMES`.
GOOD, QUERIED, BAD = 0, 1, 2
QUALITY_NAMES = ("OK", "QUERIED", "BAD")


@dataclass
class Readings:
    """The rows of one tag: grid index of each row, value in the tag's unit, quality code."""

    tag: str
    index: np.ndarray      # int64, row time = start + index * step
    value: np.ndarray      # float64 [tag unit]; NaN is an empty value
    quality: np.ndarray    # int8, GOOD / QUERIED / BAD


def sensor_sigma(tag, kind: str) -> tuple[float, float]:
    """Measurement std of a tag as (relative [-], absolute [SI]), as :func:`kinetrace.config.tag_sigma` reads it.

    A temperature sigma already written as a difference (``"0.5 delta_degF"``) is read here
    directly.

    >>> from kinetrace.config import Tag
    >>> t = Tag(tag="T", role="temperature", unit="degF", sigma="0.9 delta_degF")
    >>> round(sensor_sigma(t, "temperature")[1], 6)
    0.5
    """
    s = (tag.sigma or "").strip()
    if kind == "temperature" and "delta_" in s:
        return 0.0, float(parse_quantity(s, kind))
    return tag_sigma(tag, kind)


def true_signal(tag, truth: pd.DataFrame) -> np.ndarray:
    """The true SI value a tag measures, on the truth grid. [SI of ``ROLE_KIND[tag.role]``]"""
    role = tag.role
    if role in ("feed_flow", "outlet_flow", "temperature", "level", "volume"):   # volume: a volume transmitter
        return truth[role].to_numpy(float)
    if role == "outlet_conc":
        return truth[f"conc_{tag.species}"].to_numpy(float)
    if role == "feed_conc":
        return truth[f"feed_conc_{tag.species}"].to_numpy(float)
    raise KinetraceError(f"tag {tag.tag!r}: the simulator has no sensor model for role {role!r}")


def sample_indices(tag, truth: pd.DataFrame, scenario) -> np.ndarray:
    """Grid rows at which a tag reports: every row, or the lab sample times. [-]"""
    n = len(truth)
    if tag.sampling != "lab":
        return np.arange(n, dtype=np.int64)
    if tag.role == "feed_conc":
        interval, offset = scenario.feed_lab_interval, scenario.feed_lab_offset
    else:
        interval, offset = scenario.lab_interval, scenario.lab_offset
    idx = np.arange(round(offset / scenario.step), n, round(interval / scenario.step), dtype=np.int64)
    if tag.role == "outlet_conc":
        idx = idx[truth["running"].to_numpy()[idx]]
    return idx


def dead_time_rows(tag, plan, step: float) -> int:
    """Analyzer dead time of a tag in grid rows (scenario ``dead_time``, else the config's). [-]"""
    theta = plan.dead_time.get(tag.tag, tag.dead_time)
    rows = round(theta / step)
    if abs(rows * step - theta) > 1e-9:
        raise KinetraceError(f"tag {tag.tag!r}: dead time {theta} s is not a whole number of {step} s grid steps")
    return rows


def bias_factor(tag_name: str, scenario, t: np.ndarray) -> np.ndarray:
    """1 + b(t) of the bias faults on a tag, t [s] from the run start. [-]"""
    out = np.ones(t.shape)
    for f in scenario.faults:
        if f.kind == "bias" and tag_name in f.tags:
            out = out + np.where(t >= f.start, f.value, 0.0)
    return out


def read_tag(tag, plan, truth: pd.DataFrame, scenario) -> Readings:
    """Clean readings of one tag (noise, bias, dead time, sampling; no other faults).

    Parameters
    ----------
    tag : kinetrace.config.Tag
    plan : UnitPlan
    truth : DataFrame
        Ground truth of the unit (:func:`kinetrace.simulator.plant.truth_frame`), SI.
    scenario : Scenario

    Returns
    -------
    Readings
        Values in the tag's unit.
    """
    x = true_signal(tag, truth)
    lag = dead_time_rows(tag, plan, scenario.step) if tag.sampling == "analyzer" else 0
    if lag:
        x = np.concatenate([np.full(lag, x[0]), x[:-lag]])
    idx = sample_indices(tag, truth, scenario)
    t = idx * scenario.step
    kind = ROLE_KIND[tag.role]
    rel, absolute = sensor_sigma(tag, kind)
    rng = rng_for(scenario.seed, "noise", tag.tag)
    xs = x[idx] * bias_factor(tag.tag, scenario, t)
    noisy = xs + (rel * np.abs(xs) + absolute) * rng.standard_normal(len(idx))
    value = np.asarray(from_si(noisy, tag.unit, kind), dtype=float)
    return Readings(tag.tag, idx, value, np.zeros(len(idx), np.int8))
