"""Properties of the flowsheet reconciliation (hypothesis): the balances hold at the result,
and the result does not depend on the order of the streams or on the units."""

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from kinetrace.reconcile import Network, reconcile_network

from .network_cases import random_network

SETTINGS = settings(max_examples=20, deadline=None)


def _case(seed, T=3):
    rng = np.random.default_rng(seed)
    net, x_true, sigma = random_network(rng)
    y = x_true + sigma * rng.standard_normal((T, len(x_true)))
    return net, y, sigma, rng


@SETTINGS
@given(st.integers(0, 10_000))
def test_balances_hold_to_1e_9(seed):
    net, y, sigma, _ = _case(seed)
    r = reconcile_network(net, y, sigma, tol=1e-12)
    assert r.converged.all()
    res = net.residual(r.x, r.z)
    # relative to the throughput of each balance (sum of its absolute terms)
    thr = (np.abs(r.x) @ np.abs(net.linear_matrix.T)
           + np.abs(r.x[:, net._e_flow] * r.x[:, net._e_conc]) @ np.abs(net._G.T) + np.abs(r.z) @ np.abs(net.extent_matrix.T))
    assert np.all(np.abs(res) <= 1e-9 * thr)


@SETTINGS
@given(st.integers(0, 10_000), st.randoms(use_true_random=False))
def test_invariant_to_stream_order(seed, rnd):
    net, y, sigma, _ = _case(seed)
    order = list(range(len(net.streams)))
    rnd.shuffle(order)
    net2 = Network(net.nodes, [net.streams[j] for j in order], net.species,
                   nu=net.nu if net.nu.shape[1] else None, reactions=net.reactions)
    perm = [net.names.index(nm) for nm in net2.names]
    r1 = reconcile_network(net, y, sigma, tol=1e-12)
    r2 = reconcile_network(net2, y[:, perm], sigma[perm], tol=1e-12)
    assert np.max(np.abs(r2.x - r1.x[:, perm]) / sigma[perm]) < 1e-7
    assert np.allclose(r2.objective, r1.objective, rtol=1e-8, atol=1e-10)
    assert np.allclose(r2.z, r1.z, rtol=1e-8, atol=1e-9)


@SETTINGS
@given(st.integers(0, 10_000), st.sampled_from([3600.0, 1e-3, 1.0]), st.sampled_from([1e-3, 1.0, 453.59237]))
def test_invariant_to_unit_scaling(seed, a, b):
    # flows in m3/s -> m3/h (a = 3600); concentrations mol/m3 -> mol/L (b = 1e-3) or lbmol/... :
    # only the numbers change, so the reconciled values scale and the objective does not
    net, y, sigma, _ = _case(seed)
    S = net.n_streams
    f = np.concatenate([np.full(S, a), np.full(len(net.names) - S, b)])
    r1 = reconcile_network(net, y, sigma, tol=1e-12)
    r2 = reconcile_network(net, y * f, sigma * f, tol=1e-12)
    assert np.max(np.abs(r2.x / f - r1.x) / sigma) < 1e-7
    assert np.allclose(r2.objective, r1.objective, rtol=1e-8, atol=1e-10)
    assert np.allclose(r2.z / (a * b), r1.z, rtol=1e-7, atol=1e-9)
