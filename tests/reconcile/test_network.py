"""Flowsheet reconciliation: a published bilinear example, scipy SLSQP and cvxpy (linearised)
on random networks, classification, inputs."""

import numpy as np
import pytest

from kinetrace.reconcile import (Network, ReconciliationError, UnobservableError, closure_table, global_test,
                                 measurement_test, reconcile_network)

from .network_cases import cvxpy_linearised, random_network, slsqp_network

# "Basic Concepts in Data Reconciliation" (North Carolina State University / University of
# Ottawa course notes, 2003), Ch. 4, Table 4.1: binary distillation column, feed F1 with
# mass fractions x1,1 x1,2; distillate F2; bottoms F3; flows kg/h [found]. The reconciled
# values of that chapter were not seen: they are recomputed here with scipy SLSQP on the same
# problem (total and component balances, weighted least squares) [computed].
COLUMN_Y = {"F[F1]": 1095.475, "c[F1,x1]": 0.4822, "c[F1,x2]": 0.5170,
            "F[F2]": 478.402, "c[F2,x1]": 0.9410, "c[F2,x2]": 0.0501,
            "F[F3]": 488.232, "c[F3,x1]": 0.0197, "c[F3,x2]": 0.9748}
COLUMN_SIGMA = {"F[F1]": 4.8, "c[F1,x1]": 0.0048, "c[F1,x2]": 0.0052,
                "F[F2]": 3.9, "c[F2,x1]": 0.0094, "c[F2,x2]": 0.0005,
                "F[F3]": 4.4, "c[F3,x1]": 0.0002, "c[F3,x2]": 0.0097}


def column():
    return Network([("C", "separator")], [("F1", None, "C"), ("F2", "C", None), ("F3", "C", None)], ["x1", "x2"])


def test_published_distillation_column_against_slsqp():
    net = column()
    r = reconcile_network(net, COLUMN_Y, COLUMN_SIGMA)
    assert r.converged[0] and r.dof[0] == 3
    y = np.array([COLUMN_Y[k] for k in net.names])
    s = np.array([COLUMN_SIGMA[k] for k in net.names])
    xs, _, sol = slsqp_network(net, y, s, np.ones(len(y), bool))
    assert sol.success
    assert np.max(np.abs(r.x[0] - xs) / s) < 1e-5
    assert r.objective[0] == pytest.approx(sol.fun, rel=1e-6)
    # balances hold at the reconciled values (to round-off of the throughput)
    res = net.residual(r.x, r.z)[0]
    assert np.all(np.abs(res) <= 1e-9 * np.array([1095.0, 1095.0, 1095.0]))
    # The measured flows close within 129 kg/h of 1095 (F1 - F2 - F3 = 128.8), about 19 of its
    # standard deviations sqrt(4.8^2 + 3.9^2 + 4.4^2) = 7.6: the global test rejects, as the
    # chapter's data are meant to show a gross error [computed].
    assert global_test(r).reject[0]


def test_correlated_analyser_readings_against_slsqp():
    # the two mass fractions of each stream come from one analyser: errors correlated -0.6
    # (invented figure); reference: SLSQP with the full inverse covariance
    net = column()
    pairs = {(f"c[{s},x1]", f"c[{s},x2]"): -0.6 for s in ("F1", "F2", "F3")}
    r = reconcile_network(net, COLUMN_Y, COLUMN_SIGMA, correlation=pairs, tol=1e-12)
    y = np.array([COLUMN_Y[k] for k in net.names])
    s = np.array([COLUMN_SIGMA[k] for k in net.names])
    R = np.eye(9)
    for a, b in pairs:
        i, j = net.names.index(a), net.names.index(b)
        R[i, j] = R[j, i] = -0.6
    xs, _, sol = slsqp_network(net, y, s, np.ones(9, bool), corr=R)
    assert np.max(np.abs(r.x[0] - xs) / s) < 1e-5
    assert r.objective[0] == pytest.approx(sol.fun, rel=1e-6)
    r0 = reconcile_network(net, COLUMN_Y, COLUMN_SIGMA)
    assert np.max(np.abs(r0.x[0] - r.x[0]) / s) > 0.05  # the correlation is really used


def test_classification_of_the_column():
    net = column()
    only_f2 = {k: v for k, v in COLUMN_Y.items() if k != "F[F2]"}
    r = reconcile_network(net, only_f2, COLUMN_SIGMA)
    cls = r.classification
    assert cls.unobservable_names == [] and all(cls.redundant)
    assert r.dof[0] == 2 and r.observable_x[0, net.names.index("F[F2]")]
    # stream 2 entirely unmeasured: its 3 unknowns use up the 3 balances: nothing redundant
    bare = {k: v for k, v in COLUMN_Y.items() if "F2" not in k}
    r = reconcile_network(net, bare, COLUMN_SIGMA)
    assert r.dof[0] == 0 and r.classification.nonredundant_names == list(r.classification.names)
    # and with F1 unmeasured too, stream 2's flow and composition cannot all be found
    bare.pop("F[F1]")
    r = reconcile_network(net, bare, COLUMN_SIGMA)
    assert set(r.classification.unobservable_names) >= {"F[F2]"}
    assert np.isnan(r.flow("F2")[0])


@pytest.mark.parametrize("seed", range(8))
def test_random_networks_against_slsqp_and_linearised_cvxpy(seed):
    rng = np.random.default_rng(1000 + seed)
    net, x_true, sigma = random_network(rng)
    n = len(net.names)
    measured = rng.random(n) > 0.15
    while True:  # keep the extents observable (the test compares unique solutions)
        cls = net.classify(measured)
        if not cls.unobservable_names:
            break
        measured[rng.choice(np.flatnonzero(~measured))] = True
    y = np.where(measured, x_true + sigma * rng.standard_normal(n), np.nan)
    r = reconcile_network(net, y, sigma, tol=1e-12)
    assert r.converged[0]
    xs, zs, sol = slsqp_network(net, y, sigma, measured)
    # SLSQP at ftol 1e-15 often stops on its iteration cap or a rank warning at the optimum;
    # what counts is that its point is feasible (and then that the two optima agree)
    assert np.abs(net.residual(xs[None], zs[None])).max() < 1e-7 * np.abs(x_true).max()
    scale = np.where(measured, sigma, 0.01 * np.abs(x_true) + 1e-3)
    assert np.max(np.abs(r.x[0] - xs) / scale) < 1e-4
    if zs.size:
        assert r.z[0] == pytest.approx(zs, rel=1e-5, abs=1e-6)
    assert r.objective[0] == pytest.approx(sol.fun, rel=1e-5, abs=1e-8)
    # at the fixed point, the problem linearised there has the same solution (cvxpy)
    xc, zc, obj = cvxpy_linearised(net, y, sigma, measured, r.x[0])
    assert np.max(np.abs(r.x[0] - xc) / scale) < 1e-6
    assert r.objective[0] == pytest.approx(obj, rel=1e-6, abs=1e-8)


def test_batched_steps_equal_single_steps_and_missing_values():
    rng = np.random.default_rng(7)
    net, x_true, sigma = random_network(np.random.default_rng(1003))
    T = 40
    y = x_true + sigma * rng.standard_normal((T, len(x_true)))
    y[3, 0] = np.nan
    y[17, -1] = np.nan
    r = reconcile_network(net, y, sigma, tol=1e-12)
    for t in (0, 3, 17, 39):
        one = reconcile_network(net, y[t], sigma, tol=1e-12)
        assert np.nanmax(np.abs(one.x[0] - r.x[t]) / sigma) < 1e-8
    assert r.missing_counts == {net.names[0]: 1, net.names[-1]: 1}
    assert np.isfinite(r.x[3, 0])  # estimated from the balances


def test_step_without_any_flow_has_no_flow_scale():
    # the balances are homogeneous in the flows: compositions alone cannot give flows
    # (common practice, no source); such a step is returned unreconciled, never as zero flows
    net = column()
    y = np.array([[COLUMN_Y[k] for k in net.names]] * 3)
    s = np.array([COLUMN_SIGMA[k] for k in net.names])
    y[1, :3] = np.nan
    r = reconcile_network(net, y, s)
    assert r.extra["no_flow_scale"].tolist() == [False, True, False]
    assert np.isnan(r.x[1, :3]).all() and r.dof[1] == 0 and not r.converged[1]
    assert r.x[1, 3:] == pytest.approx(y[1, 3:]) and r.converged[[0, 2]].all()
    assert not global_test(r).reject[1]


def test_gross_error_tests_closure_and_covariance_over_the_whole_network():
    net = column()
    r = reconcile_network(net, COLUMN_Y, COLUMN_SIGMA, cov="full")
    mt = measurement_test(r)
    assert mt.z.shape == (1, 9) and np.isfinite(mt.z).all()
    # Cov(x) = V - Cov(a) at the final linearisation (Kuehn & Davidson 1961)
    s2 = np.array([COLUMN_SIGMA[k] for k in net.names]) ** 2
    assert np.diag(r.cov_x[0]) == pytest.approx(s2 - r.var_adjustment[0], rel=1e-6, abs=1e-12)
    table = closure_table(r)
    assert set(table.balance) == set(net.constraint_names)
    # the measured flows miss their volume balance by F1 - F2 - F3 = 128.841 kg/h
    vol = table[table.balance == "volume[C]"].imbalance.iloc[0]
    assert vol == pytest.approx(1095.475 - 478.402 - 488.232, abs=1e-9)


def test_bad_flowsheets_are_refused_with_names():
    with pytest.raises(ReconciliationError, match="unknown kind 'pump'"):
        Network([("P", "pump")], [("a", None, "P"), ("b", "P", None)], ["A"])
    with pytest.raises(ReconciliationError, match="target node 'Q' is not a node"):
        Network([("P", "mixer")], [("a", None, "Q"), ("b", "P", None)], ["A"])
    with pytest.raises(ReconciliationError, match="splitter 'P' needs exactly one inlet"):
        Network([("P", "splitter")], [("a", None, "P"), ("c", None, "P"), ("b", "P", None)], ["A"])
    with pytest.raises(ReconciliationError, match="reactor node needs the stoichiometric matrix"):
        Network([("R", "reactor")], [("a", None, "R"), ("b", "R", None)], ["A"])
    with pytest.raises(ReconciliationError, match=r"not variables of the flowsheet: 'F\[zz\]'"):
        reconcile_network(column(), {"F[zz]": 1.0}, {"F[zz]": 1.0})
    net = Network([("R", "reactor")], [("a", None, "R"), ("b", "R", None)], ["A", "B"], nu=[[-1.0], [1.0]])
    with pytest.raises(UnobservableError, match=r"extent\[R,r0\]"):
        reconcile_network(net, {"F[a]": 1.0, "F[b]": 1.0}, {"F[a]": 0.01, "F[b]": 0.01})
