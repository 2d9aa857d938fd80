"""Reaction equations and the stoichiometric matrix.

Equations are written ``A + 2 B -> P + W``; ``<=>`` marks a reversible
reaction (the same matrix column; the rate law says how it runs backwards).
Coefficients may be decimals (``0.5 O2``). Species names are any word of
letters, digits, ``_`` and ``-`` that does not start with a digit.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

import numpy as np

from ..errors import ChemistryError
from .formula import parse_formula

_ARROWS = ("<=>", "->")
_TERM = re.compile(r"^\s*(?:(\d+(?:\.\d*)?|\.\d+)\s*\*?\s*)?([A-Za-z_][A-Za-z0-9_\-]*)\s*$")


@dataclass(frozen=True)
class Reaction:
    """One reaction parsed from its equation.

    Attributes
    ----------
    name : str
        Reaction identifier.
    coefficients : dict[str, float]
        Signed stoichiometric coefficients: negative for reactants, positive for products.
    reversible : bool
        True when written with ``<=>``.
    """

    name: str
    coefficients: dict[str, float]
    reversible: bool = False


def parse_equation(equation: str, name: str = "r1") -> Reaction:
    """Parse ``"A + 2 B -> P + W"`` into signed coefficients.

    >>> parse_equation("MA + MeOH -> MMP").coefficients
    {'MA': -1.0, 'MeOH': -1.0, 'MMP': 1.0}
    >>> parse_equation("2 MA -> DIM", name="dimer").coefficients
    {'MA': -2.0, 'DIM': 1.0}
    >>> parse_equation("A + B = C")
    Traceback (most recent call last):
    ...
    kinetrace.errors.ChemistryError: reaction 'r1': equation 'A + B = C' needs one '->' or '<=>' between reactants and products
    """
    arrow = next((a for a in _ARROWS if a in equation), None)
    if arrow is None or equation.count(arrow) != 1:
        raise ChemistryError(
            f"reaction {name!r}: equation {equation!r} needs one '->' or '<=>' between reactants and products"
        )
    left, right = equation.split(arrow)
    coeffs: dict[str, float] = {}
    for side, sign in ((left, -1.0), (right, 1.0)):
        if not side.strip():
            raise ChemistryError(f"reaction {name!r}: equation {equation!r} has an empty side")
        for term in side.split("+"):
            m = _TERM.match(term)
            if not m:
                raise ChemistryError(f"reaction {name!r}: cannot read term {term.strip()!r} of {equation!r}")
            nu = float(m.group(1)) if m.group(1) else 1.0
            if nu <= 0:
                raise ChemistryError(f"reaction {name!r}: coefficient of {m.group(2)!r} must be positive")
            coeffs[m.group(2)] = coeffs.get(m.group(2), 0.0) + sign * nu
    coeffs = {k: v for k, v in coeffs.items() if v != 0.0}
    if not coeffs:
        raise ChemistryError(f"reaction {name!r}: equation {equation!r} changes nothing")
    return Reaction(name, coeffs, reversible=(arrow == "<=>"))


def stoichiometric_matrix(species: list[str], reactions: list[Reaction]) -> np.ndarray:
    """Stoichiometric matrix nu, shape (n_species, n_reactions), nu[i, j] of species i in reaction j.

    Species in ``species`` that take part in no reaction (inerts, solvent) get a zero row.

    >>> r = [parse_equation("A + 2 B -> P + W", "main"), parse_equation("2 A -> D", "side")]
    >>> stoichiometric_matrix(["A", "B", "P", "W", "D", "S"], r)
    array([[-1., -2.],
           [-2.,  0.],
           [ 1.,  0.],
           [ 1.,  0.],
           [ 0.,  1.],
           [ 0.,  0.]])
    """
    index = {s: i for i, s in enumerate(species)}
    nu = np.zeros((len(species), len(reactions)))
    for j, r in enumerate(reactions):
        for sp, c in r.coefficients.items():
            if sp not in index:
                raise ChemistryError(f"reaction {r.name!r}: species {sp!r} is not declared (declared: {', '.join(species)})")
            nu[index[sp], j] = c
    return nu


def element_matrix(species: list[str], formulas: dict[str, str]) -> tuple[list[str], np.ndarray]:
    """Element matrix E, shape (n_elements, n_species): atoms of each element in each species.

    >>> els, E = element_matrix(["A", "W"], {"A": "C2H4O", "W": "H2O"})
    >>> els, E.tolist()
    (['C', 'H', 'O'], [[2.0, 0.0], [4.0, 2.0], [1.0, 1.0]])
    """
    counts = {s: parse_formula(formulas[s]) for s in species}
    elements = sorted({el for c in counts.values() for el in c})
    E = np.array([[counts[s].get(el, 0) for s in species] for el in elements], dtype=float)
    return elements, E


def check_element_balance(reaction: Reaction, formulas: dict[str, str], tol: float = 1e-9) -> None:
    """Raise :class:`ChemistryError` naming the reaction and element that does not balance.

    >>> check_element_balance(parse_equation("C4H6O2 + CH4O -> C5H10O3"),
    ...     {"C4H6O2": "C4H6O2", "CH4O": "CH4O", "C5H10O3": "C5H10O3"})
    >>> check_element_balance(parse_equation("EO + W -> EG", "hydrolysis"),
    ...     {"EO": "C2H4O", "W": "H2O", "EG": "C2H6O"})
    Traceback (most recent call last):
    ...
    kinetrace.errors.ChemistryError: reaction 'hydrolysis' (EO + W -> EG) does not balance: O is 2 on the left, 1 on the right
    """
    left: dict[str, float] = {}
    right: dict[str, float] = {}
    for sp, nu in reaction.coefficients.items():
        side = left if nu < 0 else right
        for el, n in parse_formula(formulas[sp]).items():
            side[el] = side.get(el, 0.0) + abs(nu) * n
    bad = [el for el in sorted(set(left) | set(right)) if abs(left.get(el, 0.0) - right.get(el, 0.0)) > tol]
    if bad:
        eq = equation_text(reaction)
        el = bad[0]
        more = f" (also {', '.join(bad[1:])})" if len(bad) > 1 else ""
        raise ChemistryError(
            f"reaction {reaction.name!r} ({eq}) does not balance: {el} is {left.get(el, 0.0):g} on the left, "
            f"{right.get(el, 0.0):g} on the right{more}"
        )


def equation_text(reaction: Reaction) -> str:
    """Write a reaction back as an equation.

    >>> equation_text(parse_equation("2 A + B -> 1.5 C", "x"))
    '2 A + B -> 1.5 C'
    """
    def side(sign: float) -> str:
        return " + ".join((f"{abs(c):g} {sp}" if abs(c) != 1 else sp)
                          for sp, c in reaction.coefficients.items() if c * sign > 0)
    return f"{side(-1)} {'<=>' if reaction.reversible else '->'} {side(1)}"
