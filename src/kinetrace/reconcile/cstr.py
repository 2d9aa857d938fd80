"""Bilinear reconciliation of a liquid CSTR (flows x concentrations) by successive
linearisation, vectorised over all time steps."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ._errors import ReconciliationError
from ._kernel import _projection, row_scale
from ._linearisation import iterate, pop_convergence
from ._patterns import MISSING, check_inputs, group_patterns, solve_patterns
from .classify import classify_variables
from .linear import build_result
from .results import Reconciliation
from .covariance import resolve_correlation
from .uncertainty import resolve_sigma

_NONCONV = ("flag", "raise")


class CSTRReconciliation(Reconciliation):
    """:class:`Reconciliation` of a CSTR with named views of the packed vector.

    Variable order of ``x``: ``q_in, q_out, c_in[0..ns), c_out[0..ns), dvdt``;
    unknowns ``z`` are the reaction extents.
    """

    @property
    def _ns(self):
        return self.extra["n_species"]

    def _col(self, a, name):
        ns = self._ns
        sl = {"q_in": 0, "q_out": 1, "c_in": slice(2, 2 + ns), "c_out": slice(2 + ns, 2 + 2 * ns),
              "dvdt": 2 + 2 * ns}[name]
        return a[:, sl]

    q_in = property(lambda s: s._col(s.x, "q_in"), doc="Reconciled feed flow. [m^3/s]")
    q_out = property(lambda s: s._col(s.x, "q_out"), doc="Reconciled outlet flow. [m^3/s]")
    c_in = property(lambda s: s._col(s.x, "c_in"), doc="Reconciled feed concentrations (T, ns). [mol/m^3]")
    c_out = property(lambda s: s._col(s.x, "c_out"), doc="Reconciled outlet concentrations (T, ns). [mol/m^3]")
    dvdt = property(lambda s: s._col(s.x, "dvdt"), doc="Reconciled rate of change of volume. [m^3/s]")
    extent = property(lambda s: s.z, doc="Extent rates of the reactions (T, nr); NaN if unobservable. [mol/s]")
    extent_sd = property(lambda s: np.sqrt(s.var_z), doc="Standard deviation of the extent rates. [mol/s]")


@dataclass(frozen=True)
class CSTRBalances:
    """Balances of one liquid CSTR at constant density.

    Component balances ``q_out c_out_i - q_in c_in_i - sum_j nu_ij xi_j + acc_i = 0``
    (or, without reactions, element balances ``E (q_out c_out - q_in c_in + acc) = 0``) and
    the volume balance ``q_in - q_out - dV/dt = 0``.

    Parameters
    ----------
    nu : ndarray (ns, nr) or None
        Stoichiometric coefficients, negative for reactants. [-]
    element_matrix : ndarray (ne, ns) or None
        Atoms of each element per molecule of each species. With ``nu`` it is only
        checked (``E nu = 0``), since element balances then follow from the component
        balances; without ``nu`` the element balances are the constraints.
    species, reactions : tuple of str
        Labels.
    """

    nu: np.ndarray | None
    element_matrix: np.ndarray | None = None
    species: tuple = ()
    reactions: tuple = ()

    def __post_init__(self):
        nu = None if self.nu is None else np.atleast_2d(np.asarray(self.nu, dtype=float))
        E = None if self.element_matrix is None else np.atleast_2d(np.asarray(self.element_matrix, dtype=float))
        if nu is None and E is None:
            raise ReconciliationError("CSTR balances need a stoichiometric matrix nu or an element matrix")
        ns = nu.shape[0] if nu is not None else E.shape[1]
        species = tuple(self.species) or tuple(f"S{i}" for i in range(ns))
        nr = 0 if nu is None else nu.shape[1]
        reactions = tuple(self.reactions) or tuple(f"R{j}" for j in range(nr))
        if len(species) != ns or len(reactions) != nr:
            raise ReconciliationError(
                f"{len(species)} species / {len(reactions)} reaction names for nu of shape ({ns}, {nr})")
        if E is not None:
            if E.shape[1] != ns:
                raise ReconciliationError(f"element matrix has {E.shape[1]} species columns; nu has {ns} species")
            if nu is not None:
                bal = E @ nu
                bad = np.argwhere(np.abs(bal) > 1e-9 * max(1.0, np.abs(E).max() * np.abs(nu).max()))
                if bad.size:
                    e, j = bad[0]
                    raise ReconciliationError(
                        f"reaction {reactions[j]!r} does not balance element row {e}: E @ nu = {bal[e, j]:g}")
        object.__setattr__(self, "nu", nu)
        object.__setattr__(self, "element_matrix", E)
        object.__setattr__(self, "species", species)
        object.__setattr__(self, "reactions", reactions)

    # ----- layout -----
    @property
    def n_species(self) -> int:
        return len(self.species)

    @property
    def names(self) -> tuple:
        """Labels of the packed variable vector."""
        return (("q_in", "q_out") + tuple(f"c_in[{s}]" for s in self.species)
                + tuple(f"c_out[{s}]" for s in self.species) + ("dvdt",))

    @property
    def unknown_names(self) -> tuple:
        return tuple(f"extent[{r}]" for r in self.reactions)

    @property
    def constraint_names(self) -> tuple:
        rows = (tuple(f"balance[{s}]" for s in self.species) if self.nu is not None
                else tuple(f"element[{e}]" for e in range(self.element_matrix.shape[0])))
        return rows + ("volume",)

    @property
    def _wm(self):
        return np.eye(self.n_species) if self.nu is not None else self.element_matrix

    @property
    def extent_matrix(self):
        """Constant constraint coefficients of the extents (m, nr)."""
        nr = len(self.reactions)
        wnu = -(self._wm @ self.nu) if nr else np.zeros((self._wm.shape[0], 0))
        return np.vstack([wnu, np.zeros((1, nr))])

    def pack(self, q_in, q_out, c_in, c_out, dvdt=None):
        """Stack the variables into the packed vector (T, 2 ns + 3); ``dvdt`` None -> 0."""
        q_in = np.atleast_1d(np.asarray(q_in, dtype=float))
        T = q_in.shape[0]
        ns = self.n_species
        cols = [q_in[:, None], np.broadcast_to(np.asarray(q_out, float), (T,))[:, None]]
        for nm, c in (("c_in", c_in), ("c_out", c_out)):
            c = np.asarray(c, dtype=float)
            try:
                cols.append(np.broadcast_to(c.reshape(T, ns) if c.ndim == 2 else c, (T, ns)))
            except ValueError:
                raise ReconciliationError(f"{nm} has shape {c.shape}; expected ({T}, {ns})") from None
        cols.append(np.zeros((T, 1)) if dvdt is None else np.broadcast_to(np.asarray(dvdt, float), (T,))[:, None])
        return _c_order(cols)

    # ----- model -----
    def residual(self, v, extent, accumulation=None):
        """Constraint residuals at packed variables ``v`` (T, n) and extents (T, nr). [mol/s, m^3/s]"""
        ns = self.n_species
        qi, qo, ci, co, dv = v[:, 0], v[:, 1], v[:, 2:2 + ns], v[:, 2 + ns:2 + 2 * ns], v[:, -1]
        g = qo[:, None] * co - qi[:, None] * ci
        if accumulation is not None:
            g = g + accumulation
        rows = g @ self._wm.T + extent @ self.extent_matrix[:-1].T
        return np.hstack([rows, (qi - qo - dv)[:, None]])

    def jacobian(self, v):
        """Derivative of :meth:`residual` with respect to ``v``: (T, m, n)."""
        return np.moveaxis(self._jacobian_tl(np.ascontiguousarray(v.T)), 2, 0)

    def _jacobian_tl(self, vt):
        """The Jacobian with time last: (m, n, T), from variables with time last (n, T)."""
        ns = self.n_species
        W = self._wm
        ne = W.shape[0]
        qi, qo, ci, co = vt[0], vt[1], vt[2:2 + ns], vt[2 + ns:2 + 2 * ns]
        J = np.zeros((ne + 1, 2 * ns + 3, vt.shape[1]))
        J[:ne, 0] = -(W @ ci)
        J[:ne, 1] = W @ co
        J[:ne, 2:2 + ns] = -W[:, :, None] * qi
        J[:ne, 2 + ns:2 + 2 * ns] = W[:, :, None] * qo
        J[ne, 0], J[ne, 1], J[ne, -1] = 1.0, -1.0, -1.0
        return J

    def _start(self, y):
        """Initial point: measurements, missing flows from the volume balance, others 0."""
        v = np.where(np.isfinite(y), y, 0.0)
        dv = v[:, -1]
        qi_m, qo_m = np.isnan(y[:, 0]), np.isnan(y[:, 1])
        v[:, 0] = np.where(qi_m, np.where(qo_m, 1.0, v[:, 1] + dv), v[:, 0])
        v[:, 1] = np.where(qo_m, np.where(qi_m, 1.0, v[:, 0] - dv), v[:, 1])
        return v

    def check_observable(self, status):
        """Raise :class:`UnobservableError` if the configured sensors cannot give the extents.

        ``status`` (T, n) per variable and step (0 measured, 1 missing, 2 fixed); a
        variable counts as configured if it is measured or fixed at any step.
        """
        configured = np.any(status != MISSING, axis=0)
        rng = np.random.default_rng(12345)
        v = 1.0 + rng.random((1, len(self.names)))  # generic point: structural ranks
        J = self.jacobian(v)[0]
        free = ~configured
        Az = np.hstack([J[:, free], self.extent_matrix])
        unk = tuple(np.array(self.names)[free]) + self.unknown_names
        c = classify_variables(J[:, configured], Az, np.array(self.names)[configured], unk)
        c.require_observable(self.unknown_names, what="reaction extents (hence conversion)")
        return c

    def reconcile(self, y, sigma, accumulation=None, *, max_iter=50, tol=1e-10,
                  nonconvergence="flag", cov="diag", chunk_size=4096,
                  check_observability=True, correlation=None) -> CSTRReconciliation:
        """Reconcile packed measurements ``y`` (T, n) (see :meth:`pack`); see :func:`reconcile_cstr`.
        ``correlation``: (n, n) over :attr:`names`, or ``{(name_a, name_b): rho}``."""
        if nonconvergence not in _NONCONV:
            raise ValueError(f"unknown nonconvergence {nonconvergence!r}; allowed: {', '.join(_NONCONV)}")
        if cov not in ("diag", "full"):
            raise ValueError(f"unknown cov {cov!r}; allowed: diag, full")
        sigma, source = resolve_sigma(sigma)
        corr = resolve_correlation(correlation, self.names)
        y, sigma, status = check_inputs(y, sigma, self.names)
        if y.shape[1] != len(self.names):
            raise ReconciliationError(f"packed y has {y.shape[1]} columns; expected {len(self.names)}")
        if y.shape[0] == 0:
            raise ReconciliationError("no time steps given (measurements have 0 rows)")
        if accumulation is not None:
            accumulation = np.broadcast_to(np.asarray(accumulation, float), (y.shape[0], self.n_species))
        if check_observability:
            self.check_observable(status)
        T, n = y.shape
        out = _allocate(T, n, len(self.reactions), len(self.constraint_names), cov == "full")
        solved = np.zeros(T, bool)
        if cov == "diag" and corr is None:  # the compiled path: uncorrelated, nothing missing
            kern = ~np.any(status == MISSING, axis=1)
            if kern.any():
                solved = self._compiled(y, sigma, accumulation, kern, max_iter, tol, out)
        rest = np.flatnonzero(~solved)
        if rest.size:
            groups = group_patterns(status[rest])
            for start in range(0, rest.size, chunk_size):  # loop over blocks of steps, not steps
                idx = rest[start:start + chunk_size]
                acc = None if accumulation is None else accumulation[idx]
                grp = (groups[0], groups[1][start:start + chunk_size])
                part = self._iterate(y[idx], sigma[idx], status[idx], acc, grp, max_iter, tol, cov == "full",
                                     corr)
                for k, a in part.items():
                    out[k][idx] = a
        conv, iters = pop_convergence(out, nonconvergence, max_iter)
        extra = {"n_species": self.n_species} | ({} if corr is None else {"correlation": corr})
        res = build_result(y, sigma, status, out, self.names, self.unknown_names, self.constraint_names,
                           source, conv, iters, extra)
        return CSTRReconciliation(**{f: getattr(res, f) for f in res.__dataclass_fields__})

    def _constants(self, y, sigma):
        """Projection ``P`` (p, m) with ``P A_xi = 0``, the extent estimator ``Z`` (nz, m) and
        the observable extents, from the row-equilibrated extent columns (as on the numpy
        path; the scaling is for conditioning only, the solution does not depend on it)."""
        y, sigma = y[:4096], sigma[:4096]  # a sample is enough for a scaling
        Exi = self.extent_matrix
        J = self.jacobian(np.mean(y, axis=0, keepdims=True))[0]
        rs = row_scale(J, Exi, np.sqrt(np.mean(sigma ** 2, axis=0)))
        ((_, P, pinv, obs),) = list(_projection((Exi / rs[:, None])[None]))
        return P[0] / rs, pinv[0] / rs, obs[0]

    def _compiled(self, y, sigma, accumulation, kern, max_iter, tol, out):
        """Solve the steps ``kern`` (nothing missing) with the compiled kernel into ``out``;
        return the mask of steps solved (a rank-deficient step is left to the numpy path)."""
        from ._compiled import cstr_kernel   # numba starts here, only where the kernel is used
        every = bool(kern.all())
        idx = slice(None) if every else np.flatnonzero(kern)
        yk, sk = (y, sigma) if every else (y[idx], sigma[idx])
        ns, ne = self.n_species, self._wm.shape[0]
        P, Z, obs = self._constants(yk, sk)
        acc = (np.zeros((1, ns)) if accumulation is None
               else np.ascontiguousarray(accumulation if every else accumulation[idx]))
        Tk = yk.shape[0]
        res = {k: (out[k] if every else np.empty((Tk,) + out[k].shape[1:], out[k].dtype))
               for k in _KERNEL_KEYS}
        ok = np.zeros(Tk, bool)
        cstr_kernel(np.ascontiguousarray(yk), np.ascontiguousarray(sk), acc, accumulation is not None,
                    np.ascontiguousarray(self._wm, dtype=float), P[:, :ne] @ self._wm,
                    np.ascontiguousarray(P[:, ne]), np.ascontiguousarray(Z),
                    np.ascontiguousarray(self.extent_matrix), obs, max_iter, tol,
                    *(res[k] for k in _KERNEL_KEYS), ok)
        if not every:
            sel = idx[ok]
            for k in _KERNEL_KEYS:
                out[k][sel] = res[k][ok]
        out["observable_x"][idx] = True
        out["observable_z"][idx] = obs
        solved = np.zeros(len(kern), bool)
        solved[idx] = ok
        return solved

    def _linearised(self, v, y, sigma, status, acc, groups, full_cov, minimal, corr=None):
        """Solve the problem linearised at ``v`` for the given steps (the constraints are
        linear in the extents, so the linearisation does not depend on them)."""
        vt = np.ascontiguousarray(v.T)
        J = self._jacobian_tl(vt)
        # b = J v + Jxi xi - f(v, xi) simplifies (f is bilinear in v, linear in xi) to
        # [W (q_out c_out - q_in c_in - acc); 0]
        ns = self.n_species
        g = vt[1] * vt[2 + ns:2 + 2 * ns] - vt[0] * vt[2:2 + ns]
        if acc is not None:
            g = g - acc.T
        b = np.vstack([self._wm @ g, np.zeros((1, v.shape[0]))])
        return solve_patterns(y, sigma, status, J, self.extent_matrix, b, full_cov, groups, minimal, corr)

    def _iterate(self, y, sigma, status, acc, groups, max_iter, tol, full_cov, corr=None):
        T = y.shape[0]

        def solve(active, va, minimal):
            return self._linearised(va, y[active], sigma[active], status[active],
                                    None if acc is None else acc[active], (groups[0], groups[1][active]),
                                    False, minimal=minimal, corr=corr)

        v, xi, conv, iters = iterate(solve, self._start(y), np.zeros((T, len(self.reactions))), sigma,
                                     status, max_iter, tol)
        # statistics at the final linearisation point (one more closed-form pass)
        final = self._linearised(v, y, sigma, status, acc, groups, full_cov, minimal=False, corr=corr)
        # exact (not linearised) closure at the raw data with the estimated unknowns
        raw = np.where(status == MISSING, v, y)
        final["imbalance"] = self.residual(raw, np.nan_to_num(final["z"]), acc)
        ns = self.n_species
        Wa = np.abs(self._wm)
        qc = np.abs(raw[:, :1] * raw[:, 2:2 + ns]) + np.abs(raw[:, 1:2] * raw[:, 2 + ns:2 + 2 * ns])
        thr = qc @ Wa.T + np.abs(np.nan_to_num(final["z"])) @ np.abs(self.extent_matrix[:-1]).T
        vol = np.abs(raw[:, 0]) + np.abs(raw[:, 1]) + np.abs(raw[:, -1])
        final["imbalance_scale"] = 0.5 * np.hstack([thr, vol[:, None]])
        final["converged"], final["iterations"] = conv, iters
        return final


def _c_order(blocks):
    """Columns side by side in one C-ordered (T, n) array (``np.hstack`` of broadcast
    columns would be column-major, and the per-step kernel reads rows)."""
    T = blocks[0].shape[0]
    out = np.empty((T, sum(b.shape[1] for b in blocks)))
    j = 0
    for b in blocks:
        out[:, j:j + b.shape[1]] = b
        j += b.shape[1]
    return out


#: Results the compiled kernel writes, in the order of its arguments.
_KERNEL_KEYS = ("x", "z", "var_x", "var_adj", "var_z", "redundant", "objective", "dof", "imbalance",
                "imbalance_sd", "imbalance_scale", "converged", "iterations")


def _allocate(T, n, nz, m, full_cov):
    """Result arrays of T steps (time first), as :func:`._patterns.solve_patterns` returns them."""
    shapes = {"x": (n,), "var_x": (n,), "var_adj": (n,), "z": (nz,), "var_z": (nz,), "redundant": (n,),
              "observable_x": (n,), "observable_z": (nz,), "objective": (), "dof": (), "imbalance": (m,),
              "imbalance_sd": (m,), "imbalance_scale": (m,), "converged": (), "iterations": ()}
    if full_cov:
        shapes.update(cov_x=(n, n), cov_z=(nz, nz))
    dtypes = {"redundant": bool, "observable_x": bool, "observable_z": bool, "converged": bool,
              "dof": np.int64, "iterations": np.int64}
    return {k: np.empty((T,) + sh, dtypes.get(k, float)) for k, sh in shapes.items()}


def reconcile_cstr(q_in, q_out, c_in, c_out, nu, *, sigma_q_in, sigma_q_out, sigma_c_in,
                   sigma_c_out, dvdt=None, sigma_dvdt=0.0, accumulation=None, element_matrix=None,
                   species=None, reactions=None, max_iter=50, tol=1e-10, nonconvergence="flag",
                   cov="diag", sigma_source="given", chunk_size=4096,
                   correlation=None) -> CSTRReconciliation:
    """Reconcile the flows and concentrations of a liquid CSTR and estimate the extents.

    Minimises the weighted squared adjustments of all measured variables subject to the
    bilinear component balances and the volume balance (see :class:`CSTRBalances`) by
    successive linearisation: at each iterate the constraints are linearised and the
    linear problem solved in closed form with the extents (and any missing variables)
    eliminated by projection; iteration stops per step when no variable moves by more
    than ``tol`` of its standard deviation. Its fixed point satisfies the first-order
    optimality conditions of the nonlinear problem.

    Steps at which nothing is missing (the usual case) are solved by a compiled kernel
    (numba, 32 steps side by side in vector lanes, spread over the cores; compiled once and cached
    on first use, which takes about half a minute on a fresh checkout); steps with a missing
    value, rank-deficient steps and ``cov="full"`` take the numpy path, which groups steps by
    their pattern of missing values and vectorises over time. Both give the same numbers to
    round-off.

    Parameters
    ----------
    q_in, q_out : array_like (T,)
        Feed and outlet volumetric flows; NaN = missing at that step. [m^3/s]
    c_in, c_out : array_like (T, ns)
        Feed and outlet concentrations; NaN = missing (unmeasured) at that step. [mol/m^3]
    nu : array_like (ns, nr) or None
        Stoichiometric coefficients (negative for reactants); None to use element
        balances only (no extents). [-]
    sigma_q_in, sigma_q_out : float or array_like (T,)
        Standard deviations of the flow measurements; 0 = known exactly. [m^3/s]
    sigma_c_in, sigma_c_out : float or array_like (ns,) or (T, ns)
        Standard deviations of the concentrations; 0 = known exactly (e.g. a product
        known to be absent from the feed). [mol/m^3]
    dvdt : array_like (T,), optional
        Rate of change of liquid volume from the level; None = steady level (0 exactly). [m^3/s]
    sigma_dvdt : float or array_like (T,)
        Its standard deviation. [m^3/s]
    accumulation : array_like (T, ns), optional
        Known hold-up term V dC/dt of each species; ignored if None. [mol/s]
    element_matrix : array_like (ne, ns), optional
        Element matrix; checked against ``nu`` (``E nu = 0``) or used instead of it.
    species, reactions : sequence of str, optional
        Labels.
    max_iter : int
        Iteration cap per step.
    tol : float
        Convergence threshold on the largest step, in standard deviations. [-]
    nonconvergence : {"flag", "raise"}
        Flag non-convergent steps in ``converged`` or raise :class:`ConvergenceError`.
    cov : {"diag", "full"}
        Variances only, or also full covariance matrices.
    sigma_source : str
        Recorded in the result (e.g. ``SigmaEstimate.source``).
    chunk_size : int
        Steps solved together (bounds memory).
    correlation : array_like (n, n) or mapping, optional
        Correlation of the measurement errors over the packed variables ``q_in, q_out,
        c_in[<species>]..., c_out[<species>]..., dvdt``, as a matrix or as
        ``{("c_out[A]", "c_out[B]"): rho}`` (e.g. two concentrations from one analyzer);
        checked symmetric positive definite. Correlated problems take the numpy path. [-]

    Returns
    -------
    CSTRReconciliation
        Reconciled variables (``q_in``, ``c_out``, ...), extents [mol/s] with their
        standard deviations, objective and degrees of freedom per step, closure.

    Raises
    ------
    UnobservableError
        If the configured sensors cannot determine the extents at all.

    References
    ----------
    .. [1] Crowe, C. M. (1986). Reconciliation of process flow rates by matrix
       projection. Part II: the nonlinear case. AIChE J. 32(4), 616-623.
       https://doi.org/10.1002/aic.690320410
    .. [2] Pai, C. C. D., Fisher, G. D. (1988). Application of Broyden's method to
       reconciliation of nonlinear constrained data. AIChE J. 34(5), 873-876.

    Examples
    --------
    A -> B at steady level, feed of pure A, both outlet concentrations measured:

    >>> r = reconcile_cstr([1e-3], [1.02e-3], [[1000.0, 0.0]], [[400.0, 610.0]],
    ...                    [[-1.0], [1.0]], sigma_q_in=1e-5, sigma_q_out=1e-5,
    ...                    sigma_c_in=[10.0, 0.0], sigma_c_out=10.0)
    >>> bool(r.converged[0]), round(float(r.extent[0, 0]), 3)
    (True, 0.613)
    """
    model = CSTRBalances(nu, element_matrix, tuple(species or ()), tuple(reactions or ()))
    y = model.pack(q_in, q_out, c_in, c_out, dvdt)
    T, ns = y.shape[0], model.n_species

    def col(s, k):
        a = np.asarray(s, dtype=float)
        return np.broadcast_to(a[:, None] if (k == 1 and a.ndim == 1) else a, (T, k))

    try:
        sig = _c_order([col(sigma_q_in, 1), col(sigma_q_out, 1), col(sigma_c_in, ns),
                         col(sigma_c_out, ns), col(sigma_dvdt if dvdt is not None else 0.0, 1)])
    except ValueError as e:
        raise ReconciliationError(f"a sigma does not match T={T} steps and {ns} species: {e}") from None
    res = model.reconcile(y, sig, accumulation, max_iter=max_iter, tol=tol,
                          nonconvergence=nonconvergence, cov=cov, chunk_size=chunk_size,
                          correlation=correlation)
    if sigma_source != "given":
        object.__setattr__(res, "sigma_source", sigma_source)
    return res
