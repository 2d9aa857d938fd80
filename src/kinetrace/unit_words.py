"""Units in words, and the nearest valid spelling of a unit that is unknown or of the wrong kind.

Messages about units speak the plant engineer's language: "a volume per time (e.g.
m3/h, L/min, gpm)" rather than a dimension such as ``[length] ** 3 / [time]``, and a
unit that fails gets the nearest spelling that would work: the same letters in
another case (``M3/H`` -> ``m3/h``: unit symbols are case-sensitive, ``M`` is molar
and ``H`` henry), a common export spelling (``USGPM`` -> ``gpm``), or the closest
known spelling by :func:`difflib.get_close_matches` (Ratcliff/Obershelp matching).
"""

from __future__ import annotations

import difflib

#: Each kind of quantity in words, with spellings a historian export commonly uses (all valid).
KIND_WORDS: dict[str, tuple[str, tuple[str, ...]]] = {
    "volumetric_flow": ("a volume per time", ("m3/h", "m3/s", "m3/d", "L/min", "L/h", "L/s", "gpm", "bbl/d",
                                              "ft3/min", "ft3/h")),
    "mass_flow": ("a mass per time", ("kg/h", "kg/s", "kg/min", "lb/h", "lb/min", "t/h", "t/d")),
    "molar_flow": ("an amount of substance per time", ("kmol/h", "mol/s", "mol/min", "lbmol/h")),
    "concentration": ("an amount of substance per volume", ("mol/L", "mmol/L", "kmol/m3", "mol/m3", "lbmol/ft3")),
    "mass_fraction": ("a mass fraction", ("wt%", "kg/kg", "g/g")),
    "mass_concentration": ("a mass per volume", ("g/L", "mg/L", "kg/m3", "lb/ft3")),
    "temperature": ("a temperature", ("degC", "degF", "K")),
    "volume": ("a volume", ("m3", "L", "gal", "ft3", "bbl")),
    "length": ("a length", ("m", "cm", "mm", "ft", "in")),
    "mass": ("a mass", ("kg", "lb", "t")),
    "level": ("a fraction of span", ("%",)),
    "time": ("a time", ("s", "min", "h", "d")),
    "molar_energy": ("an energy per amount of substance", ("kJ/mol", "J/mol", "kcal/mol")),
    "molar_mass": ("a mass per amount of substance", ("g/mol", "kg/kmol", "kg/mol")),
    "density": ("a mass per volume", ("kg/m3", "g/L", "g/cm3", "lb/ft3")),
    "inverse_concentration": ("a volume per amount of substance", ("m3/mol", "L/mol")),
    "mass_rate": ("a mass per time", ("kg/h", "t/d", "lb/h")),
    "dimensionless": ("a pure number", ("1", "%")),
    "pressure": ("a pressure", ("Pa", "kPa", "bar", "psi")),
}

#: Export spellings that are not units of the registry, lower case and without spaces -> a valid spelling.
ALIASES: dict[str, str] = {
    "usgpm": "gpm", "gal/min": "gpm", "galpm": "gpm", "m3/hr": "m3/h", "m3/hour": "m3/h", "cmh": "m3/h",
    "lpm": "L/min", "l/m": "L/min", "lph": "L/h", "l/hr": "L/h", "kg/hr": "kg/h", "lb/hr": "lb/h",
    "lbs/h": "lb/h", "lbs/hr": "lb/h", "bpd": "bbl/d", "bbl/day": "bbl/d", "t/day": "t/d", "tpd": "t/d",
    "°c": "degC", "ºc": "degC", "degc": "degC", "deg.c": "degC", "c": "degC", "celsius": "degC",
    "°f": "degF", "ºf": "degF", "degf": "degF", "deg.f": "degF", "f": "degF", "fahrenheit": "degF",
    "kelvin": "K", "mol/ltr": "mol/L", "wt.%": "wt%", "wt-%": "wt%",
    "pct": "%", "percent": "%",
}

#: Base dimensions in words.
_BASE = {"[length]": "length", "[mass]": "mass", "[time]": "time", "[substance]": "amount of substance",
         "[temperature]": "temperature", "[current]": "electric current", "[luminosity]": "luminous intensity"}


def kind_words(kind: str) -> str:
    """A kind of quantity in words with example spellings.

    >>> kind_words("volumetric_flow")
    'a volume per time (e.g. m3/h, L/min, gpm)'
    """
    words, spellings = KIND_WORDS.get(kind, (kind.replace("_", " "), ()))
    pick = [s for s in spellings if s in ("m3/h", "L/min", "gpm", "kg/h", "lb/h", "mol/L", "kmol/m3", "lbmol/ft3",
                                          "degC", "degF", "K", "m3", "L", "m", "mm", "ft", "g/L", "wt%")][:3]
    pick = pick or list(spellings[:3])
    return f"{words} (e.g. {', '.join(pick)})" if pick else words


def dimension_words(dimensionality) -> str:
    """A pint dimensionality in words: a kind of :data:`KIND_WORDS` where one matches, else base dimensions.

    >>> from kinetrace.units import _units
    >>> dimension_words(_units("kg/h").dimensionality)
    'a mass per time'
    >>> dimension_words(_units("m*s").dimensionality)
    'of length × time'
    """
    from .units import _units

    for kind in ("volumetric_flow", "mass_flow", "molar_flow", "concentration", "mass_concentration", "temperature",
                 "volume", "length", "mass", "time", "molar_energy", "molar_mass", "inverse_concentration", "pressure",
                 "dimensionless"):
        if _units(KIND_WORDS[kind][1][0]).dimensionality == dimensionality:
            return KIND_WORDS[kind][0]
    up = [(_BASE.get(d, d.strip("[]")), p) for d, p in sorted(dict(dimensionality).items()) if p > 0]
    down = [(_BASE.get(d, d.strip("[]")), -p) for d, p in sorted(dict(dimensionality).items()) if p < 0]
    term = (lambda parts: " × ".join(w if p == 1 else f"{w}^{p:g}" for w, p in parts))   # noqa: E731
    if not down:
        return "of " + term(up)
    return "of " + (term(up) if up else "1") + " per " + (term(down) if len(down) == 1 else f"({term(down)})")


def nearest_spelling(unit: str, kinds) -> str | None:
    """The valid spelling nearest to ``unit`` among the kinds allowed, or None.

    Same letters in another case first, then a known export spelling, then the closest
    spelling by :func:`difflib.get_close_matches` (cutoff 0.6).

    >>> nearest_spelling("M3/H", ["volumetric_flow"]), nearest_spelling("USGPM", ["volumetric_flow"])
    ('m3/h', 'gpm')
    >>> nearest_spelling("DEGF", ["temperature"]), nearest_spelling("kmol/m^3", ["concentration"])
    ('degF', 'kmol/m3')
    """
    spellings = [s for k in kinds for s in KIND_WORDS.get(k, ("", ()))[1]]
    key = "".join(unit.split()).lower().replace("^", "").replace("**", "")
    for s in spellings:
        if s.lower() == key:
            return s
    alias = ALIASES.get(key)
    if alias in spellings:
        return alias
    close = difflib.get_close_matches(key, [s.lower() for s in spellings], n=1, cutoff=0.6)
    return next((s for s in spellings if s.lower() == close[0]), None) if close else None


def unit_hint(unit: str, kinds) -> str:
    """``"; did you mean 'm3/h'? ..."`` for a unit that failed, or ``""`` when no spelling is near.

    >>> unit_hint("M3/H", ["volumetric_flow"])
    "; did you mean 'm3/h'? (unit symbols are case-sensitive)"
    """
    best = nearest_spelling(unit, kinds)
    if best is None or best == unit.strip():
        return ""
    case = best.lower() == "".join(unit.split()).lower()
    return f"; did you mean {best!r}?" + (" (unit symbols are case-sensitive)" if case else "")
