"""Standard errors of a bias estimated from serially correlated hourly values.

References outside the project: statsmodels' Newey-West covariance of a regression on a constant
(Bartlett kernel; Newey & West 1987) for the long-run variance; the AR(1) variance of a mean,
(1 + rho)/(1 - rho) times the white-noise one for large n (common practice, no source).
"""

import numpy as np
import pytest

from kinetrace.reconcile.serial_error import location_standard_error, long_run_variance


def _ar1(rng, n, rho, size=()):
    e = rng.standard_normal((*size, n))
    x = np.empty_like(e)
    x[..., 0] = e[..., 0] / np.sqrt(1 - rho**2)
    for i in range(1, n):   # test data only
        x[..., i] = rho * x[..., i - 1] + e[..., i]
    return x


def test_long_run_variance_equals_statsmodels_newey_west():
    sm = pytest.importorskip("statsmodels.api")
    x = _ar1(np.random.default_rng(3), 500, 0.7) + 2.0
    for lags in (0, 4, 12):
        fit = sm.OLS(x, np.ones((x.size, 1))).fit(cov_type="HAC", cov_kwds={"maxlags": lags, "use_correction": False})
        # statsmodels: Var(mean) = LRV / n with Bartlett weights 1 - l/(lags + 1)
        assert long_run_variance(x, bandwidth=lags) / x.size == pytest.approx(fit.cov_params()[0, 0], rel=1e-10)


def test_ar1_factor_of_the_mean():
    # rho = 0.8: variance of the mean 9x the white-noise value (common practice, no source); the
    # plug-in Bartlett estimate is biased low at finite n, so 6-10 is accepted on 20 000 values
    x = _ar1(np.random.default_rng(0), 20000, 0.8)
    f = (location_standard_error(x, "mean") / location_standard_error(x, "mean", "iid")) ** 2
    assert 6.0 < f < 10.0


@pytest.mark.parametrize("estimator", ["median", "mean"])
def test_95_percent_intervals_cover_in_at_least_90_percent(estimator):
    """Ten days of hourly bias estimates with AR(1) errors (rho 0.85), 300 seeds: the default
    interval +-1.96 SE covers the true bias at least 90 % of the time (issue goal); the white-noise
    formula covers far less (about 50 %), which is what the reports printed before. The Bartlett
    (HAC) and moving-block bootstrap estimates are known to run low on so short a series (Andrews
    1991; Kuensch 1989): they cover less than the default here (our runs: 84-89 %), more than iid."""
    rng = np.random.default_rng(11)
    x = 0.05 + 0.01 * _ar1(rng, 240, 0.85, size=(300,))
    centre = np.median(x, axis=1) if estimator == "median" else x.mean(axis=1)
    cover = {}
    for method in ("ess", "ar1", "batch_means", "hac", "block_bootstrap", "iid"):
        se = np.array([location_standard_error(row, estimator, method) for row in x])
        cover[method] = float(np.mean(np.abs(centre - 0.05) <= 1.96 * se))
    assert cover["ess"] >= 0.90 and cover["ar1"] >= 0.90, cover
    assert cover["iid"] < 0.75, cover
    assert cover["hac"] > cover["iid"] + 0.2 and cover["block_bootstrap"] > cover["iid"] + 0.2, cover


def test_white_noise_keeps_the_plain_formula():
    x = np.random.default_rng(5).standard_normal(400)
    iid = location_standard_error(x, "mean", "iid")
    assert iid == pytest.approx(np.std(x, ddof=1) / 20)
    assert location_standard_error(x, "mean") == pytest.approx(iid, rel=0.15)


def test_inputs_and_errors():
    assert np.isnan(location_standard_error([1.0]))
    assert np.isnan(location_standard_error([np.nan, 2.0, np.nan]))
    assert location_standard_error(np.array([1.0, np.nan, 2.0, 3.0]), "mean", "iid") == pytest.approx(
        np.std([1.0, 2.0, 3.0], ddof=1) / np.sqrt(3))
    with pytest.raises(ValueError, match="allowed: ess, ar1, batch_means, hac, block_bootstrap, iid"):
        location_standard_error([1.0, 2.0], method="bootstrap")
    with pytest.raises(ValueError, match="allowed: median, mean"):
        location_standard_error([1.0, 2.0], estimator="mode")


def test_white_noise_plus_slow_wander():
    """A meter's hourly error: white noise plus a slow wander (AR(1), rho 0.92, about a day of
    memory), 30 days: the lag-1 autocorrelation sees mostly the white part, so the AR(1) formula
    alone covers too little; the default (the smaller effective sample size of AR(1) and batch
    means) keeps 95 % intervals covering in at least 90 % of 300 seeds."""
    rng = np.random.default_rng(21)
    x = rng.standard_normal((300, 720)) + 0.5 * np.sqrt(1 - 0.92**2) * _ar1(rng, 720, 0.92, size=(300,))
    centre = np.median(x, axis=1)
    cover = {m: float(np.mean(np.abs(centre) <= 1.96 * np.array([location_standard_error(r, "median", m) for r in x])))
             for m in ("ess", "ar1")}
    assert cover["ess"] >= 0.90, cover
    assert cover["ar1"] < cover["ess"], cover
