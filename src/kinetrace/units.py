"""Units: one pint registry for kinetrace, and conversion to the internal SI units.

Internal units are SI throughout: concentration [mol/m^3], volumetric flow
[m^3/s], molar flow [mol/s], temperature [K], volume [m^3], time [s],
activation energy [J/mol]. Conversion happens once, at the edges (config
load, ingest), vectorised over arrays.

Quantities written in the plant configuration are strings of a number and a
unit, such as ``"80 degC"`` or ``"2.5 mol/L"``; :func:`parse_quantity` reads
them. Offset temperature units (degC, degF) are handled explicitly, so
``"80 degC"`` means a temperature of 353.15 K.

Units pint does not define and the trade uses are added here, each from
NIST SP 811 (2008), Appendix B: ``lbmol`` (453.59237 mol, from the exact
pound), ``gpm`` (US gallon per minute) and ``bbl`` (42 US gallons).
"""

from __future__ import annotations

import re
from functools import lru_cache

import numpy as np
import pint

from .errors import KinetraceError

#: The registry every kinetrace module uses.
# pint's own "bbl" is the 31.5-gallon liquid barrel; the trade's bbl (and ours) is the
# 42-gallon petroleum barrel, so it is redefined on purpose, without pint's warning.
ureg = pint.UnitRegistry(cache_folder=None, on_redefinition="ignore")
ureg.define("lbmol = 453.59237 * mol = lb_mol")
ureg.define("gpm = US_liquid_gallon / minute")
ureg.define("bbl = 42 * US_liquid_gallon = oil_bbl")
ureg.define("wtpct = 0.01 = wt_percent")

#: Internal SI unit of each physical kind of quantity.
SI_UNITS: dict[str, str] = {
    "volumetric_flow": "m^3/s",
    "mass_flow": "kg/s",
    "molar_flow": "mol/s",
    "concentration": "mol/m^3",
    "mass_fraction": "dimensionless",
    "temperature": "K",
    "volume": "m^3",
    "length": "m",
    "level": "dimensionless",
    "time": "s",
    "molar_energy": "J/mol",
    "molar_mass": "kg/mol",
    "density": "kg/m^3",
    "inverse_concentration": "m^3/mol",
    "mass_rate": "kg/s",
    "dimensionless": "dimensionless",
    "pressure": "Pa",
}

_NUMBER = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*$")


class UnitError(KinetraceError):
    """A unit is unknown, or is of the wrong physical dimension."""


@lru_cache(maxsize=512)
def _units(text: str) -> pint.Unit:
    text = text.strip()
    if text in ("", "1", "-"):
        return ureg.dimensionless
    try:
        # historian exports write m3, ft3, cm3: read a trailing 2 or 3 on a unit name as a power
        text = re.sub(r"(?<=[A-Za-z])([23])\b", r"^\1", text.replace("%", "percent"))
        return ureg.parse_units(text)
    except (pint.errors.UndefinedUnitError, pint.errors.DefinitionSyntaxError, ValueError,
            AttributeError, TypeError, SyntaxError) as exc:
        raise UnitError(f"unknown unit {text!r} ({exc})") from None


def kind_of(unit: str) -> str | None:
    """Name the physical kind of a unit, as a key of :data:`SI_UNITS`, or None.

    >>> kind_of("L/min"), kind_of("degF"), kind_of("kmol/m3")
    ('volumetric_flow', 'temperature', 'concentration')
    """
    u = _units(unit)
    for kind, si in SI_UNITS.items():
        if kind in ("level", "mass_fraction"):
            continue
        if u.dimensionality == _units(si).dimensionality:
            return kind
    return None


def check_kind(unit: str, kind: str) -> None:
    """Raise :class:`UnitError` unless ``unit`` is a unit of physical kind ``kind``.

    >>> check_kind("gpm", "volumetric_flow")
    >>> check_kind("kg/h", "volumetric_flow")
    Traceback (most recent call last):
    ...
    kinetrace.units.UnitError: unit 'kg/h' is a mass per time, not a volume per time (e.g. m3/h, L/min, gpm)
    >>> check_kind("M3/H", "volumetric_flow")
    Traceback (most recent call last):
    ...
    kinetrace.units.UnitError: unit 'M3/H' is not a volume per time (e.g. m3/h, L/min, gpm); did you mean 'm3/h'? (unit symbols are case-sensitive)
    """
    u = _known(unit, [kind])
    si = _units(SI_UNITS[kind])
    if u.dimensionality != si.dimensionality:
        raise UnitError(_wrong_kind(unit, u, [kind]))


def _known(unit: str, kinds) -> pint.Unit:
    """The registry's unit for ``unit``; an unknown one raises with the nearest valid spelling."""
    try:
        return _units(unit)
    except UnitError:
        from .unit_words import kind_words, unit_hint

        raise UnitError(f"unknown unit {unit!r}: expected " + " or ".join(kind_words(k) for k in kinds)
                        + unit_hint(unit, kinds)) from None


def _wrong_kind(unit: str, u: pint.Unit, kinds) -> str:
    """Message for a unit of the wrong kind: its kind and the expected ones in words, and the nearest
    valid spelling (a kind in words only where it is a common one, never a dimension dump)."""
    from .unit_words import dimension_words, kind_words, unit_hint

    words = dimension_words(u.dimensionality)
    expected = " or ".join(kind_words(k) for k in kinds)
    hint = unit_hint(unit, kinds)
    if words.startswith("of ") or hint:    # an unusual dimension: most likely a misspelling
        return f"unit {unit!r} is not {expected}{hint}"
    return f"unit {unit!r} is {words}, not {expected}"


def to_si(values, unit: str, kind: str) -> np.ndarray | float:
    """Convert values in ``unit`` to the internal SI unit of ``kind``.

    Parameters
    ----------
    values : float or array_like
        Numbers in ``unit``. NaN stays NaN.
    unit : str
        Engineering unit, e.g. ``"m3/h"``, ``"degF"``, ``"lbmol/ft3"``.
    kind : str
        Physical kind, a key of :data:`SI_UNITS`.

    Returns
    -------
    float or ndarray
        Values in ``SI_UNITS[kind]``.

    References
    ----------
    .. [1] Thompson, A., Taylor, B. N. (2008). Guide for the Use of the International
       System of Units (SI). NIST Special Publication 811, Appendix B.

    >>> round(to_si(1.0, "lbmol/ft^3", "concentration"), 3)
    16018.463
    >>> to_si([20.0, 100.0], "degC", "temperature").round(2).tolist()
    [293.15, 373.15]
    """
    check_kind(unit, kind)
    arr = np.asarray(values, dtype=float)
    q = ureg.Quantity(arr, _units(unit)).to(_units(SI_UNITS[kind]))
    out = np.asarray(q.magnitude, dtype=float)
    return float(out) if out.ndim == 0 else out


def from_si(values, unit: str, kind: str) -> np.ndarray | float:
    """Convert values from the internal SI unit of ``kind`` to ``unit`` (for display).

    >>> round(from_si(353.15, "degC", "temperature"), 6)
    80.0
    """
    check_kind(unit, kind)
    arr = np.asarray(values, dtype=float)
    q = ureg.Quantity(arr, _units(SI_UNITS[kind])).to(_units(unit))
    out = np.asarray(q.magnitude, dtype=float)
    return float(out) if out.ndim == 0 else out


#: Display unit of each SI unit in plain-language messages and reports (stored numbers stay SI).
DISPLAY_UNITS = {"K": ("degC", "temperature", ".1f"), "m3/s": ("m3/h", "volumetric_flow", ".3g"),
                 "s": ("h", "time", ".3g"), "mol/s": ("kmol/h", "molar_flow", ".4g")}


def display(value, unit: str, to: str | None = None) -> str:
    """A value in SI written in its display unit, for messages and reports.

    Parameters
    ----------
    value : float
        The value in the SI unit ``unit``. [SI]
    unit : str
        Its SI unit as stored (``"K"``, ``"m3/s"``, ``"s"``, ``"mol/s"``); any other unit is
        written as it is.
    to : str, optional
        Display unit to use instead of the default one (e.g. the unit's own instrument unit,
        ``"gpm"``, ``"degF"``); converted with pint.

    Returns
    -------
    str
        The value and its display unit.

    >>> display(343.15, "K"), display(1.5e-3, "m3/s"), display(3600.0, "s")
    ('70.0 degC', '5.4 m3/h', '1 h')
    >>> display(0.25, "-")
    '0.25 -'
    >>> display(1.5e-3, "m3/s", "gpm"), display(343.15, "K", "degF")
    ('23.8 gpm', '158.0 degF')
    """
    if unit not in DISPLAY_UNITS or value is None or not np.isfinite(value):
        return f"{value:.4g} {unit}"
    disp, kind, spec = DISPLAY_UNITS[unit]
    if to and to != disp:
        try:
            return f"{format(float(convert(value, unit, to)), spec)} {to}"
        except UnitError:
            pass
    return f"{format(float(from_si(value, disp, kind)), spec)} {disp}"


def parse_quantity(text: str | float | int, kind: str) -> float:
    """Read a config quantity such as ``"80 degC"`` and return it in SI units of ``kind``.

    A bare number is taken as already in SI.

    >>> parse_quantity("80 degC", "temperature")
    353.15
    >>> round(parse_quantity("62 kJ/mol", "molar_energy"), 6)
    62000.0
    >>> parse_quantity("3 furlongs/fortnight", "concentration")
    Traceback (most recent call last):
    ...
    kinetrace.units.UnitError: unit 'furlongs/fortnight' is not an amount of substance per volume (e.g. mol/L, kmol/m3, lbmol/ft3)
    """
    if isinstance(text, (int, float)) and not isinstance(text, bool):
        return float(text)
    if not isinstance(text, str):
        raise UnitError(f"expected a quantity such as '2.5 mol/L', got {text!r}")
    m = _NUMBER.match(text)
    if not m:
        raise UnitError(f"expected a number followed by a unit, such as '2.5 mol/L', got {text!r}")
    return float(to_si(float(m.group(1)), m.group(2), kind))


def parse_rate_constant(text: str, overall_order: float) -> float:
    """Read a rate constant such as ``"0.9 L/(mol min)"`` into SI for a law of the given overall order.

    SI unit: (mol/m^3)^(1-n) / s for overall order n.

    >>> round(parse_rate_constant("0.311 1/min", 1.0), 8)
    0.00518333
    >>> round(parse_rate_constant("1 L/(mol s)", 2.0), 9)
    0.001
    """
    m = _NUMBER.match(text) if isinstance(text, str) else None
    if not m or not m.group(2):
        raise UnitError(f"expected a rate constant with its unit, such as '2e-3 1/s', got {text!r}")
    q = ureg.Quantity(float(m.group(1)), _units(m.group(2)))
    want = (ureg.mol / ureg.m**3) ** (1.0 - overall_order) / ureg.s
    if q.dimensionality != want.dimensionality:
        from .unit_words import dimension_words

        examples = {0: "mol/(L s)", 1: "1/s or 1/min", 2: "L/(mol s) or m3/(kmol h)"}.get(overall_order, "")
        raise UnitError(f"rate constant {text!r} is {dimension_words(q.dimensionality).removeprefix('of ')}; a rate "
                        f"law of overall order {overall_order:g} needs "
                        f"{dimension_words(want.dimensionality).removeprefix('of ')}"
                        + (f" (e.g. {examples})" if examples else ""))
    return float(q.to(want).magnitude)


def convert(value, from_unit: str, to_unit: str):
    """Convert a value between two units of one dimension (pint); offsets (degC, degF) handled.

    >>> round(convert(1e-3, "m3/(mol s)", "L/(mol h)"), 6), convert(343.15, "K", "degC")
    (3600.0, 70.0)
    """
    q = ureg.Quantity(value, _units(from_unit))
    try:
        return q.to(_units(to_unit)).magnitude
    except pint.errors.DimensionalityError:
        raise UnitError(f"cannot convert {from_unit!r} to {to_unit!r}: different dimensions") from None


def rate_constant_unit(overall_order: float) -> str:
    """SI unit of the rate constant of a law of overall order n, (m3/mol)^(n-1)/s, as text pint reads.

    >>> rate_constant_unit(1), rate_constant_unit(2), rate_constant_unit(1.5)
    ('1/s', 'm3/(mol s)', '(m3/mol)**0.5/s')
    """
    n = float(overall_order)
    if n == 1:
        return "1/s"
    if n == 2:
        return "m3/(mol s)"
    return f"(m3/mol)**{n - 1:g}/s"


#: Measured kinds a tag of each SI kind may be read in; the first is the kind itself.
#: A mass flow becomes a volumetric flow through a density; a mass fraction or a mass
#: concentration becomes a molar concentration through a molar mass (and a density).
TAG_MEASURES: dict[str, tuple[str, ...]] = {
    "volumetric_flow": ("volumetric_flow", "mass_flow"),
    "concentration": ("concentration", "mass_fraction", "mass_concentration"),
    "temperature": ("temperature",),
}

_MASS_FRACTION = {"wt%": "wtpct", "wt %": "wtpct", "%wt": "wtpct", "% wt": "wtpct", "wt-%": "wtpct",
                  "%w/w": "wtpct", "% w/w": "wtpct", "w/w": "dimensionless", "mass fraction": "dimensionless"}


def tag_unit_text(unit: str) -> str:
    """Spelling of a tag unit that the registry reads (``"wt%"`` -> ``"wtpct"``).

    >>> tag_unit_text("wt %"), tag_unit_text("m3/h")
    ('wtpct', 'm3/h')
    """
    u = unit.strip()
    return _MASS_FRACTION.get(u.lower(), u)


def tag_measure(unit: str, kind: str) -> str:
    """Which quantity a tag unit measures, among those allowed for an SI ``kind``.

    Returns ``kind`` itself, or ``"mass_flow"`` for a volumetric-flow tag read in
    mass units (kg/h, lb/h), or ``"mass_fraction"`` (wt%, kg/kg) or
    ``"mass_concentration"`` (g/L, kg/m3) for a concentration tag. A bare ``%`` on
    a concentration is refused: it could be mass, mole or volume percent.

    Raises
    ------
    UnitError
        The unit is unknown, or measures none of the allowed quantities.

    >>> tag_measure("lb/h", "volumetric_flow"), tag_measure("wt%", "concentration")
    ('mass_flow', 'mass_fraction')
    >>> tag_measure("%", "concentration")
    Traceback (most recent call last):
    ...
    kinetrace.units.UnitError: unit '%' on a concentration is ambiguous: write 'wt%' for a mass percent, or a molar concentration such as 'mol/L'
    """
    allowed = TAG_MEASURES.get(kind, (kind,))
    text = tag_unit_text(unit)
    if kind == "concentration" and text.strip() in ("%", "percent"):
        raise UnitError(f"unit {unit!r} on a concentration is ambiguous: write 'wt%' for a mass percent, "
                        "or a molar concentration such as 'mol/L'")
    u = _known(unit, allowed) if text == unit.strip() else _units(text)
    dim = u.dimensionality
    si = {"mass_fraction": "dimensionless", "mass_concentration": "kg/m^3"}
    for measure in allowed:
        if dim == _units(si.get(measure) or SI_UNITS[measure]).dimensionality:
            return measure
    raise UnitError(_wrong_kind(unit, u, allowed))


def check_level_unit(unit: str) -> None:
    """Raise :class:`UnitError` unless a level unit is '%' of span or a length.

    >>> check_level_unit("ft")
    >>> check_level_unit("m3")
    Traceback (most recent call last):
    ...
    kinetrace.units.UnitError: a level is read in '%' of span or in a length unit (e.g. m, mm, ft), not 'm3' (a volume; for a volume transmitter use role = "volume" and volume_tag)
    """
    from .unit_words import dimension_words, unit_hint

    if unit.strip() in ("%", "percent"):
        return
    try:
        check_kind(unit, "length")
    except UnitError:
        try:
            what = dimension_words(_units(tag_unit_text(unit)).dimensionality)
        except UnitError:
            what = "an unknown unit" + unit_hint(unit, ["length"])
        extra = '; for a volume transmitter use role = "volume" and volume_tag' if what == "a volume" else ""
        raise UnitError(f"a level is read in '%' of span or in a length unit (e.g. m, mm, ft), not {unit!r} "
                        f"({what}{extra})") from None
