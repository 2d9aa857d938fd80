"""Display units at the edge: the store keeps SI, the pages show plant units.

=============== ============== =====================================
stored [SI]     shown          conversion
=============== ============== =====================================
m3/s            m3/h           x 3600
K               degC           - 273.15 (ITS-90 offset, exact)
kg/s            kg/h           x 3600
kg (per day)    t/d            / 1000
s               h              / 3600
1/s, -, J/mol   as stored      (J/mol shown as kJ/mol, / 1000)
=============== ============== =====================================
"""

from __future__ import annotations

import math

import numpy as np

#: stored unit -> (shown unit, factor, offset): shown = stored * factor + offset
DISPLAY = {
    "m3/s": ("m3/h", 3600.0, 0.0),
    "K": ("degC", 1.0, -273.15),
    "kg/s": ("kg/h", 3600.0, 0.0),
    "kg/d": ("t/d", 1.0e-3, 0.0),
    "s": ("h", 1.0 / 3600.0, 0.0),
    "J/mol": ("kJ/mol", 1.0e-3, 0.0),
}


def to_display(value, unit: str):
    """A stored SI value (scalar or array) in its display unit; unknown units pass through.

    Parameters
    ----------
    value : float or array_like
        Value in the stored unit. [``unit``]
    unit : str
        Stored unit of measure, e.g. ``"m3/s"``.

    Returns
    -------
    (value, str)
        Value in the display unit, and that unit's name.

    >>> to_display(343.15, "K")
    (70.0, 'degC')
    >>> to_display(1.0e-3, "m3/s")
    (3.6, 'm3/h')
    """
    shown, factor, offset = DISPLAY.get(unit, (unit, 1.0, 0.0))
    if np.ndim(value) == 0:
        v = float(value) * factor + offset
        return (round(v, 12) if math.isfinite(v) else v), shown
    return np.asarray(value, dtype=float) * factor + offset, shown


def fmt(value, spec: str = ".3g", unit: str = "") -> str:
    """A number for a page: ``"not available"`` when missing, else formatted with its unit.

    >>> fmt(0.81234, ".3f")
    '0.812'
    >>> fmt(float("nan"), ".1f", "t/d")
    'not available'
    >>> fmt(17.5, ".1f", "t/d")
    '17.5 t/d'
    """
    if value is None:
        return "not available"
    try:
        v = float(value)
    except (TypeError, ValueError):
        return "not available"
    if not math.isfinite(v):
        return "not available"
    return f"{v:{spec}}" + (f" {unit}" if unit else "")


#: Data-quality measures that are totals, not screening rules. [-]
QUALITY_TOTALS = ("rows_read", "good")


def quality_kinds(measures) -> "np.ndarray":
    """Kind of each data-quality measure: ``"total"`` (rows read, good), ``"interval"`` (grid
    interval counts and gaps: names ending in ``intervals`` or holding ``gap``) or ``"rule"``
    (readings flagged by one screening rule).

    >>> quality_kinds(["good", "frozen", "missing_intervals", "rows_read", "gap_hours"]).tolist()
    ['total', 'rule', 'interval', 'total', 'interval']
    """
    m = np.asarray([str(x) for x in measures], dtype=object)
    interval = np.array([x.endswith("intervals") or "gap" in x for x in m], dtype=bool)
    total = np.isin(m, QUALITY_TOTALS)
    return np.where(total, "total", np.where(interval, "interval", "rule"))
