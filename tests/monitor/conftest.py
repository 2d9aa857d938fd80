"""Shared fixtures of the monitor tests: a small invented unit and a run-length simulator."""

from __future__ import annotations

import numpy as np
import pytest

from kinetrace.config.model import RateLawModel, UnitModel


def make_unit(*, k_ref=0.01, ea=60e3, t_ref=350.0, target=0.8, volume=0.4, c_a0=1000.0,
              t_limits=(330.0, 370.0), q_limits=(1e-4, 2e-3), orders=None, method="power_law", params=None):
    """An invented first-order unit A -> P (scenario data of our own)."""
    p = {"orders": dict(orders or {"A": 1.0})}
    p.update(params or {})
    law = RateLawModel(method, k_ref, ea, t_ref, p)
    return UnitModel(
        id="R-210", species=("A", "P"), molar_masses=np.array([0.1, 0.1]), reaction_ids=("r1",),
        nu=np.array([[-1.0], [1.0]]), rate_laws={"r1": law}, key_reactant="A", product="P",
        target_rate=target, fixed_volume=volume, level_table=None, feed={"A": c_a0}, tags=(),
        temperature_limits=t_limits, feed_flow_limits=q_limits,
    )


@pytest.fixture
def unit():
    return make_unit()


def simulate_run_lengths(step, init, n_runs, shift, rng, *, chunk=400, max_len=200_000):
    """Run lengths of a chart for ``n_runs`` independent N(shift, 1) sequences at once.

    ``step(x, state) -> (signal, new_state)`` runs the chart over a (chunk, runs)
    block from ``state`` (a tuple of arrays, one value per run) and returns the
    boolean signal matrix and the state after the block. Runs that signal are
    retired; the others continue with fresh observations.
    """
    rl = np.full(n_runs, np.nan)
    alive = np.arange(n_runs)
    state = tuple(np.full(n_runs, v, dtype=float) for v in init)
    t0 = 0
    while alive.size and t0 < max_len:
        x = rng.standard_normal((chunk, alive.size)) + shift
        sig, new = step(x, tuple(s[alive] for s in state))
        has = sig.any(axis=0)
        first = np.argmax(sig, axis=0)
        rl[alive[has]] = t0 + first[has] + 1
        keep = ~has
        for s, n in zip(state, new):
            s[alive[keep]] = n[keep]
        alive = alive[keep]
        t0 += chunk
    assert alive.size == 0, "some runs never signalled"
    return rl
