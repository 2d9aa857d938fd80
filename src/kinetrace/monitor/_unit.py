"""A unit's reactions as the steady-state CSTR model sees them (shared by forecast and what-if).

The unit is an ideal liquid-phase CSTR at steady state. The catalyst activity a
multiplies the rate constant of every catalysed reaction
(``UnitModel.catalysed_reactions``: the configured ``[units.activity] catalysed``
list, by default every reaction with a rate law; the main reaction, on which
:mod:`kinetrace.pipeline.backcalc` defines activity, always is one); a reaction
that is not catalysed (a thermal side reaction) keeps its constant, k_j(T) by
Arrhenius. Reactions without a rate law are left out.

* One reaction: :func:`kinetrace.kinetics.cstr.solve_cstr` (closed forms or a
  vectorised bracketed root), and the activity needed is exact,
  a = k_req / k_fresh(T) with k_req from the design equation.
* Several reactions: the extents per unit volume xi solve
  xi_j = tau r_j(C0 + nu xi, T) (one equation per reaction) by
  :func:`scipy.optimize.root` (hybrid Powell) started from the main reaction
  alone; the activity needed is found by a bracketed root solve (Brent) of
  P(a) = target, P rising with a.

Product formed can be scaled by ``yield_factor`` (e.g. for losses the model
does not carry).

References
----------
.. [1] Fogler, H. S. (2016). Elements of Chemical Reaction Engineering, 5th ed.,
   ch. 5 and 8 (CSTR design equation, multiple reactions).
.. [2] Powell, M. J. D. (1970). A hybrid method for nonlinear equations. In:
   Numerical Methods for Nonlinear Algebraic Equations, Gordon and Breach, 87-114.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import optimize

from kinetrace.config.model import UnitModel
from kinetrace.errors import KinetraceError
from kinetrace.kinetics.arrhenius import at_temperature
from kinetrace.kinetics.cstr import required_rate_constant, solve_cstr
from kinetrace.kinetics.ratelaws import rate


@dataclass(frozen=True)
class _Law:
    column: int
    method: str
    params: dict
    k_ref: float
    activation_energy: float
    reference_temperature: float
    catalysed: bool = True


@dataclass(frozen=True)
class UnitReactions:
    species: tuple[str, ...]
    nu: np.ndarray                 # (n_species, n_laws): columns of the reactions with a rate law
    laws: tuple[_Law, ...]         # laws[0] is the main reaction
    key: str
    product: str
    feed: dict[str, float]
    yield_factor: float

    @property
    def single(self) -> bool:
        return len(self.laws) == 1

    def _stoich(self, j: int) -> dict[str, float]:
        return {s: float(self.nu[i, j]) for i, s in enumerate(self.species) if self.nu[i, j] != 0}

    def _k(self, j: int, temperature):
        law = self.laws[j]
        return np.asarray(at_temperature(law.k_ref, temperature, law.activation_energy,
                                         law.reference_temperature), dtype=float)

    def k_fresh(self, temperature):
        """Fresh-catalyst rate constant of the main reaction at T. [(mol/m^3)^(1-n)/s]"""
        return self._k(0, temperature)

    def _feed_vector(self) -> np.ndarray:
        return np.array([self.feed.get(s, 0.0) for s in self.species])

    def _product_rate(self, q, c_p):
        c_p0 = self.feed.get(self.product, 0.0)
        return q * (c_p0 + self.yield_factor * (c_p - c_p0))

    # ---------------------------------------------------------------- one reaction
    def _single_outlet(self, activity, q, t, v):
        """The CSTR solution of the one reaction at activity, flow q, temperature t, volume v."""
        law = self.laws[0]
        k = np.asarray(activity, dtype=float) * self.k_fresh(t)
        with np.errstate(divide="ignore", invalid="ignore"):
            tau = np.asarray(v, dtype=float) / q
        return solve_cstr(law.method, tau, self.feed, k, key=self.key, stoichiometry=self._stoich(0),
                          temperature=t if law.method == "reversible" else None, **law.params)

    def _production_single(self, activity, q, t, v):
        sol = self._single_outlet(activity, q, t, v)
        return self._product_rate(q, np.asarray(sol.concentrations[self.product], dtype=float))

    # ---------------------------------------------------------------- several reactions
    def _outlet(self, activity: float, q: float, t: float, v: float) -> np.ndarray:
        """Outlet concentrations [mol/m^3] of the multi-reaction CSTR at one operating point."""
        c0 = self._feed_vector()
        tau = v / q
        ks = [self._k(j, t) * (activity if law.catalysed else 1.0) for j, law in enumerate(self.laws)]

        def rates(c):
            conc = dict(zip(self.species, np.maximum(c, 0.0)))
            return np.array([float(rate(law.method, conc, float(ks[j]), temperature=t, **law.params))
                             for j, law in enumerate(self.laws)])

        def resid(xi):
            return xi - tau * rates(c0 + self.nu @ xi)

        # start: each reaction alone at the feed, scaled so that no concentration goes negative
        x0 = np.array([self._alone_extent(j, float(ks[j]), tau, t) for j in range(len(self.laws))])
        c_try = c0 + self.nu @ x0
        if np.any(c_try < 0):
            use = self.nu @ x0
            with np.errstate(divide="ignore", invalid="ignore"):
                shrink = np.nanmin(np.where(use < 0, c0 / -use, np.inf))
            x0 = x0 * min(1.0, 0.99 * shrink)
        sol = optimize.root(resid, x0, method="hybr", options={"xtol": 1e-12})
        x = sol.x
        scale = max(float(np.max(np.abs(c0))), 1.0)
        if not np.max(np.abs(resid(x))) <= 1e-8 * scale:
            # bounded least squares (extents between 0 and the largest any feed could allow), then polish
            upper = np.full(x0.shape, float(np.sum(c0)) + 1.0)
            ls = optimize.least_squares(resid, np.clip(x0, 0.0, upper), bounds=(0.0, upper), xtol=1e-14,
                                        ftol=1e-14, gtol=1e-14)
            x = optimize.root(resid, ls.x, method="hybr", options={"xtol": 1e-12}).x
            if not np.max(np.abs(resid(x))) <= np.max(np.abs(resid(ls.x))):
                x = ls.x
        c = c0 + self.nu @ x
        # judged by the balance residual itself (hybr may report no progress when it starts at the root)
        r = resid(x)
        if not (np.all(np.isfinite(c)) and np.all(c >= -1e-9 * scale) and np.all(np.isfinite(r))
                and np.max(np.abs(r)) <= 1e-8 * scale):
            return np.full(c0.shape, np.nan)
        return np.maximum(c, 0.0)

    def _alone_extent(self, j: int, k: float, tau: float, t: float) -> float:
        """Extent of reaction j if it ran alone on the feed (0 when a reactant is absent from the feed)."""
        stoich = self._stoich(j)
        reactants = [s for s, v in stoich.items() if v < 0 and self.feed.get(s, 0.0) > 0]
        if len(reactants) < sum(v < 0 for v in stoich.values()):
            return 0.0
        law = self.laws[j]
        key = min(reactants, key=lambda s: self.feed[s] / -stoich[s])
        sol = solve_cstr(law.method, tau, self.feed, k, key=key, stoichiometry=stoich,
                         temperature=t if law.method == "reversible" else None, **law.params)
        x = float(sol.extent)
        return x if np.isfinite(x) else 0.0

    def _production_multi(self, activity, q, t, v):
        a, q, t, v = np.broadcast_arrays(*(np.asarray(x, dtype=float) for x in (activity, q, t, v)))
        out = np.full(a.shape, np.nan)
        ip = self.species.index(self.product)
        for i in np.ndindex(a.shape):
            if np.isfinite(a[i]) and np.isfinite(t[i]) and np.isfinite(v[i]) and q[i] > 0 and a[i] >= 0:
                c = self._outlet(float(a[i]), float(q[i]), float(t[i]), float(v[i]))
                out[i] = self._product_rate(float(q[i]), c[ip])
        return out

    # ---------------------------------------------------------------- public
    def production(self, activity, feed_flow, temperature, volume):
        """Product rate of the CSTR at steady state. [mol/s]"""
        q = np.asarray(feed_flow, dtype=float)
        t = np.asarray(temperature, dtype=float)
        if self.single:
            return self._production_single(activity, q, t, volume)
        return self._production_multi(activity, q, t, volume)

    def key_conversion(self, activity, feed_flow, temperature, volume):
        """Fractional conversion of the key reactant at steady state, 1 - C_key / C_key,0. [-]"""
        q = np.asarray(feed_flow, dtype=float)
        t = np.asarray(temperature, dtype=float)
        c0 = self.feed[self.key]
        if self.single:
            sol = self._single_outlet(activity, q, t, volume)
            return 1.0 - np.asarray(sol.concentrations[self.key], dtype=float) / c0
        a, q, t, v = np.broadcast_arrays(*(np.asarray(x, dtype=float) for x in (activity, q, t, volume)))
        out = np.full(a.shape, np.nan)
        ik = self.species.index(self.key)
        for i in np.ndindex(a.shape):
            if np.isfinite(a[i]) and np.isfinite(t[i]) and np.isfinite(v[i]) and q[i] > 0 and a[i] >= 0:
                out[i] = 1.0 - self._outlet(float(a[i]), float(q[i]), float(t[i]), float(v[i]))[ik] / c0
        return out

    def required_activity(self, feed_flow, temperature, volume, target_rate):
        """Activity giving ``target_rate`` [mol/s]; inf where no activity can, 0 where none is needed."""
        if self.single:
            return self._required_single(feed_flow, temperature, volume, target_rate)
        q, t, v = np.broadcast_arrays(*(np.asarray(x, dtype=float) for x in (feed_flow, temperature, volume)))
        out = np.full(q.shape, np.nan)
        for i in np.ndindex(q.shape):
            out[i] = self._required_one(float(q[i]), float(t[i]), float(v[i]), float(target_rate))
        return out

    def _required_single(self, feed_flow, temperature, volume, target_rate):
        law = self.laws[0]
        q = np.asarray(feed_flow, dtype=float)
        t = np.asarray(temperature, dtype=float)
        nu = self._stoich(0)
        c_a0 = self.feed[self.key]
        c_p0 = self.feed.get(self.product, 0.0)
        with np.errstate(divide="ignore", invalid="ignore"):
            xi = (target_rate / q - c_p0) / (nu[self.product] * self.yield_factor)
            x_req = -nu[self.key] * xi / c_a0
            tau = np.asarray(volume, dtype=float) / q
        k_req = np.asarray(required_rate_constant(
            law.method, tau, self.feed, np.clip(x_req, 0.0, 1.0), key=self.key, stoichiometry=nu,
            temperature=t if law.method == "reversible" else None, **law.params), dtype=float)
        with np.errstate(divide="ignore", invalid="ignore"):
            a = k_req / self.k_fresh(t)
        a = np.where(x_req <= 0, 0.0, a)
        a = np.where((x_req >= 1.0) | ((x_req > 0) & ~np.isfinite(k_req)), np.inf, a)
        bad = ~(np.isfinite(q) & (q > 0) & np.isfinite(t) & np.isfinite(tau))
        return np.where(bad, np.nan, a)

    def _required_one(self, q: float, t: float, v: float, target: float) -> float:
        if not (np.isfinite(q) and q > 0 and np.isfinite(t) and np.isfinite(v) and v > 0):
            return float("nan")

        def f(a):
            return float(self._production_multi(a, q, t, v)) - target

        lo = 1e-9
        f_lo = f(lo)
        if not np.isfinite(f_lo):
            return float("nan")
        if f_lo >= 0:  # the target is met with (practically) no catalyst
            return 0.0
        hi = 1.0
        while not f(hi) >= 0:
            lo, hi = hi, hi * 4.0
            if hi > 1e6:
                return float("inf")
        return float(optimize.brentq(f, lo, hi, xtol=1e-12, rtol=1e-10))


def unit_reactions(model: UnitModel, *, feed_conc=None, fresh_k_ref=None, yield_factor: float = 1.0) -> UnitReactions:
    """The reactions of ``model`` with rate laws, main reaction first, with the feed."""
    rid = model.main_reaction
    if rid not in model.rate_laws:
        raise KinetraceError(f"unit {model.id}: main reaction {rid!r} has no rate law configured; "
                             "a forecast or what-if needs one")
    cols = [j for j, r in enumerate(model.reaction_ids) if r in model.rate_laws]
    catalysed = set(model.catalysed_reactions)
    if rid not in catalysed:
        raise KinetraceError(f"unit {model.id}: the main reaction {rid!r} must be catalysed (activity is defined "
                             f"on it); catalysed: {sorted(catalysed)}")
    laws = []
    for j in cols:
        law = model.rate_laws[model.reaction_ids[j]]
        k = law.k_ref if (j != 0 or fresh_k_ref is None) else float(fresh_k_ref)
        laws.append(_Law(j, law.method, dict(law.params), float(k), law.activation_energy,
                         law.reference_temperature, model.reaction_ids[j] in catalysed))
    feed = {s: float(v) for s, v in dict(model.feed if feed_conc is None else feed_conc).items()}
    if not feed.get(model.key_reactant, 0.0) > 0:
        raise KinetraceError(f"unit {model.id}: feed concentration of the key reactant "
                             f"{model.key_reactant!r} is needed [mol/m^3]; got {feed.get(model.key_reactant)!r}")
    if model.nu[model.product_index, 0] <= 0:
        raise KinetraceError(f"unit {model.id}: target species {model.product!r} is not made by the main "
                             f"reaction {rid!r}")
    if not (0.0 < yield_factor <= 1.0):
        raise KinetraceError(f"yield_factor must be in (0, 1], got {yield_factor!r}")
    return UnitReactions(tuple(model.species), np.asarray(model.nu, dtype=float)[:, cols], tuple(laws),
                         model.key_reactant, model.product, feed, float(yield_factor))
