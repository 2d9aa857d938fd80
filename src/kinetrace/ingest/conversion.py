"""Tag engineering units to SI: one linear map ``si = a * value + b`` per tag, vectorised.

Each tag's unit is checked once against what its role measures (a flow, a
concentration, a temperature, a level), through the project's pint registry
(:mod:`kinetrace.units`). Mass flows become volumetric through a density; mass
fractions and mass concentrations become molar concentrations through the
species' molar mass (and the density, for fractions). Problems are collected
for all tags of a unit and raised together as one :class:`ConfigError`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..config.schema import ROLE_KIND, Tag, Unit
from ..errors import ConfigError, ProblemList
from ..units import SI_UNITS, UnitError, _units, check_level_unit, tag_measure, tag_unit_text, ureg


@dataclass(frozen=True)
class TagScale:
    """Linear map of one tag from its engineering unit to SI: ``si = factor * value + offset``.

    ``kind`` is the SI kind of the result (a key of :data:`kinetrace.units.SI_UNITS`,
    or ``"level"`` for a fraction of span); ``measure`` what the instrument reads.
    """

    tag: str
    kind: str
    measure: str
    factor: float
    offset: float

    def to_si(self, values):
        """Values in the tag's unit -> SI. [tag unit] -> [SI of kind]"""
        return np.asarray(values, dtype=float) * self.factor + self.offset

    def from_si(self, values):
        """SI -> the tag's unit (e.g. for a valid_range message). [SI of kind] -> [tag unit]"""
        return (np.asarray(values, dtype=float) - self.offset) / self.factor


def _linear(unit: str, si: str) -> tuple[float, float]:
    """Factor and offset of the (affine) conversion ``unit`` -> ``si`` through pint."""
    q = ureg.Quantity(np.array([0.0, 1.0]), _units(unit)).to(_units(si)).magnitude
    return float(q[1] - q[0]), float(q[0])


def tag_scale(tag: Tag, *, density: float | None = None, molar_mass: float | None = None) -> TagScale:
    """Build the SI map of one tag.

    Parameters
    ----------
    tag : Tag
        The tag's configuration (role, unit, species).
    density : float, optional
        Liquid density, for a mass-flow or mass-fraction tag. [kg/m^3]
    molar_mass : float, optional
        Molar mass of the tag's species, for a mass-based concentration. [kg/mol]

    Returns
    -------
    TagScale

    Raises
    ------
    UnitError
        The unit is unknown or of the wrong dimension, or a density / molar mass it needs is missing.

    References
    ----------
    .. [1] Thompson, A., Taylor, B. N. (2008). NIST Special Publication 811, Appendix B.

    >>> t = Tag(tag="F1", role="feed_flow", unit="kg/h")
    >>> s = tag_scale(t, density=1000.0)
    >>> round(float(s.to_si(3600.0)), 12)   # 3600 kg/h of water -> 1e-3 m3/s
    0.001
    >>> tag_scale(Tag(tag="T1", role="temperature", unit="degF")).to_si([32.0, 212.0]).round(2).tolist()
    [273.15, 373.15]
    """
    kind = ROLE_KIND[tag.role]
    if kind == "level":
        if tag.unit.strip() in ("%", "percent"):
            return TagScale(tag.tag, "level", "level", 0.01, 0.0)
        check_level_unit(tag.unit)
        a, b = _linear(tag_unit_text(tag.unit), SI_UNITS["length"])
        return TagScale(tag.tag, "level", "length", a, b)
    measure = tag_measure(tag.unit, kind)
    text = tag_unit_text(tag.unit)
    if measure == kind:
        a, b = _linear(text, SI_UNITS[kind])
    elif measure == "mass_flow":
        if not density:
            raise UnitError(f"unit {tag.unit!r} is a mass flow; give a density (tag or unit 'density = \"... kg/m3\"') "
                            "to convert it to a volumetric flow")
        a, b = _linear(text, "kg/s")
        a, b = a / density, b / density
    elif measure == "mass_fraction":
        if not density or not molar_mass:
            raise UnitError(f"unit {tag.unit!r} is a mass fraction; a molar concentration needs the liquid density "
                            f"(tag or unit 'density') and the molar mass of species {tag.species!r} (formula or "
                            "molar_mass)")
        a, b = _linear(text, "dimensionless")
        a, b = a * density / molar_mass, b * density / molar_mass
    else:  # mass_concentration
        if not molar_mass:
            raise UnitError(f"unit {tag.unit!r} is a mass concentration; it needs the molar mass of species "
                            f"{tag.species!r} (formula or molar_mass)")
        a, b = _linear(text, "kg/m^3")
        a, b = a / molar_mass, b / molar_mass
    return TagScale(tag.tag, kind, measure, a, b)


def unit_scales(unit: Unit, molar_masses: dict[str, float], *, where: str = "units",
                source: str = "<config>") -> dict[str, TagScale]:
    """SI maps of every tag of a unit; all problems raised together.

    Parameters
    ----------
    unit : Unit
        The unit's configuration.
    molar_masses : dict
        Molar mass by species name. [kg/mol]
    where : str
        Key path of the unit in the config, for messages (``"units[1]"``).
    source : str
        Config file name, for messages.

    Raises
    ------
    ConfigError
        One problem per tag whose unit cannot be converted, naming the tag.
    """
    problems = ProblemList()
    scales: dict[str, TagScale] = {}
    for k, t in enumerate(unit.tags):
        try:
            mm = molar_masses.get(t.species) if t.species else None
            scales[t.tag] = tag_scale(t, density=t.density or unit.density,
                                      molar_mass=None if mm is None or np.isnan(mm) else mm)
        except UnitError as exc:
            problems.add(f"{where}.tags[{k}].unit", f"tag {t.tag!r}: {exc}")
    if problems:
        raise ConfigError(source, problems)
    return scales

