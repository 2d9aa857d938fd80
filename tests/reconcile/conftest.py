"""Shared fixtures and independent reference solvers for the reconciliation tests."""

import numpy as np
import pytest

import cvxpy as cp

# Narasimhan & Jordache (2000), Ch. 1: heat exchanger with bypass, six flows, four balances.
NJ_A = np.array([[1.0, -1, -1, 0, 0, 0], [0, 1, 0, -1, 0, 0], [0, 0, 1, 0, -1, 0], [0, 0, 0, 1, 1, -1]])
NJ_Y = np.array([101.91, 64.45, 34.65, 64.20, 36.44, 98.88])

# Yang, Ten & Jao (1995), Comput. Chem. Eng. 19S, S217-S222: 8 streams, 4 units; balance
# matrix and true flows as transcribed in a public benchmark collection of that paper [found];
# measurement variance 1 % of the true flow (same source) [found].
YANG_A = np.array([[1.0, -1, 0, 0, 0, 0, -1, 0], [0, 1, -1, 0, 0, 0, 0, 1],
                   [0, 0, 1, 1, -1, 0, 0, 0], [0, 0, 0, 0, 0, -1, 1, -1]])
YANG_X = np.array([98.7, 41.1, 78.9, 30.2, 109.1, 19.8, 57.6, 37.8])
YANG_SIGMA = np.sqrt(0.01 * YANG_X)


def cvxpy_wls(y, sigma, A_y, A_z=None, b=None):
    """Reference: the same constrained WLS solved by cvxpy/Clarabel with tight tolerances."""
    n = len(y)
    x = cp.Variable(n)
    expr = A_y @ x
    if A_z is not None and A_z.shape[1]:
        z = cp.Variable(A_z.shape[1])
        expr = expr + A_z @ z
    else:
        z = None
    rhs = np.zeros(A_y.shape[0]) if b is None else b
    prob = cp.Problem(cp.Minimize(cp.sum_squares(cp.multiply(1.0 / sigma, x - y))), [expr == rhs])
    prob.solve(solver=cp.CLARABEL, tol_gap_abs=1e-14, tol_gap_rel=1e-14, tol_feas=1e-14,
               tol_ktratio=1e-12, max_iter=200)
    return x.value, (None if z is None else z.value), prob.value


@pytest.fixture
def rng():
    return np.random.default_rng(20261201)
