"""The main reaction of a unit as the steady-state CSTR model sees it (shared by forecast and what-if).

The unit is modelled as an ideal CSTR running its main reaction only (the first
reaction of the configuration) with the configured rate law; the rate constant
is k = a k_ref,fresh exp[-(Ea/R)(1/T - 1/T_ref)], linear in the activity a.
Product formed by the main reaction can be scaled by ``yield_factor`` (the
fraction that survives side reactions, e.g. the measured selectivity).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from kinetrace.config.model import UnitModel
from kinetrace.errors import KinetraceError
from kinetrace.kinetics.arrhenius import at_temperature
from kinetrace.kinetics.cstr import required_rate_constant, solve_cstr


@dataclass(frozen=True)
class MainReaction:
    method: str
    params: dict
    stoichiometry: dict[str, float]
    key: str
    product: str
    fresh_k_ref: float
    activation_energy: float
    reference_temperature: float
    feed: dict[str, float]
    yield_factor: float

    @property
    def nu_key(self) -> float:
        return self.stoichiometry[self.key]

    @property
    def nu_product(self) -> float:
        return self.stoichiometry.get(self.product, 0.0)

    def k_fresh(self, temperature):
        """Fresh-catalyst rate constant at T. [(mol/m^3)^(1-n)/s]"""
        return np.asarray(at_temperature(self.fresh_k_ref, temperature, self.activation_energy,
                                         self.reference_temperature), dtype=float)

    def production(self, activity, feed_flow, temperature, volume):
        """Product rate of the CSTR at steady state. [mol/s]"""
        q = np.asarray(feed_flow, dtype=float)
        t = np.asarray(temperature, dtype=float)
        k = np.asarray(activity, dtype=float) * self.k_fresh(t)
        with np.errstate(divide="ignore", invalid="ignore"):
            tau = np.asarray(volume, dtype=float) / q
        sol = solve_cstr(self.method, tau, self.feed, k, key=self.key, stoichiometry=self.stoichiometry,
                         temperature=t if self.method == "reversible" else None, **self.params)
        c_p0 = self.feed.get(self.product, 0.0)
        c_p = np.asarray(sol.concentrations[self.product], dtype=float)
        return q * (c_p0 + self.yield_factor * (c_p - c_p0))

    def required_activity(self, feed_flow, temperature, volume, target_rate):
        """Activity giving ``target_rate`` [mol/s]; inf where no activity can, 0 where none is needed."""
        q = np.asarray(feed_flow, dtype=float)
        t = np.asarray(temperature, dtype=float)
        c_a0 = self.feed[self.key]
        c_p0 = self.feed.get(self.product, 0.0)
        with np.errstate(divide="ignore", invalid="ignore"):
            xi = (target_rate / q - c_p0) / (self.nu_product * self.yield_factor)
            x_req = -self.nu_key * xi / c_a0
            tau = np.asarray(volume, dtype=float) / q
        x_in = np.clip(x_req, 0.0, 1.0)
        k_req = np.asarray(required_rate_constant(
            self.method, tau, self.feed, x_in, key=self.key, stoichiometry=self.stoichiometry,
            temperature=t if self.method == "reversible" else None, **self.params), dtype=float)
        with np.errstate(divide="ignore", invalid="ignore"):
            a = k_req / self.k_fresh(t)
        a = np.where(x_req <= 0, 0.0, a)
        a = np.where((x_req >= 1.0) | ((x_req > 0) & ~np.isfinite(k_req)), np.inf, a)
        bad = ~(np.isfinite(q) & (q > 0) & np.isfinite(t) & np.isfinite(tau))
        return np.where(bad, np.nan, a), x_req


def main_reaction(model: UnitModel, *, feed_conc=None, fresh_k_ref=None, yield_factor: float = 1.0) -> MainReaction:
    """The main reaction of ``model`` with its rate law, stoichiometry and feed."""
    rid = model.main_reaction
    law = model.rate_laws.get(rid)
    if law is None:
        raise KinetraceError(f"unit {model.id}: main reaction {rid!r} has no rate law configured; "
                             "a forecast or what-if needs one")
    stoich = {sp: float(model.nu[i, 0]) for i, sp in enumerate(model.species) if model.nu[i, 0] != 0}
    feed = dict(model.feed if feed_conc is None else feed_conc)
    if model.key_reactant not in feed or not float(feed[model.key_reactant]) > 0:
        raise KinetraceError(f"unit {model.id}: feed concentration of the key reactant "
                             f"{model.key_reactant!r} is needed [mol/m^3]; got {feed.get(model.key_reactant)!r}")
    if stoich.get(model.product, 0.0) <= 0:
        raise KinetraceError(f"unit {model.id}: target species {model.product!r} is not made by the main "
                             f"reaction {rid!r}")
    if not (0.0 < yield_factor <= 1.0):
        raise KinetraceError(f"yield_factor must be in (0, 1], got {yield_factor!r}")
    k0 = law.k_ref if fresh_k_ref is None else float(fresh_k_ref)
    return MainReaction(law.method, dict(law.params), stoich, model.key_reactant, model.product, k0,
                        law.activation_energy, law.reference_temperature, {s: float(v) for s, v in feed.items()},
                        float(yield_factor))
