"""Display units against an independent unit registry (pint) and the ITS-90 offset."""

import numpy as np
import pint
import pytest

from kinedash.display import DISPLAY, fmt, to_display

UREG = pint.UnitRegistry()
PINT_NAMES = {"m3/s": "m**3/s", "m3/h": "m**3/hour", "kg/s": "kg/s", "kg/h": "kg/hour", "kg/d": "kg/day",
              "t/d": "metric_ton/day", "s": "s", "h": "hour", "J/mol": "J/mol", "kJ/mol": "kJ/mol",
              "K": "kelvin", "degC": "degC"}


@pytest.mark.parametrize("stored", sorted(DISPLAY))
def test_factors_match_pint(stored):
    shown = DISPLAY[stored][0]
    for v in (0.0, 1.0, 343.15, 2.5e-3):
        got, name = to_display(v, stored)
        ref = UREG.Quantity(v, PINT_NAMES[stored]).to(PINT_NAMES[shown]).magnitude
        assert name == shown
        assert got == pytest.approx(ref, rel=1e-12, abs=1e-9)   # round-off only


def test_celsius_offset():
    # ITS-90: t/degC = T/K - 273.15 exactly (BIPM SI Brochure, 9th ed., 2019, sec. 2.3.1)
    assert to_display(273.15, "K") == (0.0, "degC")
    arr, _ = to_display(np.array([300.0, 350.0]), "K")
    assert arr.tolist() == pytest.approx([26.85, 76.85], abs=1e-12)


def test_unknown_unit_passes_through_and_fmt():
    assert to_display(0.5, "-") == (0.5, "-")
    assert fmt(None) == "not available" and fmt("x") == "not available"
    assert fmt(1234.4, ".0f", "kg/h") == "1234 kg/h"
