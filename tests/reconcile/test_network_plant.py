"""End to end: a simulated reactor with separator and recycle (invented plant R-7 / S-7).

A biased flow meter on the reactor outlet is found by the gross-error tests over the whole
flowsheet only when the separator's meters (product and recycle flows and analysers) are
in the reconciliation; with the reactor's meters alone its bias is absorbed by the unmeasured
streams and cannot be seen.
"""

import numpy as np
import pytest

from kinetrace.reconcile import (Network, global_test, measurement_test, reconcile_network,
                                 serial_elimination)

T = 300
BIAS = 0.06  # +6 % of reading on F[eff]; meter sigma 1 % (common practice, no source)


def plant(T, rng):
    """True steady states of feed -> mixer M -> CSTR R (A -> B, first order) -> separator S ->
    product, with a recycle S -> M; feed flow varying +-10 % over the run. Vectorised over
    steps: F_mix = F0 / (1 - phi); n_A,mix = n_A0 / (1 - psi_A / (1 + k tau)), tau = V / F_mix;
    n_B,eff = xi / (1 - psi_B) (mass balances of the loop, common practice, no source)."""
    V, k, cA0 = 5.0, 2e-4, 2000.0            # m3, 1/s, mol/m3
    phi, psi_a, psi_b = 0.4, 0.8, 0.1        # recycle fractions: volume, A, B
    F0 = 1e-3 * (1.0 + 0.1 * np.sin(np.linspace(0.0, 6.0, T)))
    Fm = F0 / (1.0 - phi)
    tau = V / Fm
    nA_m = F0 * cA0 / (1.0 - psi_a / (1.0 + k * tau))
    nA_e = nA_m / (1.0 + k * tau)
    xi = nA_m - nA_e
    nB_e = xi / (1.0 - psi_b)
    nB_m = psi_b * nB_e
    flows = {"feed": F0, "mix": Fm, "eff": Fm, "prod": (1 - phi) * Fm, "rec": phi * Fm}
    moles = {"feed": (F0 * cA0, 0 * F0), "mix": (nA_m, nB_m), "eff": (nA_e, nB_e),
             "prod": ((1 - psi_a) * nA_e, (1 - psi_b) * nB_e), "rec": (psi_a * nA_e, psi_b * nB_e)}
    truth = {f"F[{s}]": f for s, f in flows.items()}
    for s, (na, nb) in moles.items():
        truth[f"c[{s},A]"], truth[f"c[{s},B]"] = na / flows[s], nb / flows[s]
    return truth, xi


def network():
    return Network([("M", "mixer"), ("R", "reactor"), ("S", "separator")],
                   [("feed", None, "M"), ("mix", "M", "R"), ("eff", "R", "S"), ("prod", "S", None),
                    ("rec", "S", "M")], ["A", "B"], nu=[[-1.0], [1.0]], reactions=["r1"])


def measure(truth, labels, rng, bias=0.0):
    y, s = {}, {}
    for k in labels:
        x = truth[k]
        if k == "c[feed,B]":  # no B in the fresh feed: known exactly
            y[k], s[k] = x, 0.0
            continue
        sd = 0.01 * x if k.startswith("F") else 0.01 * x + 1.0
        y[k] = x + sd * rng.standard_normal(T) + (bias * x if k == "F[eff]" else 0.0)
        s[k] = sd
    return y, s


REACTOR_METERS = ["F[feed]", "F[eff]", "c[feed,A]", "c[feed,B]", "c[mix,A]", "c[mix,B]", "c[eff,A]", "c[eff,B]"]
SEPARATOR_METERS = ["F[prod]", "F[rec]", "c[prod,A]", "c[prod,B]", "c[rec,A]", "c[rec,B]"]


def _run(labels, bias, seed=11):
    rng = np.random.default_rng(seed)
    truth, xi = plant(T, rng)
    net = network()
    y, s = measure(truth, labels, rng, bias)
    r = reconcile_network(net, y, s)
    return net, r, truth, xi, y, s


def test_unbiased_plant_is_reconciled_and_passes():
    net, r, truth, xi, _, _ = _run(REACTOR_METERS + SEPARATOR_METERS, 0.0)
    assert r.converged.all() and np.all(r.dof == 7)
    # extent within a few of its standard deviations of the simulated one
    e = r.extent("R", "r1")
    assert np.median(np.abs(e - xi) / np.sqrt(r.var_z[:, 0])) < 2.0
    # global test at alpha = 0.05: about 5 % false alarms (chi-square, 7 dof)
    assert global_test(r).reject.mean() < 0.12


def test_biased_reactor_outlet_meter_found_thanks_to_separator_meters():
    net, r, truth, _, y, s = _run(REACTOR_METERS + SEPARATOR_METERS, BIAS)
    j = net.names.index("F[eff]")
    assert r.redundant[:, j].all()
    mt = measurement_test(r)
    assert global_test(r).reject.mean() > 0.95
    assert mt.flagged[:, j].mean() > 0.95
    assert (np.nanargmax(mt.z, axis=1) == j).mean() > 0.95
    # serial elimination removes that meter and estimates its bias
    Y = np.column_stack([np.broadcast_to(y.get(k, np.nan), (T,)) for k in net.names])
    Sg = np.column_stack([np.broadcast_to(s.get(k, 0.0), (T,)) for k in net.names])
    se = serial_elimination(lambda ys, rows: reconcile_network(net, ys, Sg[rows]), Y[:60])
    assert se.suspect[:, j].mean() > 0.95
    hit = se.suspect[:, j]
    assert np.median(se.bias[hit, j] / truth["F[eff]"][:60][hit]) == pytest.approx(BIAS, abs=0.01)


def test_biased_reactor_outlet_meter_not_found_without_separator_meters():
    net, r, truth, _, _, _ = _run(REACTOR_METERS, BIAS)
    j = net.names.index("F[eff]")
    assert r.converged.all() and np.all(r.dof == 1)
    mt = measurement_test(r)
    # the bias is absorbed: the unmeasured reactor inlet flow follows the biased meter
    assert np.median(r.flow("mix") / truth["F[mix]"]) == pytest.approx(1.0 + BIAS, abs=0.01)
    # and the tests stay at their false-alarm rate (alpha = 0.05)
    assert global_test(r).reject.mean() < 0.12
    assert mt.flagged[:, j].mean() < 0.12
