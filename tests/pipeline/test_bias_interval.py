"""Sensor-bias intervals on a simulated plant of the tests' own (K-41, tests/pipeline/plants.py).

The feed flowmeter of K-41 reads 4 % high from day 80; besides its white noise (0.3 %) it wanders
slowly (0.3 %, about 12 h of memory), as meters do. Over ten seeds the fault must be found on that
meter, and the 95 % interval of its size must hold the true 4 % in at least 9 (issue goal: >= 90 %).
The interval of the hourly estimates' median is widened for their serial correlation
(kinetrace.reconcile.serial_error); with the lag-1 AR(1) formula alone the intervals were about
half as wide and missed the truth in half of the seeds tried (our runs).
"""

import numpy as np
import pandas as pd
import pytest

from tests.pipeline import plants
from tests.pipeline.test_self_calibration import TRUE, _run

BIAS, ONSET_DAY = 0.04, 80.0


def _biased_feed_meter(readings: pd.DataFrame, seed: int) -> pd.DataFrame:
    t = (readings.index - plants.START).total_seconds().to_numpy()
    wander = plants._wander(np.random.default_rng(1000 + seed), 110.0, 0.003, 12.0)
    out = readings.copy()
    out["K41_FEED_LPM"] = out["K41_FEED_LPM"] * (1 + BIAS * (t >= ONSET_DAY * plants.DAY) + wander(t))
    return out


@pytest.mark.slow
def test_bias_interval_covers_the_true_bias_in_nine_of_ten_seeds(tmp_path):
    onset = plants.START + pd.Timedelta(days=ONSET_DAY)
    covered, found = 0, []
    for seed in range(10):
        _, _, res = _run("saturating", tmp_path / str(seed), TRUE["saturating"], seed=seed, hook=_biased_feed_meter)
        hits = [f for f in res.faults if f.role == "feed_flow" and abs(f.onset - onset) <= pd.Timedelta("12h")]
        assert len(hits) == 1, (seed, [(f.role, f.onset, f.relative) for f in res.faults])
        f = hits[0]
        half = 1.96 * abs(f.magnitude_sd / f.magnitude * f.relative)
        found.append((seed, round(f.relative * 100, 3), round(half * 100, 3)))
        covered += abs(f.relative - BIAS) <= half
        # the interval is honest, not merely wide: a few tenths of a percent at most
        assert half < 0.003, found[-1]
    assert covered >= 9, found
