"""kinetrace.reconcile: data reconciliation and gross-error detection for CSTR data.

Pure numerics on numpy arrays (no configuration, file or database access). Every
function takes arrays with a leading time axis (T, ...) and solves all steps at once;
units are SI (flows [m^3/s], concentrations [mol/m^3], extents [mol/s]).

Public API
----------
Reconciliation
    ``reconcile_linear(y, sigma, A_y, A_z=None, b=None, *, cov="diag", names=None,
    unknown_names=None, constraint_names=None) -> Reconciliation``
        Linear WLS with constraints ``A_y x + A_z z = b`` in closed form (Kuehn &
        Davidson 1961), unmeasured ``z`` eliminated by projection (Crowe et al. 1983).
        NaN in ``y`` = missing at that step (treated as unmeasured there); sigma 0 =
        known exactly.
    ``reconcile_cstr(q_in, q_out, c_in, c_out, nu, *, sigma_q_in, sigma_q_out,
    sigma_c_in, sigma_c_out, dvdt=None, sigma_dvdt=0.0, accumulation=None,
    element_matrix=None, species=None, reactions=None, max_iter=50, tol=1e-10,
    nonconvergence="flag", cov="diag", sigma_source="given", chunk_size=4096)
    -> CSTRReconciliation``
        Bilinear flow x concentration reconciliation of a liquid CSTR by successive
        linearisation (Crowe 1986), vectorised over steps with a per-step convergence
        mask; returns extents of reaction [mol/s] with standard deviations.
    ``CSTRBalances(nu, element_matrix=None, species=(), reactions=())``
        The CSTR model: ``pack``, ``residual``, ``jacobian``, ``check_observable``,
        ``reconcile(y_packed, sigma_packed, accumulation=None, ...)``.

Flowsheets
    ``Network(nodes, streams, species, nu=None, reactions=())``: nodes ``(id, kind)`` with
    kind in ``node_kinds()`` (reactor, mixer, splitter, separator), streams ``(id, source,
    target)`` (None = plant boundary); packed variables ``F[<stream>]`` [m^3/s] then
    ``c[<stream>,<species>]`` [mol/m^3]; volume and species balances at every node, extents
    only at reactors, splitter outlets at the inlet composition; ``Network.classify(measured)``.
    ``reconcile_network(network, y, sigma, *, correlation=None, ...) -> NetworkReconciliation``
        Successive linearisation and projection (Crowe 1986) over the whole flowsheet,
        batched over steps; ``y`` and ``sigma`` packed (T, n) or ``{label: values}``
        (``pack_measurements``); ``flow(stream)``, ``conc(stream, species)``,
        ``extent(node, reaction)``; the gross-error tests below apply unchanged.

Classification
    ``classify_variables(A_y, A_z=None, names=None, unknown_names=None) -> Classification``
        Redundant / non-redundant measured, observable / unobservable unmeasured;
        ``Classification.require_observable`` raises :class:`UnobservableError`.

Closure
    Every result carries ``imbalance``, ``imbalance_sd``, ``imbalance_scale`` (T, m) and
    the properties ``relative_imbalance`` and ``standardized_imbalance``;
    ``closure_table(result, index=None, alpha=0.05) -> pandas.DataFrame`` lists them per
    step and balance with a Sidak-corrected flag.

Missing data
    NaN entries are never dropped: they become unmeasured at that step, are estimated
    where observable, and are reported in ``result.missing`` / ``result.missing_counts``.
    Non-converged steps are flagged in ``result.converged``.

Gross errors
    ``global_test(result, alpha=0.05) -> GlobalTest`` (chi-square, dof = rank),
    ``measurement_test(result, alpha=0.05) -> MeasurementTest`` (Sidak-corrected),
    ``sidak_critical_value(alpha, n_tests)``,
    ``serial_elimination(solve, y, alpha=0.05, max_eliminations=None) -> SerialElimination``,
    ``detect_persistent_bias(result, time=None, *, k=0.5, h=5.0, clip=3.0,
    min_duration=0.0, sensors=None) -> list[BiasEvent]`` (robust tabular CUSUM),
    ``cusum(u, k)``.

Correlated errors
    ``reconcile_linear``, ``reconcile_cstr`` and ``CSTRBalances.reconcile`` take
    ``correlation=`` (an (n, n) matrix or ``{(name_a, name_b): rho}``); ``reconcile_linear``
    also ``covariance=`` (a full (n, n) matrix instead of sigma). ``correlation_matrix(names,
    pairs)``, ``split_covariance(cov, names) -> (sigma, R)`` and ``check_correlation(R, names)``
    check symmetry and positive definiteness and name the offending variables. The global
    and measurement tests then use the full covariance (objective and adjustment variances
    come from ``V = diag(sigma) R diag(sigma)``).

Uncertainty
    ``estimate_sigma(y, steady, method="pooled_std", min_length=10, names=None)
    -> SigmaEstimate``; ``sigma_methods()`` lists the methods. A ``SigmaEstimate`` may be
    passed wherever a sigma is expected; results record ``sigma_source``.

Quick start
-----------
Invented example: reactor R-7 makes B from A (A -> B), feed of pure A at steady level.

>>> import numpy as np
>>> from kinetrace.reconcile import reconcile_cstr, global_test, closure_table
>>> r = reconcile_cstr(q_in=[1.00e-3, 1.01e-3], q_out=[1.02e-3, 1.00e-3],
...                    c_in=[[1000.0, 0.0], [990.0, 0.0]], c_out=[[400.0, 610.0], [420.0, 575.0]],
...                    nu=[[-1.0], [1.0]], sigma_q_in=1e-5, sigma_q_out=1e-5,
...                    sigma_c_in=[10.0, 0.0], sigma_c_out=10.0, species=["A", "B"], reactions=["r1"])
>>> r.extent.round(3).tolist()                # extent rates [mol/s]
[[0.613], [0.576]]
>>> global_test(r).reject.tolist()            # no gross error indicated at alpha = 0.05
[False, False]
>>> closure_table(r).balance.unique().tolist()
['balance[A]', 'balance[B]', 'volume']

Errors
    :class:`ReconciliationError` (bad inputs), :class:`UnobservableError` (sensors cannot
    determine the required unknowns), :class:`ConvergenceError`; all derive from
    :class:`kinetrace.errors.KinetraceError`.
"""

from ._errors import ConvergenceError, ReconciliationError, UnobservableError
from .classify import Classification, classify_variables
from .closure import closure_table
from .covariance import check_correlation, correlation_matrix, split_covariance
from .cstr import CSTRBalances, CSTRReconciliation, reconcile_cstr
from .gross_errors import (GlobalTest, MeasurementTest, SerialElimination, global_test,
                           measurement_test, serial_elimination, sidak_critical_value)
from .linear import reconcile_linear
from .network import Network, node_kinds
from .network_solve import NetworkReconciliation, pack_measurements, reconcile_network
from .persistence import BiasEvent, cusum, detect_persistent_bias
from .results import Reconciliation
from .uncertainty import SigmaEstimate, estimate_sigma, sigma_methods

__all__ = [
    "BiasEvent", "CSTRBalances", "Network", "NetworkReconciliation", "node_kinds", "pack_measurements",
    "reconcile_network", "CSTRReconciliation", "Classification", "ConvergenceError",
    "GlobalTest", "MeasurementTest", "Reconciliation", "ReconciliationError", "SerialElimination",
    "SigmaEstimate", "UnobservableError", "check_correlation", "classify_variables", "closure_table",
    "correlation_matrix", "cusum", "detect_persistent_bias", "split_covariance",
    "estimate_sigma", "global_test", "measurement_test", "reconcile_cstr", "reconcile_linear",
    "serial_elimination", "sidak_critical_value", "sigma_methods",
]
