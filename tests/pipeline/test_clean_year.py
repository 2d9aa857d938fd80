"""A clean simulated year raises at most one false sensor alarm a month.

Plants of the tests' own (tests/pipeline/plants.py: K-41 saturating A -> P, K-42 series reactions),
each a year of hourly data with the plant's flow and feed swings, temperature steps every 9 days,
a catalyst change, a wandering meter error within its stated uncertainty, analyzer and lab noise,
and no sensor fault of any kind. The whole check runs (analyzers against the lab, balances, CUSUM
and step-or-drift tests); every sensor fault it reports is false.

The bound, at most 12 false sensor alarms in 365 days (one a month), is the issue's acceptance
figure (common practice, no source: a rate an operator tolerates before ignoring the alarms). The
detectors' own in-control average run lengths are checked where they are built
(tests/reconcile/test_ramp_step.py, tests/monitor/test_arl.py).
"""

import pytest

from tests.pipeline.test_self_calibration import TRUE, _run


@pytest.mark.parametrize("kind", ["saturating", "series"])
def test_a_clean_year_raises_at_most_one_false_sensor_alarm_a_month(kind, tmp_path):
    truth, _, result = _run(kind, tmp_path / kind, TRUE[kind], seed=1, days=365.0)
    assert len(result.series) >= 360 * 24           # the whole year was checked, hour by hour
    assert len(result.faults) <= 12, [(f.role, f.onset, f.relative) for f in result.faults]
