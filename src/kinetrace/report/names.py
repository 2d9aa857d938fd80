"""Readable names and engineering units of the stored parameters, for every operator output.

The store keeps SI and internal names (``k_ref_fitted:addition``, ``K_MA:addition``,
``calibration_kd``); operators read "rate constant of addition at the reference temperature,
L/(mol h)", "adsorption constant of MA (addition), L/mol", "catalyst decay constant, 1/d". Rows that
describe the model rather than the plant (decay-family scores, the parameter-set flag) have no
operator name and are left to the workbook's model sheet.
"""

from __future__ import annotations

import math
import re

from ..units import UnitError, convert

#: SI unit -> engineering unit shown to operators (rate constants per hour, decay per day).
_RATE_ENGINEERING = {"1/s": "1/h", "m3/(mol s)": "L/(mol h)"}


def parameter_label(name: str) -> str | None:
    """Readable name of a stored parameter, or None for a row operators need not see.

    >>> parameter_label("K_MA:addition"), parameter_label("calibration_kd")
    ('adsorption constant of MA (addition)', 'catalyst decay constant')
    >>> parameter_label("calibration_qaicc:exponential") is None
    True
    """
    base, _, rid = name.partition(":")
    of = f" of {rid}" if rid else ""
    if base in ("k_ref_fitted", "k_ref"):
        return f"rate constant{of} at the reference temperature"
    if base == "k_ref_fresh":
        return f"fresh-catalyst rate constant{of}"
    if base == "activation_energy":
        return f"activation energy{of}"
    m = re.fullmatch(r"K_(.+)", base)
    if m:
        return f"adsorption constant of {m.group(1)}" + (f" ({rid})" if rid else "")
    m = re.fullmatch(r"order_(.+)", base)
    if m:
        return f"reaction order in {m.group(1)}" + (f" ({rid})" if rid else "")
    if base == "calibration_kd":
        return "catalyst decay constant"
    m = re.fullmatch(r"calibration_a0_charge_(\d+)", base)
    if m:
        return f"starting activity of catalyst charge {m.group(1)}"
    if base in ("decay_kd", "decay_b"):
        return "decay constant of the activity trend"
    if base == "decay_a0":
        return "activity of the trend at the start of the charge"
    if base == "decay_order":
        return "order of the activity decay"
    return None


def engineering(name: str, value: float, unit: str) -> tuple[float, str]:
    """A stored parameter value in the engineering unit operators read.

    Rate constants per hour (``1/s`` -> ``1/h``, ``m3/(mol s)`` -> ``L/(mol h)``, other orders
    ``(L/mol)**x/h``), decay constants per day, activation energies in kJ/mol, adsorption
    constants in L/mol; anything else unchanged. Conversions by pint.

    >>> v, u = engineering("k_ref_fitted:r1", 1e-3, "m3/(mol s)")
    >>> round(v, 9), u
    (3600.0, 'L/(mol h)')
    >>> engineering("calibration_kd", 6.944e-8, "1/s")[1], round(engineering("calibration_kd", 6.944e-8, "1/s")[0], 5)
    ('1/d', 0.006)
    """
    if value is None or not math.isfinite(value):
        return value, unit
    base = name.partition(":")[0]
    target = None
    if base.startswith("k_ref"):
        target = _RATE_ENGINEERING.get(unit)
        m = re.fullmatch(r"\(m3/mol\)\*\*([0-9.]+)/s", unit)
        if m:
            target = f"(L/mol)**{m.group(1)}/h"
    elif unit == "1/s":
        target = "1/d"
    elif unit == "J/mol":
        target = "kJ/mol"
    elif unit == "m3/mol":
        target = "L/mol"
    if target is None:
        return value, unit
    try:
        return float(convert(value, unit, target)), target
    except UnitError:
        return value, unit


__all__ = ["engineering", "parameter_label"]
