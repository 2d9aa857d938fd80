"""Catalyst decay laws a(t) as formulas (pure; fitted in :mod:`kinetrace.monitor.decay`, and jointly
with the rate laws in :mod:`kinetrace.kinetics.calibration`).

``linear``       a = a0 (1 - b t)                       params a0 [-], b [1/s]
``exponential``  a = a0 exp(-kd t)                      params a0 [-], kd [1/s]
``hyperbolic``   1/a = (1 + kd t) / a0                  params a0 [-], kd [1/s]
``nth_order``    a = a0 [1 + (m - 1) kd t]^(-1/(m-1))   params a0 [-], kd [1/s], m [-]

References
----------
.. [1] Fogler, H. S. (2016). Elements of Chemical Reaction Engineering, 5th ed., ch. 10.
.. [2] Levenspiel, O. (1999). Chemical Reaction Engineering, 3rd ed. Wiley, ch. 21.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np


def _linear(t, a0, b):
    return a0 * (1.0 - b * t)


def _exponential(t, a0, kd):
    return a0 * np.exp(-kd * t)


def _hyperbolic(t, a0, kd):
    return a0 / (1.0 + kd * t)


def _nth_order(t, a0, kd, m):
    e = m - 1.0
    if abs(e) < 1e-9:
        return a0 * np.exp(-kd * t)
    base = 1.0 + e * kd * t
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        out = a0 * np.exp(-np.log(np.where(base > 0, base, np.nan)) / e)
    # m < 1: the activity reaches zero in finite time and stays there
    return np.where(base > 0, out, 0.0)


@dataclass(frozen=True)
class DecayLaw:
    name: str
    formula: str
    func: Callable[..., np.ndarray]
    params: tuple[str, ...]
    units: tuple[str, ...]


DECAY_LAWS: dict[str, DecayLaw] = {
    "linear": DecayLaw("linear", "a = a0 (1 - b t)", _linear, ("a0", "b"), ("-", "1/s")),
    "exponential": DecayLaw("exponential", "a = a0 exp(-kd t)", _exponential, ("a0", "kd"), ("-", "1/s")),
    "hyperbolic": DecayLaw("hyperbolic", "1/a = (1 + kd t) / a0", _hyperbolic, ("a0", "kd"), ("-", "1/s")),
    "nth_order": DecayLaw("nth_order", "a = a0 [1 + (m - 1) kd t]^(-1/(m-1))", _nth_order,
                      ("a0", "kd", "m"), ("-", "1/s", "-")),
}

#: Bounds of the n-th order exponent m. [-]
ORDER_BOUNDS = (0.0, 6.0)
