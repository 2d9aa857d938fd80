"""Conservation in the integrated states of the configured units.

Reactions conserve atoms, so the element content of (holdup change - moles fed + moles withdrawn)
must vanish; the species balance must close on nu times the integrated extent. Element counts are
written out here by hand from the formulas of config/demo_plant.toml (C, H, O per molecule).
"""

import numpy as np
import pytest

from kinetrace.simulator import simulate_unit

# atoms per molecule (C, H, O), by hand from the molecular formulas
ELEMENTS = {
    "R-210": {"MA": (4, 6, 2), "MeOH": (1, 4, 1), "MMP": (5, 10, 3), "DIM": (8, 12, 4)},      # C4H6O2 CH4O C5H10O3 C8H12O4
    "R-220": {"AA": (4, 6, 3), "W": (0, 2, 1), "AcOH": (2, 4, 2), "DXN": (4, 8, 2)},           # C4H6O3 H2O C2H4O2 C4H8O2
}


@pytest.mark.parametrize("unit_id", ["R-210", "R-220"])
def test_element_and_species_balance(unit_id, models, short_scenario):
    model = models[unit_id]
    run, _ = simulate_unit(model, short_scenario.plan(unit_id), 3 * 86400.0, seed=7)
    e = np.array([ELEMENTS[unit_id][s] for s in model.species], float).T        # (elements, species)
    held = run.moles - run.moles[0]
    fed = run.fed - run.fed[0]
    out = run.withdrawn - run.withdrawn[0]
    residual = (held - fed + out) @ e.T
    scale = (fed @ e.T).max(axis=0)
    # exact up to round-off: the integrators preserve linear invariants; 1e-8 relative as asked
    assert np.abs(residual).max(axis=0) / scale == pytest.approx(0.0, abs=1e-8)
    ext = run.extent - run.extent[0]
    np.testing.assert_allclose(held - fed + out, ext @ model.nu.T, atol=1e-8 * scale.max())
    # reaction really happened (the check is not vacuous)
    assert np.abs(ext[-1]).max() > 1e-3 * scale.max()
