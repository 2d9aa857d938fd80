"""Stoichiometry: reaction equations, the stoichiometric and element matrices,
element-balance checks, extents of reaction, conversion, yield and selectivity."""

from .extents import conversion, extents_from_flows, product_yield, selectivity
from .formula import molar_mass, parse_formula
from .reactions import (Reaction, check_element_balance, element_matrix, parse_equation,
                        stoichiometric_matrix)

__all__ = [
    "Reaction", "parse_equation", "stoichiometric_matrix", "element_matrix", "check_element_balance",
    "parse_formula", "molar_mass", "extents_from_flows", "conversion", "product_yield", "selectivity",
]
