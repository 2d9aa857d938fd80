"""Load a plant configuration file and report every problem in it together.

Structural problems (missing keys, wrong types, unknown units) come from
pydantic; cross-section problems (a species in an equation that is not
declared, a tag for an unknown species, a reaction that does not balance) are
checked here. Both are reported at once, each with its key path, in one
:class:`kinetrace.errors.ConfigError`.
"""

from __future__ import annotations

import zoneinfo
from pathlib import Path

from pydantic import ValidationError

from ..chemistry import check_element_balance, parse_equation, parse_formula
from ..errors import ChemistryError, ConfigError, KinetraceError, Problem, ProblemList
from ..units import SI_UNITS, UnitError, check_level_unit, parse_quantity, parse_rate_constant, tag_measure
from .schema import ROLE_KIND, PlantConfig, Unit


def _loc(loc: tuple) -> str:
    out = ""
    for part in loc:
        out += f"[{part}]" if isinstance(part, int) else (f".{part}" if out else str(part))
    return out


def load_config(path: str | Path) -> PlantConfig:
    """Read, validate and cross-check a plant configuration TOML file.

    Parameters
    ----------
    path : str or Path
        The TOML file.

    Returns
    -------
    PlantConfig
        The validated configuration (quantities in SI). Its ``base_dir`` (the file's
        folder) is where relative paths are resolved; see :func:`resolve_path`.

    Raises
    ------
    ConfigError
        Listing every problem found, each with its key path.
    """
    from .text import read_toml

    path = Path(path)
    return validate_config(read_toml(path), source=str(path))


def validate_config(raw: dict, source: str = "<config>") -> PlantConfig:
    """Validate a configuration already parsed from TOML into a dict; see :func:`load_config`."""
    problems = ProblemList()
    try:
        cfg = PlantConfig.model_validate(raw)
    except ValidationError as exc:
        for err in exc.errors():
            msg = err["msg"].removeprefix("Value error, ")
            if err["type"] == "missing":
                msg = "required key is missing"
            elif err["type"] == "extra_forbidden":
                msg = "unknown key (check the spelling)"
            problems.add(_loc(err["loc"]), msg)
        # cross-checks need a structurally valid unit: check each unit with its invalid parts
        # pruned away, so that the problems pydantic did not see are still reported now
        units = raw.get("units") if isinstance(raw, dict) else None
        for i, u in enumerate(units if isinstance(units, list) else []):
            unit = _pruned_unit(u)
            if unit is not None:
                _check_unit(unit, f"units[{i}]", problems)
        raise ConfigError(source, problems)
    _check_site(cfg, problems)
    for i, unit in enumerate(cfg.units):
        _check_unit(unit, f"units[{i}]", problems)
    ids = [u.id for u in cfg.units]
    for d in sorted({x for x in ids if ids.count(x) > 1}):
        problems.add("units", f"unit id {d!r} is used twice")
    if problems:
        raise ConfigError(source, problems)
    return cfg


def _pruned_unit(u) -> Unit | None:
    """Validate a unit after removing the keys pydantic rejected; None if that cannot be done.

    Only optional keys can be removed (a required one that is removed comes back as
    "missing", and then the unit's cross-checks wait for the structural fixes).
    """
    import copy

    if not isinstance(u, dict):
        return None
    u = copy.deepcopy(u)
    for _ in range(6):
        try:
            return Unit.model_validate(u)
        except ValidationError as exc:
            for err in exc.errors():
                loc = [k for k in err["loc"] if not (isinstance(k, str) and k.startswith("function-"))]
                if err["type"] == "missing" or not loc:
                    return None
                parent = u
                try:
                    for key in loc[:-1]:
                        parent = parent[key]
                    if not isinstance(parent, dict):
                        return None
                    parent.pop(loc[-1], None)
                except (KeyError, IndexError, TypeError):
                    return None
    return None


def _check_site(cfg: PlantConfig, problems: ProblemList) -> None:
    for where, tz in (("site.timezone", cfg.site.timezone), ("source.timezone", cfg.source.timezone)):
        if tz is None:
            continue
        try:
            zoneinfo.ZoneInfo(tz)
        except (zoneinfo.ZoneInfoNotFoundError, ValueError):
            problems.add(where, f"unknown IANA time zone {tz!r} (e.g. 'Europe/Berlin', 'America/Chicago', 'UTC')")
    try:
        from ..units import kind_of

        kind = kind_of(cfg.site.production_unit)
    except KinetraceError:
        kind = None
    if kind != "mass_flow":
        problems.add("site.production_unit", f"{cfg.site.production_unit!r} is not a mass per time "
                     "(e.g. 't/d', 'kg/h', 'lb/h')")
    src = cfg.source
    if src.kind in ("csv", "sqlite") and not src.path:
        problems.add("source.path", f"a {src.kind} source needs a path")
    if src.kind == "sql" and not src.url_env:
        problems.add("source.url_env", "a sql source needs url_env, the name of the environment variable holding its URL")


def _check_calibration_keys(law, where: str, problems) -> None:
    """``hold``, ``fit_orders`` and ``uncertainty`` of a rate law name things the law has."""
    from .model import parse_uncertainty

    allowed = ["k_ref", "activation_energy", *(f"K_{s}" for s in law.adsorption),
               *(f"order_{s}" for s in law.orders)]
    for name in law.hold:
        if name not in allowed:
            problems.add(f"{where}.hold", f"{name!r} is not a parameter of this law; allowed: {', '.join(allowed)}")
    for sp in law.fit_orders:
        if sp not in law.orders:
            problems.add(f"{where}.fit_orders", f"{sp!r} has no order in this law; orders: {', '.join(law.orders)}")
    if law.fit_orders and law.method == "reversible":
        problems.add(f"{where}.fit_orders", "orders of a reversible law are not estimated")
    try:
        parse_uncertainty(law.uncertainty)
    except (ValueError, UnitError) as exc:
        problems.add(f"{where}.uncertainty", str(exc))


def _rate_constant_kind_ok(text: str, overall_order: float) -> str | None:
    try:
        parse_rate_constant(text, overall_order)
    except UnitError as exc:
        return str(exc)
    return None


def _check_correlations(unit: Unit, at: str, problems: ProblemList) -> None:
    """Correlations name known tags, have one coefficient or a square matrix, and together
    form a symmetric positive definite correlation matrix (the offending tags named)."""
    from ..reconcile.covariance import correlation_matrix
    from .model import tag_correlations

    known = {t.tag: t for t in unit.tags}
    per_role: dict[tuple, int] = {}
    for t in unit.tags:
        per_role[(t.role, t.species)] = per_role.get((t.role, t.species), 0) + 1
    ok = True
    for k, c in enumerate(unit.correlations):
        where = f"{at}.correlations[{k}]"
        for t in c.tags:
            if t not in known:
                problems.add(f"{where}.tags", f"tag {t!r} is not in {at}.tags")
                ok = False
                continue
            tag = known[t]
            if tag.role not in ("feed_flow", "outlet_flow", "feed_conc", "outlet_conc"):
                problems.add(f"{where}.tags", f"tag {t!r} has role {tag.role!r}; only flows and concentrations "
                             "are reconciled, so only their correlations are used")
                ok = False
            elif per_role[(tag.role, tag.species)] > 1:
                problems.add(f"{where}.tags", f"tag {t!r} shares its role ({tag.role}"
                             f"{'' if tag.species is None else ' ' + tag.species}) with other tags, whose "
                             "readings are combined; a correlation needs the only tag of its role")
                ok = False
        if len(set(c.tags)) != len(c.tags):
            problems.add(f"{where}.tags", "a tag is listed twice")
            ok = False
        if (c.coefficient is None) == (c.matrix is None):
            problems.add(where, "give either coefficient (two tags) or matrix, not both or neither")
            ok = False
        elif c.coefficient is not None and len(c.tags) != 2:
            problems.add(f"{where}.coefficient", f"a coefficient relates two tags; {len(c.tags)} are listed (use matrix)")
            ok = False
        elif c.matrix is not None and (len(c.matrix) != len(c.tags) or any(len(r) != len(c.tags) for r in c.matrix)):
            problems.add(f"{where}.matrix", f"must be {len(c.tags)} x {len(c.tags)} for the {len(c.tags)} tags")
            ok = False
    if ok and unit.correlations:
        try:
            pairs = tag_correlations(unit)
            names = sorted({t for a, b, _ in pairs for t in (a, b)})
            correlation_matrix(names, {(a, b): r for a, b, r in pairs})
        except ValueError as exc:  # ReconciliationError is a ValueError
            problems.add(f"{at}.correlations", str(exc))


def _check_flowsheet(unit: Unit, at: str, problems: ProblemList) -> None:
    """``[units.flowsheet]``: a valid network with exactly one reactor, meters that are tags of the
    unit with a fitting role and a sigma, and extents the meters can determine; ``stream_*``
    tags only with a flowsheet that uses them."""
    from ..chemistry import stoichiometric_matrix
    from .model import flowsheet_network

    n0 = len(problems)
    tags = {t.tag: t for t in unit.tags}
    fs = unit.flowsheet
    used: set = set()
    if fs is not None:
        where = f"{at}.flowsheet"
        kinds = [n.kind for n in fs.nodes]
        if kinds.count("reactor") != 1:
            problems.add(f"{where}.nodes", f"exactly one node of kind 'reactor' (this unit) is needed; "
                         f"{kinds.count('reactor')} given")
        declared = {s.name for s in unit.species}
        for k, st in enumerate(fs.streams):
            w = f"{where}.streams[{k}]"
            meters = [("flow_tag", st.flow_tag, ("feed_flow", "outlet_flow", "stream_flow"), None)]
            meters += [(f"conc_tags.{sp}", tg, ("feed_conc", "outlet_conc", "stream_conc"), sp)
                       for sp, tg in st.conc_tags.items()]
            for key, tg, roles, sp in meters:
                if tg is None:
                    continue
                used.add(tg)
                t = tags.get(tg)
                if t is None:
                    problems.add(f"{w}.{key}", f"tag {tg!r} is not in {at}.tags")
                elif t.role not in roles or (sp is not None and t.species != sp):
                    problems.add(f"{w}.{key}", f"tag {tg!r} has role {t.role!r}"
                                 f"{'' if t.species is None else ' for ' + t.species}; allowed: {', '.join(roles)}"
                                 f"{'' if sp is None else ' for ' + sp}")
                elif t.sigma is None:
                    problems.add(f"{w}.{key}", f"tag {tg!r} needs a sigma: the flowsheet weighs readings by it")
            for sp in list(st.conc_tags) + list(st.known):
                if sp not in declared:
                    problems.add(w, f"species {sp!r} is not declared in {at}.species")
        if len(problems) == n0:
            try:
                species = [s.name for s in unit.species]
                nu = stoichiometric_matrix(species, [parse_equation(r.equation, r.id) for r in unit.reactions])
                net, measured = flowsheet_network(fs, species, nu, [r.id for r in unit.reactions])
                net.classify(measured).require_observable(net.unknown_names, what="reaction extents")
            except ValueError as exc:  # ReconciliationError, UnobservableError, ChemistryError
                problems.add(where, str(exc))
    for t in unit.tags:
        if t.role.startswith("stream_") and t.tag not in used:
            problems.add(f"{at}.tags", f"tag {t.tag!r} ({t.role}) is used by no stream of {at}.flowsheet")


def _check_unit(unit: Unit, at: str, problems: ProblemList) -> None:
    names = [s.name for s in unit.species]
    declared = set(names)
    formulas: dict[str, str] = {}
    for i, s in enumerate(unit.species):
        if s.formula:
            try:
                parse_formula(s.formula)
                formulas[s.name] = s.formula
            except ChemistryError as exc:
                problems.add(f"{at}.species[{i}].formula", str(exc))
        elif s.molar_mass is None:
            why = _molar_mass_needed(unit, s.name)
            if why:
                problems.add(f"{at}.species[{i}]", f"species {s.name!r} needs a formula or a molar_mass: {why}")
    consumed_key = False
    rids = [r.id for r in unit.reactions]
    for d in sorted({x for x in rids if rids.count(x) > 1}):
        problems.add(f"{at}.reactions", f"reaction id {d!r} is used twice")
    if not unit.reactions:
        problems.add(f"{at}.reactions", "at least one reaction is needed")
    for j, r in enumerate(unit.reactions):
        where = f"{at}.reactions[{j}]"
        try:
            rx = parse_equation(r.equation, r.id)
        except ChemistryError as exc:
            problems.add(f"{where}.equation", str(exc))
            continue
        unknown = [s for s in rx.coefficients if s not in declared]
        for s in unknown:
            problems.add(f"{where}.equation", f"species {s!r} is not declared in {at}.species")
        if not unknown and all(s in formulas for s in rx.coefficients):
            try:
                check_element_balance(rx, formulas)
            except ChemistryError as exc:
                problems.add(f"{where}.equation", str(exc))
        if rx.coefficients.get(unit.key_reactant, 0.0) < 0:
            consumed_key = True
        law = r.rate_law
        if law is not None:
            for key in ("orders", "adsorption", "reverse_orders"):
                for s in getattr(law, key):
                    if s not in declared:
                        problems.add(f"{where}.rate_law.{key}.{s}", f"species {s!r} is not declared")
            msg = _rate_constant_kind_ok(law.k_ref, sum(law.orders.values()))
            if msg:
                problems.add(f"{where}.rate_law.k_ref", msg)
            if law.method == "saturating" and not law.adsorption:
                problems.add(f"{where}.rate_law.adsorption", "a saturating rate law needs at least one adsorption constant")
            if law.method == "reversible" and (law.equilibrium_constant is None or law.reaction_enthalpy is None):
                problems.add(f"{where}.rate_law", "a reversible rate law needs equilibrium_constant and reaction_enthalpy")
            _check_calibration_keys(law, f"{where}.rate_law", problems)
    if unit.reactions and unit.reactions[0].rate_law is None:
        problems.add(f"{at}.reactions[0].rate_law", "the first (main) reaction needs a rate law")
    if unit.activity.catalysed is not None:
        with_law = [r.id for r in unit.reactions if r.rate_law is not None]
        for name in unit.activity.catalysed:
            if name not in with_law:
                problems.add(f"{at}.activity.catalysed", f"reaction {name!r} is not a reaction of the unit with a "
                             f"rate law (those are {with_law})")
        if unit.reactions and unit.reactions[0].id not in unit.activity.catalysed:
            problems.add(f"{at}.activity.catalysed", f"the main reaction {unit.reactions[0].id!r} must be catalysed: "
                         "the catalyst activity is defined on it")
    if unit.key_reactant not in declared:
        problems.add(f"{at}.key_reactant", f"species {unit.key_reactant!r} is not declared")
    elif not consumed_key:
        problems.add(f"{at}.key_reactant", f"species {unit.key_reactant!r} is consumed by no reaction")
    for s in unit.feed:
        if s not in declared:
            problems.add(f"{at}.feed.{s}", f"species {s!r} is not declared")
    # tags
    tag_names = [t.tag for t in unit.tags]
    for d in sorted({x for x in tag_names if tag_names.count(x) > 1}):
        problems.add(f"{at}.tags", f"tag {d!r} is listed twice")
    roles: dict[tuple, str] = {}
    for k, t in enumerate(unit.tags):
        where = f"{at}.tags[{k}]"
        kind = ROLE_KIND[t.role]
        if kind == "level":
            try:
                check_level_unit(t.unit)
            except UnitError as exc:
                problems.add(f"{where}.unit", f"tag {t.tag!r}: {exc}")
        else:
            try:
                measure = tag_measure(t.unit, kind)  # mass-based units allowed, converted at ingest
                if measure in ("mass_flow", "mass_fraction") and not (t.density or unit.density):
                    raise UnitError(f"unit {t.unit!r} is a {measure.replace('_', ' ')}; converting it needs a density "
                                    "(density = '... kg/m3' on the tag or the unit)")
            except UnitError as exc:
                problems.add(f"{where}.unit", f"tag {t.tag!r}: {exc}")
        if t.role.endswith("_conc"):
            if t.species is None:
                problems.add(f"{where}.species", f"tag {t.tag!r}: a concentration tag must name its species")
            elif t.species not in declared:
                problems.add(f"{where}.species", f"tag {t.tag!r}: species {t.species!r} is not declared")
        elif t.species is not None:
            problems.add(f"{where}.species", f"tag {t.tag!r}: a {t.role} tag has no species")
        if t.sigma is not None:
            s = t.sigma.strip()
            try:
                if s.endswith("%"):
                    float(s[:-1])
                elif kind != "level":
                    parse_quantity(s, kind)
            except (ValueError, UnitError) as exc:
                problems.add(f"{where}.sigma", f"tag {t.tag!r}: {exc}")
        if t.sampling in ("analyzer", "lab") and t.max_age is None:
            problems.add(f"{where}.max_age", f"tag {t.tag!r}: an {t.sampling} tag needs max_age (how long a value may be carried forward)")
        if t.valid_range is not None and not t.valid_range[0] < t.valid_range[1]:
            problems.add(f"{where}.valid_range", f"tag {t.tag!r}: low end must be below high end")
        roles.setdefault((t.role, t.species), t.tag)
    _check_correlations(unit, at, problems)
    _check_flowsheet(unit, at, problems)
    for role in ("feed_flow", "outlet_flow", "temperature"):
        if (role, None) not in roles:
            problems.add(f"{at}.tags", f"no tag has role {role!r}; the design equation needs it")
    if ("outlet_conc", unit.key_reactant) not in roles:
        problems.add(f"{at}.tags", f"no outlet_conc tag for the key reactant {unit.key_reactant!r}")
    if ("feed_conc", unit.key_reactant) not in roles and unit.key_reactant not in unit.feed:
        problems.add(f"{at}.feed", f"the feed concentration of {unit.key_reactant!r} is neither measured (a feed_conc tag) nor given here")
    # volume
    v = unit.volume
    if [v.fixed is not None, v.level_tag is not None, v.volume_tag is not None].count(True) != 1:
        problems.add(f"{at}.volume", "give one of fixed = '<volume>', level_tag with table, or volume_tag "
                     "(a tag of role 'volume')")
    if v.volume_tag is not None:
        vt = next((t for t in unit.tags if t.tag == v.volume_tag), None)
        if vt is None:
            problems.add(f"{at}.volume.volume_tag", f"tag {v.volume_tag!r} is not in {at}.tags")
        elif vt.role != "volume":
            problems.add(f"{at}.volume.volume_tag", f"tag {v.volume_tag!r} has role {vt.role!r}; a volume tag has "
                         "role 'volume'")
    lt = next((t for t in unit.tags if t.tag == v.level_tag), None) if v.level_tag else None
    if lt is not None and lt.unit.strip() not in ("%", "percent") and unit.limits.level is not None:
        problems.add(f"{at}.limits.level", f"level limits are in % of span; the level tag {lt.tag!r} reads "
                     f"{lt.unit!r}: leave limits.level out (the volume table gives the volume)")
    if v.level_tag is not None:
        if v.level_tag not in tag_names:
            problems.add(f"{at}.volume.level_tag", f"tag {v.level_tag!r} is not in {at}.tags")
        if not v.table or len(v.table) < 2:
            problems.add(f"{at}.volume.table", "a level -> volume table needs at least two (level %, m3) points")
        elif any(b[0] <= a[0] or b[1] < a[1] for a, b in zip(v.table, v.table[1:])):
            problems.add(f"{at}.volume.table", "levels must increase and volumes must not decrease")
    # target
    if unit.target.species not in declared:
        problems.add(f"{at}.target.species", f"species {unit.target.species!r} is not declared")
    try:
        parse_target_rate(unit.target.rate, 1.0)
    except UnitError as exc:
        problems.add(f"{at}.target.rate", str(exc))
    lim = unit.limits
    if not lim.temperature[0] < lim.temperature[1]:
        problems.add(f"{at}.limits.temperature", "low limit must be below high limit")
    if not lim.feed_flow[0] < lim.feed_flow[1]:
        problems.add(f"{at}.limits.feed_flow", "low limit must be below high limit")
    if unit.activity.fresh_period and not unit.activity.fresh_period[0] < unit.activity.fresh_period[1]:
        problems.add(f"{at}.activity.fresh_period", "start must be before end")


def _molar_mass_needed(unit: Unit, species: str) -> str:
    """Why a conversion needs the molar mass of ``species`` (empty when none does)."""
    if species == unit.target.species:
        return "it is the product, whose production is reported in kg/h (and a mass target rate converts through it)"
    for t in unit.tags:
        if t.species == species and ROLE_KIND[t.role] == "concentration":
            try:
                measure = tag_measure(t.unit, "concentration")
            except UnitError:
                continue
            if measure != "concentration":
                return f"tag {t.tag!r} is read in {t.unit!r}, a {measure.replace('_', ' ')}"
    return ""


def parse_target_rate(text: str, molar_mass: float) -> float:
    """Production target as a molar rate. [mol/s]

    Parameters
    ----------
    text : str
        Mass rate (``"2.4 t/d"``, ``"100 kg/h"``) or molar rate (``"5 kmol/h"``).
    molar_mass : float
        Molar mass of the product. [kg/mol]

    >>> round(parse_target_rate("8.64 t/d", 0.1), 6)
    1.0
    >>> round(parse_target_rate("3.6 kmol/h", 0.1), 6)
    1.0
    """
    try:
        return parse_quantity(text, "molar_flow")
    except UnitError:
        pass
    try:
        return parse_quantity(text, "mass_rate") / molar_mass
    except UnitError:
        raise UnitError(f"target rate {text!r} is neither a mass rate (e.g. '2.4 t/d') nor a molar rate (e.g. '5 kmol/h')") from None


def resolve_path(config_path: str | Path, relative: str) -> Path:
    """A path from the config, resolved against the config file's folder."""
    p = Path(relative)
    return p if p.is_absolute() else (Path(config_path).resolve().parent / p)


__all__ = ["load_config", "validate_config", "parse_target_rate", "resolve_path", "store_url", "KinetraceError", "SI_UNITS"]


def store_url(cfg: PlantConfig, config_path: str | Path, environ=None) -> str:
    """SQLAlchemy URL of the results store of a config.

    Taken, in this order, from the environment variable named by ``store.url_env``, the
    environment variable ``KINETRACE_STORE_URL``, or ``store.url``; default a SQLite file
    ``results.sqlite`` in ``analysis.output_dir``. A relative SQLite path is resolved
    against the config file's folder (not the working directory).

    >>> from types import SimpleNamespace as NS
    >>> cfg = NS(store=NS(url="sqlite:///../out/results.sqlite", url_env=None), analysis=NS(output_dir="out"))
    >>> store_url(cfg, "/plant/config/plant.toml", environ={})
    'sqlite:////plant/out/results.sqlite'
    """
    import os

    environ = os.environ if environ is None else environ
    url = None
    if cfg.store.url_env and environ.get(cfg.store.url_env):
        url = environ[cfg.store.url_env]
    elif environ.get("KINETRACE_STORE_URL"):
        url = environ["KINETRACE_STORE_URL"]
    elif cfg.store.url:
        url = cfg.store.url
    else:
        url = "sqlite:///" + str(Path(cfg.analysis.output_dir) / "results.sqlite")
    if url.startswith("sqlite:///") and not url.startswith("sqlite:////") and url != "sqlite://":
        rel = url[len("sqlite:///"):]
        base = Path(config_path).resolve().parent
        url = "sqlite:///" + str((base / rel).resolve()) if not Path(rel).is_absolute() else url
    return url
