"""The simulator's own rate expressions: input types, limits, and the configured units' laws.

References
----------
Hougen, O. A., Watson, K. M. (1947). Chemical Process Principles, Part III (saturating law:
first order at K C << 1, zero order k/K at K C >> 1) [memory].
Fogler (2016) Example 3-1 data [found, see REFERENCES.md]: k = 0.00043 1/s at 313 K and
0.00717 1/s at 333 K; an OLS fit over all five points gives E = 121.5 kJ/mol [computed].
"""

import math

import numpy as np
import pandas as pd
import pytest

from kinetrace.simulator import Kinetics, arrhenius

R = 8.314462618   # J/(mol K), CODATA 2018 exact


def test_arrhenius_input_types():
    # scalar, ndarray, Series and NaN all go through; NaN stays NaN
    assert float(arrhenius(2.0, 0.0, 300.0, 350.0)) == 2.0
    out = arrhenius(1.0, 50e3, 300.0, np.array([300.0, np.nan]))
    assert out[0] == 1.0 and math.isnan(out[1])
    s = np.asarray(arrhenius(1.0, 50e3, 300.0, pd.Series([300.0, 310.0])))   # documented: ndarray out
    assert s[1] == pytest.approx(math.exp(-50e3 / R * (1 / 310.0 - 1 / 300.0)), rel=1e-14)


def test_arrhenius_two_point_fogler_example():
    # Fogler (2016) Example 3-1 end points: ln(k2/k1) / (1/T1 - 1/T2) * R ~ E; with E = 121.5 kJ/mol
    # the predicted ratio k(333)/k(313) is within the scatter of the published data (5 %)
    ratio = float(arrhenius(1.0, 121.5e3, 313.0, 333.0))
    assert ratio == pytest.approx(0.00717 / 0.00043, rel=0.05)


def test_saturating_limits_and_shapes():
    kin = Kinetics.build(["A", "B"], [("saturating", 2e-3, 0.0, 300.0, {"A": 1.0}, {"A": 1e-2}, 1.0),
                                      ("power_law", 1e-6, 0.0, 300.0, {"A": 2.0}, {}, 1.0)])
    low = kin.rates([1e-3, 0.0], 300.0)          # K C << 1: first order, k C
    assert low[0] == pytest.approx(2e-3 * 1e-3, rel=1e-4)
    high = kin.rates([1e6, 0.0], 300.0)          # K C >> 1: zero order, k / K
    assert high[0] == pytest.approx(2e-3 / 1e-2, rel=1e-3)
    conc = np.array([[100.0, 0.0], [200.0, 5.0], [-1e-12, 0.0]])
    r = kin.rates(conc, np.full(3, 300.0), np.array([1.0, 0.5, 1.0]))
    assert r.shape == (3, 2)
    assert r[1, 0] == pytest.approx(0.5 * 2e-3 * 200.0 / 3.0)                 # activity multiplies
    assert r[1, 1] == pytest.approx(0.5 * 1e-6 * 200.0 ** 2)
    assert (r[2] == 0.0).all()                                                 # round-off below zero -> 0


def test_configured_laws(models):
    kin = Kinetics.from_unit_model(models["R-210"], ["addition"])
    # config: k_ref 6.0e-4 1/s, K = 0.5 L/mol, dimerisation 2.4e-8 m3/(mol s) at 70 degC (T_ref)
    r = kin.rates([500.0, 18000.0, 1500.0, 30.0], 343.15, 0.5)
    assert r[0] == pytest.approx(0.5 * 6.0e-4 * 500.0 / (1 + 0.5e-3 * 500.0), rel=1e-12)
    assert r[1] == pytest.approx(2.4e-8 * 500.0 ** 2, rel=1e-12)             # not catalysed: no activity
    k220 = Kinetics.from_unit_model(models["R-220"], ["hydrolysis"])
    # config: 0.0090 L/(mol min) = 1.5e-7 m3/(mol s)
    assert k220.rates([1000.0, 5000.0, 0.0, 8000.0], 333.15)[0] == pytest.approx(1.5e-7 * 1000 * 5000, rel=1e-12)
