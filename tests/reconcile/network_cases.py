"""Flowsheets for the network tests: a random-network generator with a consistent true state,
and the independent references (scipy SLSQP on the nonlinear problem, cvxpy on the problem
linearised at a point)."""

import cvxpy as cp
import numpy as np
from scipy import optimize

from kinetrace.reconcile import Network


def simulate_network(nodes, streams, species, nu, feeds, phi, psi, extents):
    """True flows and concentrations of a flowsheet by a linear steady-state solve.

    ``feeds``: {stream: (F, c (ns,))} of boundary inlets; ``phi[node][stream]``: volume fraction
    of the node's inlet going to each outlet; ``psi[node][stream]`` (ns,): fraction of each
    species flow (splitters use phi for every species); ``extents[node]`` (nr,) [mol/s].
    Returns the packed vector (flows, then concentrations) in the order of ``streams``.
    """
    S, ns = len(streams), len(species)
    sidx = {s: j for j, (s, _, _) in enumerate(streams)}
    kind = dict(nodes)
    M = np.zeros((S, S))
    rhs_f = np.zeros(S)
    Mn = np.zeros((ns, S, S))
    rhs_n = np.zeros((S, ns))
    for s, (F, c) in feeds.items():
        rhs_f[sidx[s]] = F
        rhs_n[sidx[s]] = F * np.asarray(c)
    for a, _ in nodes:
        ins = [sidx[s] for s, _, b in streams if b == a]
        outs = [(sidx[s], s) for s, src, _ in streams if src == a]
        gen = nu @ extents.get(a, np.zeros(nu.shape[1])) if kind[a] == "reactor" else np.zeros(ns)
        for o, name in outs:
            frac_n = np.full(ns, phi[a][name]) if kind[a] == "splitter" else np.asarray(psi[a][name])
            for i in ins:
                M[o, i] += phi[a][name]
                Mn[:, o, i] += frac_n
            rhs_n[o] += frac_n * gen
    F = np.linalg.solve(np.eye(S) - M, rhs_f)
    n = np.stack([np.linalg.solve(np.eye(S) - Mn[i], rhs_n[:, i]) for i in range(ns)], axis=1)
    return np.concatenate([F, (n / F[:, None]).ravel()])


def random_network(rng):
    """A random flowsheet (chain of 2-5 nodes, feeds, products, recycles; at most one reactor),
    its true state and sigmas; every node kind can appear."""
    k = int(rng.integers(2, 6))
    ns = int(rng.integers(1, 4))
    species = [f"S{i}" for i in range(ns)]
    ids = [f"N{j}" for j in range(k)]
    streams = [("feed0", None, "N0")] + [(f"s{j}", ids[j], ids[j + 1]) for j in range(k - 1)]
    streams.append(("prod", ids[-1], None))
    for j in range(1, k):
        if rng.random() < 0.3:
            streams.append((f"feed{j}", None, ids[j]))
    for j in range(k - 1):
        if rng.random() < 0.3:
            streams.append((f"side{j}", ids[j], None))
    for _ in range(int(rng.integers(0, 3))):
        a, b = sorted(rng.choice(k, 2, replace=False))
        if not any(s[1] == ids[b] and s[2] == ids[a] for s in streams):
            streams.append((f"rec{b}{a}", ids[b], ids[a]))
    n_in = {a: sum(1 for s in streams if s[2] == a) for a in ids}
    n_out = {a: sum(1 for s in streams if s[1] == a) for a in ids}
    kinds = []
    reactor = int(rng.integers(0, k)) if rng.random() < 0.7 else -1
    for j, a in enumerate(ids):
        if j == reactor:
            kinds.append("reactor")
        elif n_in[a] == 1 and n_out[a] > 1 and rng.random() < 0.5:
            kinds.append("splitter")
        else:
            kinds.append("separator" if n_out[a] > 1 else "mixer")
    nodes = list(zip(ids, kinds))
    nu = np.zeros((ns, 0))
    if reactor >= 0 and ns >= 2:
        nu = np.zeros((ns, 1))
        nu[0, 0], nu[1, 0] = -1.0, 1.0
    elif reactor >= 0:
        nodes[reactor] = (ids[reactor], "mixer")
    phi, psi = {}, {}
    for a in ids:
        outs = [s[0] for s in streams if s[1] == a]
        w = rng.uniform(0.3, 1.0, len(outs))
        w /= w.sum()
        phi[a] = dict(zip(outs, w))
        wn = rng.uniform(0.3, 1.0, (len(outs), ns))
        wn /= wn.sum(axis=0)
        psi[a] = {o: wn[q] for q, o in enumerate(outs)}
    feeds = {s[0]: (rng.uniform(1.0, 3.0), rng.uniform(50.0, 200.0, ns)) for s in streams if s[1] is None}
    extents = {ids[reactor]: np.array([rng.uniform(5.0, 20.0)])} if nu.shape[1] else {}
    x = simulate_network(nodes, streams, species, nu, feeds, phi, psi, extents)
    net = Network(nodes, streams, species, nu=nu if nu.shape[1] else None)
    S = len(streams)
    sigma = np.concatenate([0.01 * x[:S], 0.01 * x[S:] + 0.5])
    return net, x, sigma


def slsqp_network(net, y, sigma, measured, corr=None):
    """Reference: scipy SLSQP on min sum(((x - y)/sigma)^2 over measured) s.t. the balances,
    over all flows, concentrations and extents (scaled by sigma or by the start); with a
    correlation matrix ``corr`` (n, n) the weights are its inverse over the measured block."""
    n, nz = len(net.names), len(net.unknown_names)
    S, ns = net.n_streams, net.n_species
    ym = np.where(measured, y, np.nan)
    f_mean = np.nanmean(ym[:S]) if np.isfinite(ym[:S]).any() else 1.0
    c = ym[S:].reshape(S, ns)
    c_mean = np.array([np.nanmean(c[:, i]) if np.isfinite(c[:, i]).any() else 1.0 for i in range(ns)])
    jitter = 1.0 + 0.1 * np.random.default_rng(0).random(n)  # a generic start (no equal unknowns)
    x0 = np.where(np.isfinite(ym), ym, np.concatenate([np.full(S, f_mean), np.tile(c_mean, S)]) * jitter)
    scale = np.where(measured, sigma, 0.01 * np.abs(x0) + 1e-3)
    zs = 0.01 * f_mean * float(np.mean(c_mean))
    def unpack(u):
        return x0 + u[:n] * scale, u[n:] * zs

    W = np.eye(int(measured.sum())) if corr is None else np.linalg.inv(corr[np.ix_(measured, measured)])

    def obj(u):
        d = (u[:n][measured] * scale[measured] + x0[measured] - y[measured]) / sigma[measured]
        return float(d @ W @ d)

    def cons(u):
        x, z = unpack(u)
        return net.residual(x[None], z[None])[0]

    # start: a feasible-ish point is not needed for SLSQP; extents start at 0
    sol = optimize.minimize(obj, np.zeros(n + nz), constraints={"type": "eq", "fun": cons}, method="SLSQP",
                            options={"ftol": 1e-15, "maxiter": 1000})
    x, z = unpack(sol.x)
    return x, z, sol


def cvxpy_linearised(net, y, sigma, measured, x_lin):
    """Reference: the WLS problem with the balances linearised at ``x_lin``, by cvxpy/Clarabel."""
    n, nz = len(net.names), len(net.unknown_names)
    J, b = net.linearise(x_lin[:, None])
    x = cp.Variable(n)
    z = cp.Variable(nz) if nz else None
    expr = J[:, :, 0] @ x + (net.extent_matrix @ z if nz else 0)
    m = np.flatnonzero(measured)
    prob = cp.Problem(cp.Minimize(cp.sum_squares(cp.multiply(1.0 / sigma[m], x[m] - y[m]))), [expr == b[:, 0]])
    prob.solve(solver=cp.CLARABEL, tol_gap_abs=1e-14, tol_gap_rel=1e-14, tol_feas=1e-14,
               tol_ktratio=1e-12, max_iter=200)
    return x.value, (z.value if nz else np.zeros(0)), prob.value
