"""The shipped 90-day scenario, simulated once (no files): the facts the forecast stage relies on."""

import math

import pandas as pd
import pytest

from kinetrace.simulator import load_scenario, simulate_unit, truth_frame
from kinetrace.simulator.generate import daily_production, unit_facts

from .conftest import SCENARIO


@pytest.mark.slow
def test_r210_falls_below_target_once_and_for_all(models):
    sc = load_scenario(SCENARIO)
    model, plan = models["R-210"], sc.plan("R-210")
    run, feed = simulate_unit(model, plan, sc.days * 86400.0, seed=sc.seed, step=sc.step)
    truth = truth_frame(model, plan, run, feed, sc.start)
    facts = unit_facts(model, plan, truth, sc)
    first = pd.Timestamp(facts["first_day_below_target"], tz="UTC")
    # "some weeks into the run": after the fresh period and the shutdown, before the end
    assert pd.Timestamp("2026-10-15", tz="UTC") < first < pd.Timestamp("2026-11-29", tz="UTC")
    assert facts["below_target_every_day_from"] == facts["first_day_below_target"]
    daily = daily_production(truth, model.target_rate, plan.shutdown, sc.start.timestamp())
    assert (daily.loc[daily.index < first, "ratio"][~daily["upset"]] > 1.0).all()
    # the catalyst activity is the scenario's exp(-kd t) (Levenspiel 1999 ch. 21)
    assert truth["activity"].iloc[-1] == pytest.approx(math.exp(-plan.deactivation_rate * run.t[-1]))
    # shutdown: no feed, outlet closed (controller in manual), level held; back to set point after restart
    stopped = truth[~truth["running"]]
    assert (stopped["feed_flow"] == 0.0).all() and (stopped["outlet_flow"] == 0.0).all()
    assert stopped["level"].max() - stopped["level"].min() < 1e-9
    restart = truth["timestamp"] > stopped["timestamp"].max() + pd.Timedelta(hours=12)
    assert truth.loc[restart, "level"].iloc[0] == pytest.approx(0.63, abs=1e-3)
    assert 24 <= len(stopped) / 60 <= 36
