"""Stoichiometry core: equations, matrices, element balances, extents, conversion, yield."""

import numpy as np
import pytest
import scipy.linalg
from hypothesis import given, settings
from hypothesis import strategies as st

from kinetrace.chemistry import (check_element_balance, conversion, element_matrix, extents_from_flows,
                                 molar_mass, parse_equation, parse_formula, product_yield, selectivity,
                                 stoichiometric_matrix)
from kinetrace.errors import ChemistryError, KinetraceError

REFORMING = {"CH4": "CH4", "H2O": "H2O", "CO": "CO", "CO2": "CO2", "H2": "H2"}


def test_steam_reforming_network_rank_and_element_conservation():
    # Smith, W. R., Missen, R. W. (1982), Chemical Reaction Equilibrium Analysis, Ch. 2 (from memory):
    # for CH4, H2O, CO, CO2, H2 the element matrix (C, H, O) has rank 3, so the number of
    # independent reactions is 5 - 3 = 2; steam reforming and water-gas shift form such a set.
    species = list(REFORMING)
    rx = [parse_equation("CH4 + H2O -> CO + 3 H2", "reforming"),
          parse_equation("CO + H2O <=> CO2 + H2", "shift"),
          parse_equation("CH4 + 2 H2O -> CO2 + 4 H2", "overall")]
    nu = stoichiometric_matrix(species, rx)
    els, E = element_matrix(species, REFORMING)
    assert els == ["C", "H", "O"]
    np.testing.assert_array_equal(E @ nu, 0.0)          # every reaction conserves every element
    assert np.linalg.matrix_rank(E) == 3
    assert np.linalg.matrix_rank(nu) == 2               # the third reaction is the sum of the other two
    # the reactions span the null space of E (scipy as independent reference)
    ns = scipy.linalg.null_space(E)
    assert ns.shape[1] == 2
    assert np.linalg.matrix_rank(np.hstack([ns, nu])) == 2
    assert rx[1].reversible and not rx[0].reversible
    for r in rx:
        check_element_balance(r, REFORMING)


def test_element_balance_error_names_reaction_and_element():
    with pytest.raises(ChemistryError, match=r"reaction 'hydrogenation' \(C2H4 \+ 2 H2 -> C2H6\) does not balance: H is 8 on the left, 6 on the right"):
        check_element_balance(parse_equation("C2H4 + 2 H2 -> C2H6", "hydrogenation"),
                              {"C2H4": "C2H4", "H2": "H2", "C2H6": "C2H6"})


@pytest.mark.parametrize("equation, message", [
    ("A + B", "needs one '->' or '<=>'"),
    ("A -> B -> C", "needs one '->' or '<=>'"),
    (" -> B", "has an empty side"),
    ("2x A -> B", "cannot read term"),
    ("A -> A", "changes nothing"),
])
def test_bad_equations(equation, message):
    with pytest.raises(ChemistryError, match=message):
        parse_equation(equation, "bad")
    assert issubclass(ChemistryError, KinetraceError)


def test_undeclared_species():
    with pytest.raises(ChemistryError, match=r"species 'Q' is not declared"):
        stoichiometric_matrix(["A", "B"], [parse_equation("A + Q -> B")])


def test_molar_masses():
    # IUPAC standard atomic weights (conventional values); molar masses as printed in the
    # CRC Handbook of Chemistry and Physics (from memory, 2 decimals): water 18.02, acetic
    # anhydride 102.09, methyl acrylate 86.09 g/mol.
    assert molar_mass("H2O") * 1e3 == pytest.approx(18.02, abs=0.01)
    assert molar_mass("(CH3CO)2O") * 1e3 == pytest.approx(102.09, abs=0.01)
    assert molar_mass("C4H6O2") * 1e3 == pytest.approx(86.09, abs=0.01)
    assert dict(parse_formula("CuSO4.5H2O")) == {"Cu": 1, "S": 1, "O": 9, "H": 10}
    for bad in ("C4H6Xx", "C4(H6", "C4H6)", "4"):
        with pytest.raises(ChemistryError):
            parse_formula(bad)


def test_extents_vectorised_against_lstsq_with_missing_species():
    # scipy.linalg.lstsq as the independent reference, one time step at a time
    rng = np.random.default_rng(7)
    nu = np.array([[-1.0, -2.0], [-1.0, 0.0], [1.0, 0.0], [0.0, 1.0]])   # A+B->P ; 2A->D
    n = 200
    xi = rng.uniform(0.1, 1.0, size=(n, 2))
    f_in = np.column_stack([np.full(n, 5.0), np.full(n, 9.0), np.zeros(n), np.zeros(n)])
    f_out = f_in + xi @ nu.T + rng.normal(0, 1e-3, size=(n, 4))
    f_out[::3, 3] = np.nan          # the by-product is missing at some steps
    f_out[::7, 1] = np.nan
    f_out[5, [0, 2]] = np.nan       # only 2 of 4 left but B and D determine both extents
    f_out[11, [0, 2, 3]] = np.nan   # only B: extents undetermined
    got = extents_from_flows(f_in, f_out, nu)
    for t in range(n):
        m = np.isfinite(f_out[t])
        if np.linalg.matrix_rank(nu[m]) < 2:
            assert np.all(np.isnan(got[t]))
            continue
        ref = scipy.linalg.lstsq(nu[m], (f_out[t] - f_in[t])[m])[0]
        np.testing.assert_allclose(got[t], ref, rtol=1e-10, atol=1e-12)
    assert np.isnan(got[11]).all() and np.isfinite(got[5]).all()


@settings(max_examples=50, deadline=None)
@given(st.floats(0.01, 100.0), st.floats(0.0, 1.0), st.floats(0.0, 1.0))
def test_yield_is_conversion_times_selectivity(f_a0, x, s):
    # definition (Levenspiel 1999, Ch. 7): overall yield = conversion x overall fractional yield
    f_a = f_a0 * (1 - x)
    f_p = s * (f_a0 - f_a)
    y = product_yield(f_a0, 0.0, f_p, -1.0, 1.0)
    assert float(conversion(f_a0, f_a)) == pytest.approx(x, abs=1e-12)
    assert float(y) == pytest.approx(x * s, abs=1e-12)
    if x > 1e-9:
        assert float(selectivity(f_a0, f_a, 0.0, f_p, -1.0, 1.0)) == pytest.approx(s, abs=1e-9)
