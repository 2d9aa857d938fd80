"""Historian faults laid over clean readings, each recorded for the scenario facts.

Kinds (``[faults.<kind>]`` in the scenario file):

``frozen``
    The transmitter repeats its value at the window start exactly, quality good.
``validation``
    An analyzer runs its check standard every ``every`` for ``duration``: the value is
    the standard's (``sensors.check_standard``, plus the tag's noise) and quality is
    ``QUERIED`` (doubtful).
``bad_stretch``
    Rows kept with quality ``BAD`` and an empty value.
``dropout``
    No rows at all for the window.
scattered bad rows
    A random fraction of the remaining rows gets quality ``BAD``; of these a fraction
    carries a garbage value (from ``garbage_values``), the rest an empty value.

``bias`` is applied earlier, in :mod:`kinetrace.simulator.sensors`, as it acts on the
measured quantity before noise.
"""

from __future__ import annotations

import numpy as np

from .plant import rng_for
from .sensors import BAD, GOOD, QUERIED, Readings


def _window_mask(r: Readings, step: float, start: float, duration: float, every: float = 0.0) -> np.ndarray:
    t = r.index * step
    if every > 0.0:
        phase = np.mod(t - start, every)
        return (t >= start) & (phase < duration)
    return (t >= start) & (t < start + duration)


def _span(r: Readings, mask: np.ndarray, step: float, window=None) -> dict:
    idx = r.index[mask]
    out = {} if window is None else {"window_start_s": window.start, "window_end_s": window.start + window.duration,
                                      **({"every_s": window.every} if window.every else {})}
    return {**out, "tag": r.tag, "rows": int(mask.sum()),
            "first_row_s": float(idx[0] * step) if len(idx) else None,
            "last_row_s": float(idx[-1] * step) if len(idx) else None}


def apply_faults(readings: dict[str, Readings], scenario, check_noise: dict[str, float]) -> tuple[dict, list]:
    """Apply the scenario's faults to the readings of all tags.

    Parameters
    ----------
    readings : dict of str -> Readings
        Clean readings (values in tag units), modified copies are returned.
    scenario : Scenario
    check_noise : dict of str -> float
        Relative noise of each tag, used on check-standard values. [-]

    Returns
    -------
    readings : dict of str -> Readings
    log : list of dict
        One record per fault and tag: kind, tag, rows affected, first and last row time [s].
    """
    out = {k: Readings(r.tag, r.index.copy(), r.value.copy(), r.quality.copy()) for k, r in readings.items()}
    log = []
    step = scenario.step
    dropped = {k: np.zeros(len(r.index), bool) for k, r in out.items()}
    faulted = {k: np.zeros(len(r.index), bool) for k, r in out.items()}
    for f in scenario.faults:
        for tag in f.tags:
            if tag not in out:
                continue
            r = out[tag]
            if f.kind == "bias":
                m = r.index * step >= f.start
                log.append({"kind": "bias", "relative": f.value, **_span(r, m, step, f)})
                continue
            m = _window_mask(r, step, f.start, f.duration, f.every)
            if not m.any():
                continue
            if f.kind == "frozen":
                first = np.flatnonzero(m)[0]
                r.value[m] = r.value[first]
                r.quality[m] = GOOD
                log.append({"kind": "frozen", "value": float(r.value[first]), **_span(r, m, step, f)})
            elif f.kind == "validation":
                std = scenario.check_standard[tag]
                rng = rng_for(scenario.seed, "check", tag)
                r.value[m] = std * (1.0 + check_noise.get(tag, 0.0) * rng.standard_normal(int(m.sum())))
                r.quality[m] = QUERIED
                log.append({"kind": "validation", "check_standard": std, **_span(r, m, step, f)})
            elif f.kind == "bad_stretch":
                r.value[m] = np.nan
                r.quality[m] = BAD
                log.append({"kind": "bad_stretch", **_span(r, m, step, f)})
            elif f.kind == "dropout":
                dropped[tag] |= m
                log.append({"kind": "dropout", **_span(r, m, step, f)})
            faulted[tag] |= m
    for tag, r in out.items():
        free = np.flatnonzero(~faulted[tag] & ~dropped[tag])
        rng = rng_for(scenario.seed, "scattered", tag)
        n_bad = rng.binomial(len(free), scenario.scattered_bad_fraction) if len(free) else 0
        pick = np.sort(rng.choice(free, size=n_bad, replace=False)) if n_bad else np.array([], np.int64)
        garbage = rng.random(n_bad) < scenario.garbage_fraction
        r.quality[pick] = BAD
        r.value[pick] = np.where(garbage, rng.choice(np.asarray(scenario.garbage_values), size=n_bad), np.nan)
        if n_bad:
            log.append({"kind": "scattered_bad", "tag": tag, "rows": int(n_bad), "with_garbage_value": int(garbage.sum())})
        keep = ~dropped[tag]
        out[tag] = Readings(r.tag, r.index[keep], r.value[keep], r.quality[keep])
    return out, log
