"""Dead time: the configured shift of analyzer readings, and the cross-correlation estimate.

References: numpy.corrcoef gives the Pearson correlation at each lag (independent
of our loop); scipy.signal.correlate with correlation_lags gives the lag of the
peak of the (un-normalised) cross-correlation, which for a long stationary
series must agree with ours (Box, Jenkins & Reinsel 2008, Sec. 12.1).
"""

import numpy as np
import pandas as pd
import pytest
from scipy import signal

from kinetrace.ingest import read_unit
from kinetrace.ingest.deadtime import cross_correlation, estimate_dead_time

from .synth import config, readings, write_long


def _pair(delay_steps=8, n=2000, seed=11, tau=3.0):
    rng = np.random.default_rng(seed)
    u = np.repeat(rng.normal(0, 1, n // 20), 20)                  # random steps every 20 min
    y = np.zeros(n)
    a = np.exp(-1 / tau)
    for k in range(1, n):                                          # first-order lag (test signal only)
        y[k] = a * y[k - 1] + (1 - a) * u[k - 1 - delay_steps] if k - 1 - delay_steps >= 0 else 0.0
    y += rng.normal(0, 0.01, n)
    t = pd.date_range("2026-09-01", periods=n, freq="1min", tz="UTC")
    return pd.Series(u, index=t), pd.Series(y, index=t)


def test_ccf_values_equal_numpy_corrcoef():
    u, y = _pair()
    dx, dy = np.diff(u.to_numpy()), np.diff(y.to_numpy())
    ccf, pairs = cross_correlation(dx, dy, 15)
    for k in (0, 5, 9, 15):
        assert ccf[k] == pytest.approx(np.corrcoef(dx[: len(dx) - k], dy[k:])[0, 1], rel=1e-12)
    assert pairs[3] == len(dx) - 3


def test_peak_lag_agrees_with_scipy_correlate():
    u, y = _pair()
    dx, dy = np.diff(u.to_numpy()), np.diff(y.to_numpy())
    full = signal.correlate(dy - dy.mean(), dx - dx.mean(), mode="full")
    lags = signal.correlation_lags(len(dy), len(dx), mode="full")
    keep = (lags >= 0) & (lags <= 30)
    scipy_lag = int(lags[keep][np.argmax(full[keep])])
    est = estimate_dead_time(u, y, max_lag=30 * 60)
    assert est.dead_time == scipy_lag * 60.0


def test_estimate_finds_the_delay_of_a_first_order_process():
    u, y = _pair(delay_steps=8)
    est = estimate_dead_time(u, y, max_lag=40 * 60, sign=+1)
    # the first-order lag puts the peak of the differenced response one step after the pure delay
    assert est.dead_time in (9 * 60.0, 10 * 60.0) and est.correlation > 0.5


def test_estimate_skips_missing_values_and_checks_inputs():
    u, y = _pair()
    y.iloc[100:300] = np.nan
    assert estimate_dead_time(u, y, max_lag=40 * 60, sign=+1).dead_time in (540.0, 600.0)
    with pytest.raises(ValueError, match="share one time index"):
        estimate_dead_time(u, y.iloc[1:], max_lag=600)
    with pytest.raises(ValueError, match="too long"):
        estimate_dead_time(u.iloc[:10], y.iloc[:10], max_lag=3600)


def test_configured_dead_time_moves_analyzer_readings_back(tmp_path):
    df = readings(hours=3, seed=2)
    aa = df["tag"] == "CB2~R220~AA~AN"
    df.loc[aa, "value"] = np.where(df.loc[aa, "timestamp"] >= pd.Timestamp("2026-09-01T01:30Z"), 1.0, 0.5)
    write_long(df, tmp_path / "x.csv")

    def with_dead_time(raw):
        for t in raw["units"][1]["tags"]:
            if t["tag"] == "CB2~R220~AA~AN":
                t["dead_time"] = "20 min"

    plain = read_unit(config({"kind": "csv", "path": "x.csv", "good_quality": ["OK"]}, grid="10 min"), "R-220",
                      config_path=tmp_path / "p.toml")
    shifted = read_unit(config({"kind": "csv", "path": "x.csv", "good_quality": ["OK"]}, grid="10 min",
                               tweak=with_dead_time), "R-220", config_path=tmp_path / "p.toml")
    step_plain = plain.values["CB2~R220~AA~AN"].diff().idxmax()
    step_shift = shifted.values["CB2~R220~AA~AN"].diff().idxmax()
    assert step_plain == pd.Timestamp("2026-09-01T01:30Z")
    assert step_plain - step_shift == pd.Timedelta("20 min")
