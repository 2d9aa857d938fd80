"""The numbers of one reactor, in SI, as the computation stages use them.

:func:`unit_model` turns a validated :class:`~kinetrace.config.schema.Unit` into a
frozen :class:`UnitModel`: species order, stoichiometric matrix, molar masses,
rate-law parameters in SI, target as a molar rate. Stages downstream take a
UnitModel and arrays; they never read the TOML file.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field

import numpy as np

from ..chemistry import molar_mass, parse_equation, stoichiometric_matrix
from ..units import parse_quantity, parse_rate_constant
from .load import parse_target_rate
from .schema import Tag, Unit


@dataclass(frozen=True)
class RateLawModel:
    """Rate law of one reaction in SI. ``params`` go to ``kinetrace.kinetics.ratelaws`` as keywords."""

    method: str
    k_ref: float                 # [(mol/m^3)^(1-n)/s]
    activation_energy: float     # [J/mol]
    reference_temperature: float  # [K]
    params: dict = field(default_factory=dict)
    hold: tuple[str, ...] = ()            # parameters held at their configured values
    fit_orders: tuple[str, ...] = ()      # species whose order the calibration estimates
    uncertainty: dict = field(default_factory=dict)  # k_ref, adsorption: ln-scale sd [-]; activation_energy [J/mol]; order [-]
    prior: bool = False                   # configured values as priors of the calibration
    source: str = "configured"            # "configured", or where the fitted values come from

    @property
    def k_unit(self) -> str:
        """SI unit of k_ref, (m3/mol)^(n-1)/s for the law's overall order n (``units.rate_constant_unit``)."""
        from ..units import rate_constant_unit

        return rate_constant_unit(sum(self.params.get("orders", {}).values()) or 1.0)


@dataclass(frozen=True)
class UnitModel:
    """One reactor's configuration in SI numbers."""

    id: str
    species: tuple[str, ...]
    molar_masses: np.ndarray          # [kg/mol], by species
    reaction_ids: tuple[str, ...]
    nu: np.ndarray                    # (n_species, n_reactions)
    rate_laws: dict[str, RateLawModel]
    key_reactant: str
    product: str
    target_rate: float                # [mol/s] of product
    fixed_volume: float | None        # [m^3]
    level_table: np.ndarray | None    # (n, 2): level [-, fraction], volume [m^3]
    feed: dict[str, float]            # known feed concentrations [mol/m^3]
    tags: tuple[Tag, ...]
    temperature_limits: tuple[float, float]   # [K]
    feed_flow_limits: tuple[float, float]     # [m^3/s]
    fresh_period: tuple | None = None
    plan_feed_flow: float | None = None       # [m^3/s], from [units.plan]
    catalysed: tuple[str, ...] | None = None  # reactions the catalyst activity multiplies (None: all with a law)
    catalyst_changes: tuple = ()              # configured catalyst changes (UTC timestamps)
    events: tuple = ()                        # (kind, time, note) of [[units.events]], time-ordered
    decay_law: str = "auto"                   # decay family of the joint calibration
    correlations: tuple = ()                  # (tag_a, tag_b, rho) of correlated measurement errors [-]
    flowsheet: object = None                  # schema.Flowsheet of [units.flowsheet], or None

    def index(self, species: str) -> int:
        """Row of ``species`` in ``nu`` and in concentration arrays."""
        return self.species.index(species)

    @property
    def key_index(self) -> int:
        return self.index(self.key_reactant)

    @property
    def product_index(self) -> int:
        return self.index(self.product)

    @property
    def main_reaction(self) -> str:
        return self.reaction_ids[0]

    @property
    def catalysed_reactions(self) -> tuple[str, ...]:
        """Reactions whose rate constant the catalyst activity multiplies (default: all with a rate law)."""
        if self.catalysed is not None:
            return tuple(self.catalysed)
        return tuple(r for r in self.reaction_ids if r in self.rate_laws)

    @property
    def event_times(self) -> tuple:
        """Times of every configured event, catalyst changes included (sorted, as configured).

        Each stops a carried-forward lab value or feed assay and restarts the steady windows.
        """
        times = {*self.catalyst_changes, *(t for _, t, _ in self.events)}
        return tuple(sorted(times, key=_sort_key))

    @property
    def display_units(self) -> dict[str, str]:
        """SI unit -> the unit's own instrument unit for operator outputs (see :func:`instrument_units`)."""
        return instrument_units(self.tags)


def tag_sigma(tag: Tag, kind: str) -> tuple[float, float]:
    """Measurement uncertainty of a tag as (relative [-], absolute [SI]); one of them is zero."""
    if tag.sigma is None:
        return 0.0, 0.0
    s = tag.sigma.strip()
    if s.endswith("%"):
        return float(s[:-1]) / 100.0, 0.0
    if kind == "temperature":
        # an uncertainty is a temperature difference: 0.3 degC is 0.3 K, not 273.45 K
        s = re.sub(r"(?<!delta_)degC", "K", s)
        s = re.sub(r"(?<!delta_)degF", "delta_degF", s)
    return 0.0, parse_quantity(s, kind)


def tag_correlations(unit: Unit) -> tuple[tuple[str, str, float], ...]:
    """Correlated pairs of tags ``(tag_a, tag_b, rho)`` from ``[[units.correlations]]``: a
    coefficient for two tags, or the upper triangle of a matrix (checked symmetric here,
    positive definite at load). [-]

    >>> from kinetrace.config.schema import Correlation
    >>> class U: correlations = [Correlation(tags=["AI-1", "AI-2", "AI-3"],
    ...                                      matrix=[[1, 0.4, 0], [0.4, 1, 0.2], [0, 0.2, 1]])]
    >>> tag_correlations(U)
    (('AI-1', 'AI-2', 0.4), ('AI-2', 'AI-3', 0.2))
    """
    out: dict[tuple[str, str], float] = {}
    for c in unit.correlations:
        if c.coefficient is not None:
            items = [((c.tags[0], c.tags[1]), float(c.coefficient))]
        else:
            M = np.asarray(c.matrix, dtype=float)
            if not np.allclose(M, M.T, rtol=0.0, atol=1e-9) or not np.allclose(np.diag(M), 1.0, rtol=0.0, atol=1e-9):
                raise ValueError(f"correlation matrix of {c.tags} must be symmetric with a unit diagonal")
            items = [((c.tags[i], c.tags[j]), float(M[i, j])) for i in range(len(c.tags))
                     for j in range(i + 1, len(c.tags)) if M[i, j] != 0.0]
        for (a, b), rho in items:
            key = (a, b) if a < b else (b, a)
            if key in out and out[key] != rho:
                raise ValueError(f"the correlation of {a!r} and {b!r} is given twice ({out[key]:g} and {rho:g})")
            out[key] = rho
    return tuple((a, b, r) for (a, b), r in out.items())


def level_table_si(unit: Unit, levels) -> np.ndarray:
    """Levels of the volume table in the level tag's unit -> what the level tag reads in SI:
    a fraction of span for '%', else metres. [-] or [m]

    References
    ----------
    .. [1] Thompson, A., Taylor, B. N. (2008). NIST Special Publication 811, Appendix B.
    """
    from ..units import to_si

    tag = next((t for t in unit.tags if t.tag == unit.volume.level_tag), None)
    levels = np.asarray(levels, dtype=float)
    if tag is None or tag.unit.strip() in ("%", "percent"):
        return levels / 100.0
    return np.asarray(to_si(levels, tag.unit, "length"), dtype=float)


def instrument_units(tags) -> dict[str, str]:
    """Display unit of each SI unit for operator outputs: the unit's own instrument units (its feed
    flowmeter's volume-flow unit, its temperature transmitter's unit), where they are of that kind.

    >>> from types import SimpleNamespace as T
    >>> instrument_units([T(role="feed_flow", unit="gpm"), T(role="temperature", unit="degF")])
    {'m3/s': 'gpm', 'K': 'degF'}
    """
    from ..units import kind_of

    out: dict[str, str] = {}
    for t in tags:
        unit = str(getattr(t, "unit", "")).strip()
        if t.role == "feed_flow" and "m3/s" not in out and _kind(unit, kind_of) == "volumetric_flow":
            out["m3/s"] = unit
        elif t.role == "temperature" and "K" not in out and _kind(unit, kind_of) == "temperature":
            out["K"] = unit
    return out


def _kind(unit: str, kind_of) -> str | None:
    try:
        return kind_of(unit)
    except Exception:  # noqa: BLE001 - a unit pint cannot read has no display use
        return None


def flowsheet_network(flowsheet, species, nu, reactions):
    """The :class:`kinetrace.reconcile.Network` of a ``[units.flowsheet]`` (the unit's reactions
    at its reactor node) and the mask of its packed variables that are metered or known exactly.

    Parameters
    ----------
    flowsheet : schema.Flowsheet
    species : sequence of str
    nu : ndarray (ns, nr)
        Stoichiometric matrix of the unit. [-]
    reactions : sequence of str

    Returns
    -------
    (Network, ndarray of bool)
    """
    from ..reconcile import Network

    net = Network([(n.id, n.kind) for n in flowsheet.nodes],
                  [(s.id, s.source, s.target) for s in flowsheet.streams], species, nu=nu, reactions=reactions)
    measured = np.zeros(len(net.names), bool)
    for j, st in enumerate(flowsheet.streams):
        measured[net.flow_col(j)] = st.flow_tag is not None
        for i, sp in enumerate(species):
            measured[net.conc_col(j, i)] = sp in st.conc_tags or sp in st.known
    return net, measured


def unit_model(unit: Unit) -> UnitModel:
    """Build the SI :class:`UnitModel` of a validated unit configuration."""
    species = tuple(s.name for s in unit.species)
    # a species without formula or molar mass is NaN: only conversions that need it ask (checked at load)
    mm = np.array([s.molar_mass if s.molar_mass is not None else molar_mass(s.formula) if s.formula else np.nan
                   for s in unit.species])
    reactions = [parse_equation(r.equation, r.id) for r in unit.reactions]
    nu = stoichiometric_matrix(list(species), reactions)
    laws: dict[str, RateLawModel] = {}
    for r in unit.reactions:
        law = r.rate_law
        if law is None:
            continue
        params: dict = {"orders": dict(law.orders)}
        if law.method == "saturating":
            params["adsorption"] = dict(law.adsorption)
            params["denominator_exponent"] = law.denominator_exponent
        if law.method == "reversible":
            params.update(reverse_orders=dict(law.reverse_orders), equilibrium_constant=law.equilibrium_constant,
                          reaction_enthalpy=law.reaction_enthalpy, reference_temperature=law.reference_temperature)
        laws[r.id] = RateLawModel(law.method, parse_rate_constant(law.k_ref, sum(law.orders.values())),
                                  law.activation_energy, law.reference_temperature, params,
                                  hold=tuple(law.hold), fit_orders=tuple(law.fit_orders),
                                  uncertainty=parse_uncertainty(law.uncertainty), prior=law.prior)
    target_mm = mm[species.index(unit.target.species)]
    table = None
    if unit.volume.table:
        table = np.array(unit.volume.table, dtype=float)
        table[:, 0] = level_table_si(unit, table[:, 0])
    return UnitModel(
        id=unit.id, species=species, molar_masses=mm, reaction_ids=tuple(r.id for r in unit.reactions), nu=nu,
        rate_laws=laws, key_reactant=unit.key_reactant, product=unit.target.species,
        target_rate=parse_target_rate(unit.target.rate, target_mm), fixed_volume=unit.volume.fixed,
        level_table=table, feed=dict(unit.feed), tags=tuple(unit.tags),
        temperature_limits=tuple(unit.limits.temperature), feed_flow_limits=tuple(unit.limits.feed_flow),
        fresh_period=unit.activity.fresh_period,
        plan_feed_flow=None if unit.plan is None else unit.plan.feed_flow,
        catalysed=None if unit.activity.catalysed is None else tuple(unit.activity.catalysed),
        catalyst_changes=tuple(sorted({*unit.activity.catalyst_changes,
                                       *(e.time for e in unit.events if e.kind == "catalyst_change")},
                                      key=_sort_key)),
        events=tuple(sorted(((e.kind, e.time, e.note) for e in unit.events), key=lambda e: _sort_key(e[1]))),
        decay_law=unit.activity.decay_law,
        correlations=tag_correlations(unit), flowsheet=unit.flowsheet,
    )


def _sort_key(t):
    """A configured time as POSIX seconds (a time without a zone is UTC). [s]"""
    from datetime import timezone

    return (t if t.tzinfo is not None else t.replace(tzinfo=timezone.utc)).timestamp()


def parse_uncertainty(spec: dict[str, str]) -> dict[str, float]:
    """Standard uncertainties of configured rate-law values, as the calibration uses them.

    ``k_ref`` and ``adsorption`` as a percentage (``"100 %"`` is a factor of 2: ln-scale sd
    ln(1 + 1.00)); ``activation_energy`` as a molar energy (``"15 kJ/mol"``); ``order`` as a number.

    >>> u = parse_uncertainty({"k_ref": "100 %", "activation_energy": "15 kJ/mol"})
    >>> round(u["k_ref"], 4), u["activation_energy"]
    (0.6931, 15000.0)
    """
    out: dict[str, float] = {}
    for key, text in spec.items():
        t = str(text).strip()
        if key in ("k_ref", "adsorption"):
            if not t.endswith("%"):
                raise ValueError(f"uncertainty.{key} must be a percentage such as '50 %', got {text!r}")
            out[key] = float(np.log1p(float(t[:-1]) / 100.0))
        elif key == "activation_energy":
            out[key] = parse_quantity(t, "molar_energy")
        elif key == "order":
            out[key] = float(t)
        else:
            raise ValueError(f"uncertainty.{key}: unknown; allowed k_ref, activation_energy, adsorption, order")
    return out
