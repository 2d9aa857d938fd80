"""Window-limited GLR of a step and a ramp (kinetrace.reconcile.ramp_step): its in-control average
run length, estimated again by simulation, and step/ramp told apart."""

import numpy as np
import pytest

from kinetrace.reconcile.ramp_step import GLR_ARL0, GLR_THRESHOLD, first_alarm, glr_step_ramp


def test_in_control_average_run_length_matches_the_stated_value():
    """Independent N(0, 1) residuals: alarms per observation give the ARL (geometric run lengths:
    exposure over alarms is the maximum-likelihood estimate; common practice, no source). 80 runs of
    6000 observations hold about 180 alarms, so the estimate is good to about 8 % (1 sd)."""
    rng = np.random.default_rng(2024)
    t = np.arange(6000) * 0.5
    exposure, alarms = 0, 0
    for _ in range(80):
        u = rng.standard_normal(t.size)
        start = 0
        while True:    # restart after each alarm, as the analyzer tracking does
            a = first_alarm(glr_step_ramp(u[start:], t[start:]), GLR_THRESHOLD)
            if a is None:
                exposure += t.size - start
                break
            exposure += a + 1
            alarms += 1
            start += a + 1
    arl = exposure / alarms
    assert arl == pytest.approx(GLR_ARL0, rel=0.25)


@pytest.mark.parametrize("kind", ["step", "ramp"])
def test_step_and_ramp_told_apart(kind):
    rng = np.random.default_rng(7)
    t = np.arange(80) * 0.5
    shift = np.where(t >= 25.0, 2.0 if kind == "step" else 0.8 * (t - 25.0), 0.0)
    g = glr_step_ramp(rng.standard_normal(t.size) + shift, t)
    a = first_alarm(g)
    assert a is not None and t[a] <= 29.0
    n = t.size - 1
    assert (g.ramp[n] > g.step[n]) == (kind == "ramp")
    if kind == "ramp":
        assert g.ramp_rate[n] == pytest.approx(0.8, rel=0.15)
    else:
        assert g.step_size[n] == pytest.approx(2.0, rel=0.15)


def test_missing_residuals_add_nothing():
    u = np.array([np.nan, 0.0, np.nan, 3.0, 3.0, 3.0])
    g = glr_step_ramp(u, np.arange(6.0), window=6)
    assert g.step[-1] == pytest.approx(27.0)       # (3 + 3 + 3)^2 / 3, onset at index 3
    assert g.step_onset[-1] == 3


def test_statistics_at_chosen_ends_equal_those_of_every_end():
    # the whole-record test of a long fault asks for its last observation only: the same numbers,
    # in memory linear in the record's length (a year of hourly residuals would need n x n arrays)
    rng = np.random.default_rng(7)
    t = np.arange(300) / 24.0
    u = rng.standard_normal(300) + np.where(t > 5, 0.8 * (t - 5), 0.0)
    every = glr_step_ramp(u, t, window=300)
    some = glr_step_ramp(u, t, window=300, ends=[10, 299])
    for name in ("step", "ramp", "step_onset", "ramp_onset", "step_size", "ramp_rate"):
        np.testing.assert_array_equal(getattr(some, name), getattr(every, name)[[10, 299]])
