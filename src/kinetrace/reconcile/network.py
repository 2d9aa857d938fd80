"""Flowsheet around a reactor: nodes, streams and their bilinear balances.

A :class:`Network` states the nodes (``reactor``, ``mixer``, ``splitter``, ``separator``) and
the streams between them (or to and from the plant boundary). Each stream carries a
volumetric flow ``F`` [m^3/s] and the concentrations ``c`` [mol/m^3] of every species. At
constant density the balances of node k are

- volume: ``sum_in F - sum_out F = 0``;
- species i (reactor, mixer, separator): ``sum_in F c_i - sum_out F c_i + [reactor] sum_j nu_ij
  xi_kj = 0``, the extents ``xi`` [mol/s] only at reactor nodes;
- splitter (one inlet): every outlet has the inlet's composition, ``c_out,i - c_in,i = 0``.

The model is pure numerics; :mod:`.network_solve` reconciles measurements against it.

References
----------
.. [1] Crowe, C. M. (1986). Reconciliation of process flow rates by matrix projection.
   Part II: the nonlinear case. AIChE J. 32(4), 616-623. https://doi.org/10.1002/aic.690320410
.. [2] Narasimhan, S., Jordache, C. (2000). Data Reconciliation and Gross Error Detection,
   Ch. 5 (nonlinear steady-state data reconciliation, bilinear balances). Gulf.
"""

from __future__ import annotations

import numpy as np

from ._errors import ReconciliationError
from .classify import Classification, classify_variables

NODE_KINDS = ("reactor", "mixer", "splitter", "separator")


def node_kinds() -> list[str]:
    """Node kinds a :class:`Network` accepts.

    >>> node_kinds()
    ['reactor', 'mixer', 'splitter', 'separator']
    """
    return list(NODE_KINDS)


class Network:
    """Nodes, streams and species of a flowsheet, and its balances.

    Parameters
    ----------
    nodes : sequence of (id, kind)
        Node ids and kinds (see :func:`node_kinds`).
    streams : sequence of (id, source, target)
        Stream ids with the node they leave and the node they enter; ``None`` for the
        plant boundary (a feed has no source, a product no target).
    species : sequence of str
        Species carried by every stream (concentrations in this order).
    nu : array_like (ns, nr), optional
        Stoichiometric coefficients of the reactions, negative for reactants; needed when
        there is a reactor node. Every reactor node gets its own extents. [-]
    reactions : sequence of str, optional
        Reaction labels.

    Examples
    --------
    A -> B in reactor R with separator S recycling to mixer M (invented plant):

    >>> net = Network([("M", "mixer"), ("R", "reactor"), ("S", "separator")],
    ...               [("feed", None, "M"), ("mix", "M", "R"), ("eff", "R", "S"),
    ...                ("prod", "S", None), ("rec", "S", "M")], ["A", "B"], nu=[[-1.0], [1.0]])
    >>> len(net.names), net.constraint_names[:3], net.unknown_names
    (15, ('volume[M]', 'balance[M,A]', 'balance[M,B]'), ('extent[R,r0]',))
    """

    def __init__(self, nodes, streams, species, nu=None, reactions=()):
        self.nodes = tuple((str(a), str(k)) for a, k in nodes)
        self.streams = tuple((str(s), None if a is None else str(a), None if b is None else str(b))
                             for s, a, b in streams)
        self.species = tuple(str(s) for s in species)
        self._validate(nu, reactions)
        self._build()

    # ----- checks -----
    def _validate(self, nu, reactions):
        problems = []
        ids = [a for a, _ in self.nodes]
        sids = [s for s, _, _ in self.streams]
        for kind_of, what in ((ids, "node"), (sids, "stream"), (list(self.species), "species")):
            for d in sorted({x for x in kind_of if kind_of.count(x) > 1}):
                problems.append(f"{what} {d!r} is listed twice")
        for a, k in self.nodes:
            if k not in NODE_KINDS:
                problems.append(f"node {a!r}: unknown kind {k!r}; allowed: {', '.join(NODE_KINDS)}")
        known = set(ids)
        for s, a, b in self.streams:
            for end, name in ((a, "source"), (b, "target")):
                if end is not None and end not in known:
                    problems.append(f"stream {s!r}: {name} node {end!r} is not a node of the flowsheet")
            if a is not None and a == b:
                problems.append(f"stream {s!r} leaves and enters the same node {a!r}")
            if a is None and b is None:
                problems.append(f"stream {s!r} connects no node")
        for a, k in self.nodes:
            n_in = sum(1 for _, _, b in self.streams if b == a)
            n_out = sum(1 for _, src, _ in self.streams if src == a)
            if n_in == 0 or n_out == 0:
                problems.append(f"node {a!r} needs at least one inlet and one outlet stream "
                                f"(has {n_in} in, {n_out} out)")
            if k == "splitter" and n_in != 1:
                problems.append(f"splitter {a!r} needs exactly one inlet stream (has {n_in})")
        if not self.species:
            problems.append("no species given")
        has_reactor = any(k == "reactor" for _, k in self.nodes)
        ns = len(self.species)
        if nu is None:
            nu = np.zeros((ns, 0))
            if has_reactor:
                problems.append("a reactor node needs the stoichiometric matrix nu")
        nu = np.atleast_2d(np.asarray(nu, dtype=float))
        if nu.shape[0] != ns:
            problems.append(f"nu has {nu.shape[0]} rows for {ns} species")
        reactions = tuple(str(r) for r in reactions) or tuple(f"r{j}" for j in range(nu.shape[1]))
        if len(reactions) != nu.shape[1]:
            problems.append(f"{len(reactions)} reaction names for {nu.shape[1]} reactions")
        if problems:
            raise ReconciliationError("flowsheet: " + "; ".join(problems))
        self.nu, self.reactions = nu, reactions

    # ----- layout and constant matrices -----
    def _build(self):
        S, ns = len(self.streams), len(self.species)
        sidx = {s: j for j, (s, _, _) in enumerate(self.streams)}
        self.n_streams, self.n_species = S, ns
        self.names = (tuple(f"F[{s}]" for s, _, _ in self.streams)
                      + tuple(f"c[{s},{i}]" for s, _, _ in self.streams for i in self.species))
        n = len(self.names)
        rows, lin, ent, unk = [], [], [], []  # names; linear rows; bilinear entries; extents
        for a, kind in self.nodes:
            ins = [sidx[s] for s, _, b in self.streams if b == a]
            outs = [sidx[s] for s, src, _ in self.streams if src == a]
            r = len(rows)
            rows.append(f"volume[{a}]")
            lin += [(r, j, 1.0) for j in ins] + [(r, j, -1.0) for j in outs]
            if kind == "splitter":
                for o in outs:
                    for i, sp in enumerate(self.species):
                        r = len(rows)
                        rows.append(f"split[{a},{self.streams[o][0]},{sp}]")
                        lin += [(r, self.conc_col(o, i), 1.0), (r, self.conc_col(ins[0], i), -1.0)]
                continue
            first = len(rows)
            for i, sp in enumerate(self.species):
                r = len(rows)
                rows.append(f"balance[{a},{sp}]")
                ent += [(r, j, i, 1.0) for j in ins] + [(r, j, i, -1.0) for j in outs]
            if kind == "reactor":
                unk += [(first, a, j) for j in range(len(self.reactions))]
        m = len(rows)
        self.constraint_names = tuple(rows)
        self.unknown_names = tuple(f"extent[{a},{self.reactions[j]}]" for _, a, j in unk)
        L = np.zeros((m, n))
        for r, j, v in lin:
            L[r, j] += v
        self.linear_matrix = L
        ent = np.array(ent, dtype=float).reshape(-1, 4)
        self._e_row = ent[:, 0].astype(int)
        self._e_flow = ent[:, 1].astype(int)
        self._e_conc = S + ent[:, 1].astype(int) * ns + ent[:, 2].astype(int)
        self._e_sign = ent[:, 3]
        G = np.zeros((m, len(ent)))
        G[self._e_row, np.arange(len(ent))] = self._e_sign
        self._G = G
        X = np.zeros((m, len(unk)))
        for q, (first, _, j) in enumerate(unk):
            X[first:first + ns, q] = self.nu[:, j]
        self.extent_matrix = X

    def flow_col(self, stream: int) -> int:
        """Column of the flow of stream number ``stream`` in the packed vector."""
        return stream

    def conc_col(self, stream: int, species: int) -> int:
        """Column of concentration ``species`` of stream number ``stream`` in the packed vector."""
        return self.n_streams + stream * self.n_species + species

    def stream_index(self, stream_id: str) -> int:
        """Number of the stream named ``stream_id``."""
        for j, (s, _, _) in enumerate(self.streams):
            if s == stream_id:
                return j
        raise ReconciliationError(f"stream {stream_id!r} is not in the flowsheet "
                                  f"({', '.join(s for s, _, _ in self.streams)})")

    # ----- model (vectorised over steps) -----
    def residual(self, v, extent):
        """Balance residuals at packed variables ``v`` (T, n) [m^3/s, mol/m^3] and extents
        (T, nz) [mol/s]: (T, m) [m^3/s for volume rows, mol/s for species rows, mol/m^3 for
        split rows]."""
        v = np.atleast_2d(np.asarray(v, dtype=float))
        prod = v[:, self._e_flow] * v[:, self._e_conc]
        return v @ self.linear_matrix.T + prod @ self._G.T + np.atleast_2d(extent) @ self.extent_matrix.T

    def linearise(self, vt):
        """Jacobian ``J`` (m, n, T) of the balances and the right-hand side ``b`` (m, T) of the
        balances linearised at ``vt`` (n, T, time last): ``J v + X xi = b``. For a bilinear
        term ``F c`` the linearisation is ``c0 F + F0 c - F0 c0``, so ``b = G (F0 c0)`` with ``G``
        the signs of the bilinear terms in each row."""
        T = vt.shape[1]
        J = np.broadcast_to(self.linear_matrix[:, :, None], self.linear_matrix.shape + (T,)).copy()
        s = self._e_sign[:, None]
        J[self._e_row, self._e_flow] += s * vt[self._e_conc]
        J[self._e_row, self._e_conc] += s * vt[self._e_flow]
        b = self._G @ (vt[self._e_flow] * vt[self._e_conc])
        return J, b

    def classify(self, measured) -> Classification:
        """Structural classification (Crowe et al. 1983; Crowe 1986) of the packed variables.

        Parameters
        ----------
        measured : array_like (n,) of bool
            Which packed variables are measured (or known exactly).

        Returns
        -------
        Classification
            ``redundant`` over the measured variables, ``observable`` over the unmeasured
            ones followed by the extents, at a generic point of the bilinear balances.
        """
        measured = np.asarray(measured, dtype=bool)
        rng = np.random.default_rng(12345)
        vt = 1.0 + rng.random((len(self.names), 1))  # generic point: structural ranks
        J = self.linearise(vt)[0][:, :, 0]
        names = np.array(self.names)
        Az = np.hstack([J[:, ~measured], self.extent_matrix])
        return classify_variables(J[:, measured], Az, names[measured],
                                  tuple(names[~measured]) + self.unknown_names)
