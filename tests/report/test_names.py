"""Readable names and engineering units of stored parameters (kinetrace.report.names), checked
against pint (an independent converter) and the rate-constant units of NIST SP 811 practice."""

import pint
import pytest

from kinetrace.report.names import engineering, parameter_label
from kinetrace.units import rate_constant_unit

U = pint.UnitRegistry()


@pytest.mark.parametrize("order, si, shown", [(1, "1/s", "1/h"), (2, "m3/(mol s)", "L/(mol h)")])
def test_rate_constants_of_first_and_second_order(order, si, shown):
    assert rate_constant_unit(order) == si
    value, unit = engineering("k_ref_fitted:r1", 6.0e-4, si)
    ref = U.Quantity(6.0e-4, si.replace("m3", "m**3").replace(" s", "*s")).to(shown.replace(" h", "*h"))
    assert unit == shown and value == pytest.approx(ref.magnitude, rel=1e-12)


def test_decay_energy_and_adsorption_units():
    v, u = engineering("calibration_kd", 6.944e-8, "1/s")
    assert u == "1/d" and v == pytest.approx(U.Quantity(6.944e-8, "1/s").to("1/day").magnitude, rel=1e-12)
    v, u = engineering("activation_energy:r1", 58e3, "J/mol")
    assert (u, v) == ("kJ/mol", pytest.approx(58.0))
    v, u = engineering("K_MA:addition", 5e-4, "m3/mol")
    assert u == "L/mol" and v == pytest.approx(U.Quantity(5e-4, "m**3/mol").to("L/mol").magnitude)


def test_labels():
    assert parameter_label("k_ref_fitted:addition") == "rate constant of addition at the reference temperature"
    assert parameter_label("order_B:coupling") == "reaction order in B (coupling)"
    assert parameter_label("parameter_set") is None and parameter_label("feed_basis") is None
