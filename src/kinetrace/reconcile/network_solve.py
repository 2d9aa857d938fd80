"""Reconciliation of a flowsheet (:class:`.network.Network`) by successive linearisation and
projection, batched over time steps."""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np

from ._errors import ReconciliationError
from ._linearisation import iterate, pop_convergence
from ._patterns import MISSING, check_inputs, group_patterns, solve_patterns
from .covariance import resolve_correlation
from .linear import build_result, reconcile_linear
from .network import Network
from .results import Reconciliation
from .uncertainty import resolve_sigma

_NONCONV = ("flag", "raise")


class NetworkReconciliation(Reconciliation):
    """:class:`Reconciliation` of a flowsheet with named views of the packed vector.

    ``x`` holds the flows ``F[<stream>]`` [m^3/s] then the concentrations
    ``c[<stream>,<species>]`` [mol/m^3]; ``z`` the extents ``extent[<node>,<reaction>]`` [mol/s].
    ``extra["classification"]`` is the structural :class:`.classify.Classification` of the
    configured sensors.
    """

    def _named(self, label, arr, names):
        try:
            return arr[:, names.index(label)]
        except ValueError:
            raise ReconciliationError(f"{label!r} is not a variable of the flowsheet") from None

    def flow(self, stream: str) -> np.ndarray:
        """Reconciled flow of ``stream`` (T,). [m^3/s]"""
        return self._named(f"F[{stream}]", self.x, list(self.names))

    def conc(self, stream: str, species: str) -> np.ndarray:
        """Reconciled concentration of ``species`` in ``stream`` (T,). [mol/m^3]"""
        return self._named(f"c[{stream},{species}]", self.x, list(self.names))

    def extent(self, node: str, reaction: str) -> np.ndarray:
        """Extent rate of ``reaction`` in reactor ``node`` (T,); NaN if unobservable. [mol/s]"""
        return self._named(f"extent[{node},{reaction}]", self.z, list(self.unknown_names))

    @property
    def classification(self):
        return self.extra["classification"]


def pack_measurements(network: Network, values: Mapping, T: int | None = None) -> np.ndarray:
    """Packed (T, n) array from ``{label: values}``; labels not given are unmeasured (NaN).

    Parameters
    ----------
    network : Network
    values : mapping
        ``{"F[<stream>]": (T,) or scalar, "c[<stream>,<species>]": ...}``. [m^3/s, mol/m^3]
    T : int, optional
        Number of steps (default: from the longest array given).

    Returns
    -------
    ndarray (T, n)
    """
    names = list(network.names)
    unknown = [k for k in values if k not in names]
    if unknown:
        raise ReconciliationError(f"not variables of the flowsheet: {', '.join(map(repr, unknown))}; "
                                  f"allowed labels: {', '.join(names)}")
    if T is None:
        T = max([np.size(v) for v in values.values()] + [1])
    out = np.full((T, len(names)), np.nan)
    for k, v in values.items():
        try:
            out[:, names.index(k)] = np.broadcast_to(np.asarray(v, dtype=float).ravel()
                                                     if np.ndim(v) else float(v), (T,))
        except ValueError:
            raise ReconciliationError(f"{k!r} has {np.size(v)} values for {T} steps") from None
    return out


def _start(network: Network, y, sigma, status):
    """Initial point: measured values; unmeasured flows from the volume balances alone
    (linear, Kuehn & Davidson 1961), unmeasured concentrations at the mean of that species
    over the measured streams (1 where none), flows that stay unknown at 1."""
    S = network.n_streams
    Lf = network.linear_matrix[[r for r, nm in enumerate(network.constraint_names) if nm.startswith("volume[")], :S]
    yf = np.where(status[:, :S] == MISSING, np.nan, y[:, :S])
    sf = np.where(status[:, :S] == MISSING, 1.0, sigma[:, :S])
    flows = reconcile_linear(yf, sf, Lf).x if np.isfinite(yf).any() else yf
    flows = np.where(np.isfinite(flows), flows, 1.0)
    conc = np.where(status[:, S:] == MISSING, np.nan, y[:, S:]).reshape(y.shape[0], S, -1)
    cnt = np.sum(np.isfinite(conc), axis=1, keepdims=True)
    mean = np.nansum(conc, axis=1, keepdims=True) / np.maximum(cnt, 1)
    mean = np.where(cnt > 0, mean, np.nan)
    conc = np.where(np.isfinite(conc), conc, np.where(np.isfinite(mean), mean, 1.0))
    return np.hstack([np.where(status[:, :S] == MISSING, flows, y[:, :S]), conc.reshape(y.shape[0], -1)])


def reconcile_network(network: Network, y, sigma, *, correlation=None, max_iter=50, tol=1e-10,
                      nonconvergence="flag", cov="diag", chunk_size=4096,
                      check_observability=True) -> NetworkReconciliation:
    """Reconcile the flows and concentrations of a flowsheet and estimate the reactor extents.

    Minimises ``(y - x)' V^-1 (y - x)`` over all measured flows and concentrations subject
    to the bilinear balances of every node (see :class:`.network.Network`) by successive
    linearisation: at each iterate the balances are linearised (``c0 F + F0 c - F0 c0``)
    and the linear problem solved in closed form with the extents and the unmeasured
    variables eliminated by projection (Crowe 1986); iteration stops per step when no
    variable moves by more than ``tol`` of its standard deviation. All steps of a block
    are solved together (steps grouped by their pattern of missing values); there is no
    Python loop over time steps.

    Parameters
    ----------
    network : Network
    y : array_like (T, n) or mapping
        Packed measurements in the order of ``network.names`` (flows [m^3/s], then
        concentrations [mol/m^3]); NaN = unmeasured at that step. Or a mapping
        ``{label: values}`` (see :func:`pack_measurements`); labels not given are unmeasured.
    sigma : array_like (n,) or (T, n), or mapping
        Standard deviations in the same layout (0 = known exactly); for a mapping, labels
        not given get 0 and must then be unmeasured or exact. [m^3/s, mol/m^3]
    correlation : array_like (n, n) or mapping, optional
        Correlation of the measurement errors (see :func:`.covariance.correlation_matrix`). [-]
    max_iter : int
        Iteration cap per step.
    tol : float
        Convergence threshold on the largest step, in standard deviations. [-]
    nonconvergence : {"flag", "raise"}
    cov : {"diag", "full"}
    chunk_size : int
        Steps solved together (bounds memory).
    check_observability : bool
        Raise :class:`UnobservableError` if the configured sensors cannot determine the
        reactor extents.

    Returns
    -------
    NetworkReconciliation
        Reconciled variables, extents [mol/s] with standard deviations, objective and
        degrees of freedom per step (for :func:`.gross_errors.global_test` and
        :func:`.gross_errors.measurement_test` over the whole flowsheet), closure of every
        balance, the structural classification in ``extra["classification"]``. A step at
        which no flow is measured or known has no flow scale (the balances are homogeneous
        in flows and extents): it is returned unreconciled (measurements as given, the rest
        NaN, dof 0, ``converged`` False) and marked in ``extra["no_flow_scale"]``.

    References
    ----------
    .. [1] Crowe, C. M. (1986). Reconciliation of process flow rates by matrix projection.
       Part II: the nonlinear case. AIChE J. 32(4), 616-623. https://doi.org/10.1002/aic.690320410
    .. [2] Narasimhan, S., Jordache, C. (2000). Data Reconciliation and Gross Error Detection,
       Ch. 5. Gulf.

    Examples
    --------
    Feed split in a separator, both products measured (invented numbers, one species):

    >>> net = Network([("S", "separator")], [("f", None, "S"), ("p", "S", None), ("q", "S", None)], ["A"])
    >>> y = {"F[f]": 10.0, "F[p]": 6.2, "F[q]": 4.1, "c[f,A]": 100.0, "c[p,A]": 150.0, "c[q,A]": 30.0}
    >>> s = {k: 0.1 if k.startswith("F") else 2.0 for k in y}
    >>> r = reconcile_network(net, y, s)
    >>> bool(r.converged[0]), round(float(r.flow("f")[0]), 3), int(r.dof[0])
    (True, 10.103, 2)
    """
    if nonconvergence not in _NONCONV:
        raise ValueError(f"unknown nonconvergence {nonconvergence!r}; allowed: {', '.join(_NONCONV)}")
    if cov not in ("diag", "full"):
        raise ValueError(f"unknown cov {cov!r}; allowed: diag, full")
    names = network.names
    if isinstance(y, Mapping):
        y = pack_measurements(network, y)
    if isinstance(sigma, Mapping):
        sigma = np.nan_to_num(pack_measurements(network, sigma, np.shape(y)[0] if np.ndim(y) == 2 else 1))
    sigma, source = resolve_sigma(sigma)
    corr = resolve_correlation(correlation, names)
    y, sigma, status = check_inputs(y, sigma, names)
    if y.shape[1] != len(names):
        raise ReconciliationError(f"packed y has {y.shape[1]} columns; the flowsheet has {len(names)} variables")
    if y.shape[0] == 0:
        raise ReconciliationError("no time steps given (measurements have 0 rows)")
    configured = np.any(status != MISSING, axis=0)
    cls = network.classify(configured)
    if check_observability:
        cls.require_observable(network.unknown_names, what="reaction extents")
    T = y.shape[0]
    parts = []
    groups = group_patterns(status)
    for start in range(0, T, chunk_size):  # loop over blocks of steps, not steps
        idx = np.arange(start, min(T, start + chunk_size))
        parts.append(_solve_block(network, y[idx], sigma[idx], status[idx], (groups[0], groups[1][idx]),
                                  corr, max_iter, tol, cov == "full"))
    out = {k: np.concatenate([p[k] for p in parts]) for k in parts[0]}
    # the balances are homogeneous in the flows and extents: without a measured (or known)
    # flow a step has no flow scale, so nothing there can be reconciled
    no_scale = ~np.any(status[:, :network.n_streams] != MISSING, axis=1)
    if no_scale.any():
        _unreconciled(out, no_scale, y, sigma, status)
    conv, iters = pop_convergence(out, nonconvergence, max_iter)
    extra = {"classification": cls, "no_flow_scale": no_scale} | ({} if corr is None else {"correlation": corr})
    res = build_result(y, sigma, status, out, names, network.unknown_names, network.constraint_names,
                       source, conv, iters, extra)
    return NetworkReconciliation(**{f: getattr(res, f) for f in res.__dataclass_fields__})


def _unreconciled(out, rows, y, sigma, status):
    """Results of steps that cannot be reconciled: measurements as given (no adjustment), the
    rest NaN, no degree of freedom, not converged."""
    meas = status[rows] != MISSING
    out["x"][rows] = np.where(meas, y[rows], np.nan)
    out["var_x"][rows] = np.where(meas, sigma[rows] ** 2, np.nan)
    out["var_adj"][rows] = np.where(meas, 0.0, np.nan)
    out["redundant"][rows], out["observable_x"][rows] = False, meas
    out["observable_z"][rows] = False
    for key in ("z", "var_z", "imbalance", "imbalance_sd", "imbalance_scale"):
        out[key][rows] = np.nan
    out["objective"][rows], out["dof"][rows] = 0.0, 0
    out["converged"][rows], out["iterations"][rows] = False, 0
    for key in ("cov_x", "cov_z"):
        if key in out:
            out[key][rows] = np.nan


def _solve_block(network, y, sigma, status, groups, corr, max_iter, tol, full_cov):
    X = network.extent_matrix

    def linearised(v, rows, minimal, full=False):
        J, b = network.linearise(np.ascontiguousarray(v.T))
        return solve_patterns(y[rows], sigma[rows], status[rows], J, X, b, full, (groups[0], groups[1][rows]),
                              minimal, corr)

    v, xi, conv, iters = iterate(lambda active, va, minimal: linearised(va, active, minimal),
                                 _start(network, y, sigma, status), np.zeros((y.shape[0], X.shape[1])),
                                 sigma, status, max_iter, tol)
    final = linearised(v, slice(None), False, full_cov)
    # exact (not linearised) closure at the raw data with the estimated unknowns
    raw = np.where(status == MISSING, v, y)
    z = np.nan_to_num(final["z"])
    final["imbalance"] = network.residual(raw, z)
    absprod = np.abs(raw[:, network._e_flow] * raw[:, network._e_conc])
    final["imbalance_scale"] = 0.5 * (np.abs(raw) @ np.abs(network.linear_matrix.T)
                                      + absprod @ np.abs(network._G.T) + np.abs(z) @ np.abs(X.T))
    final["converged"], final["iterations"] = conv, iters
    return final
