"""Molecular formulas: element counts and molar mass.

Formulas are written the usual way, with optional parentheses and hydrates
joined by ``.`` or ``*``: ``C4H6O2``, ``(CH3CO)2O``, ``CuSO4.5H2O``.
"""

from __future__ import annotations

import re
from collections import Counter

from ..errors import ChemistryError

#: Standard atomic weights [g/mol], abridged (CIAAW/IUPAC 2021, conventional values;
#: from memory, 4-5 significant figures, ample for molar masses of process streams).
ATOMIC_WEIGHTS: dict[str, float] = {
    "H": 1.008, "He": 4.0026, "Li": 6.94, "B": 10.81, "C": 12.011, "N": 14.007,
    "O": 15.999, "F": 18.998, "Na": 22.990, "Mg": 24.305, "Al": 26.982, "Si": 28.085,
    "P": 30.974, "S": 32.06, "Cl": 35.45, "K": 39.098, "Ca": 40.078, "Ti": 47.867,
    "Cr": 51.996, "Mn": 54.938, "Fe": 55.845, "Co": 58.933, "Ni": 58.693, "Cu": 63.546,
    "Zn": 65.38, "Br": 79.904, "Rh": 102.91, "Pd": 106.42, "Ag": 107.87, "Sn": 118.71,
    "I": 126.90, "Pt": 195.08,
}

_TOKEN = re.compile(r"([A-Z][a-z]?)(\d*)|(\()|(\))(\d*)")


def parse_formula(formula: str) -> Counter:
    """Count the atoms of each element in a molecular formula.

    Parameters
    ----------
    formula : str
        Formula such as ``"C4H6O2"`` or ``"(CH3CO)2O"``.

    Returns
    -------
    collections.Counter
        Element symbol -> number of atoms.

    >>> dict(parse_formula("(CH3CO)2O"))
    {'C': 4, 'H': 6, 'O': 3}
    >>> parse_formula("C4H6Q2")
    Traceback (most recent call last):
    ...
    kinetrace.errors.ChemistryError: formula 'C4H6Q2': unknown element 'Q'
    """
    total: Counter = Counter()
    for part in re.split(r"[.*·]", formula.strip()):
        m = re.match(r"^(\d+)(.*)$", part)
        mult, body = (int(m.group(1)), m.group(2)) if m else (1, part)
        total.update({k: v * mult for k, v in _parse_group(formula, body).items()})
    if not total:
        raise ChemistryError(f"formula {formula!r} is empty")
    return total


def _parse_group(formula: str, body: str) -> Counter:
    stack: list[Counter] = [Counter()]
    pos = 0
    while pos < len(body):
        m = _TOKEN.match(body, pos)
        if not m:
            raise ChemistryError(f"formula {formula!r}: cannot read {body[pos:]!r}")
        pos = m.end()
        if m.group(1):
            el = m.group(1)
            if el not in ATOMIC_WEIGHTS:
                raise ChemistryError(f"formula {formula!r}: unknown element {el!r}")
            stack[-1][el] += int(m.group(2) or 1)
        elif m.group(3):
            stack.append(Counter())
        else:
            if len(stack) == 1:
                raise ChemistryError(f"formula {formula!r}: unmatched ')'")
            inner = stack.pop()
            n = int(m.group(5) or 1)
            stack[-1].update({k: v * n for k, v in inner.items()})
    if len(stack) != 1:
        raise ChemistryError(f"formula {formula!r}: unmatched '('")
    return stack[0]


def molar_mass(formula: str) -> float:
    """Molar mass of a formula. [kg/mol]

    >>> round(molar_mass("H2O") * 1000, 3)
    18.015
    """
    return sum(ATOMIC_WEIGHTS[el] * n for el, n in parse_formula(formula).items()) / 1000.0
