"""A level's ``sigma = "x %"`` is x % of span, whatever the level's unit; an absolute level sigma is a
length for a level in a length unit. Convention: level transmitters are specified in % of calibrated
span (common practice, no source). Length factors: NIST SP 811 (2008), Appendix B, 1 ft = 0.3048 m
exactly, checked against pint.
"""

import numpy as np
import pint
import pytest

from kinetrace.config import unit_model
from kinetrace.pipeline import role_frame
from kinetrace.pipeline.roles import _tag_sigma_array
from tests.ingest.test_volume_sources import _r210

UREG = pint.UnitRegistry()


def _roles(tmp_path, unit, sigma, volume, value):
    tag = {"tag": "R210-LT-109", "role": "level", "unit": unit, "sigma": sigma}
    cfg, d = _r210(tmp_path, tag, volume, value, limits_level=False)
    model = unit_model(next(u for u in cfg.units if u.id == "R-210"))
    return role_frame(d.values, d.valid, d.volume, model)


def test_percent_sigma_of_a_level_in_feet_is_percent_of_the_table_span(tmp_path):
    # table 0-10 ft: span 10 ft = 3.048 m; 1 % of it = 0.03048 m (was read as an absolute 0.01 m)
    roles = _roles(tmp_path, "ft", "1 %", {"level_tag": "R210-LT-109", "table": [[0.0, 0.6], [10.0, 15.6]]}, 2.5)
    span_m = (10 * UREG.foot).to("m").magnitude
    np.testing.assert_allclose(roles["sigma:level"].to_numpy(), 0.01 * span_m, rtol=1e-12)
    np.testing.assert_allclose(roles["level"].to_numpy(), (2.5 * UREG.foot).to("m").magnitude, rtol=1e-12)


def test_absolute_sigma_of_a_level_in_millimetres_is_a_length(tmp_path):
    roles = _roles(tmp_path, "mm", "5 mm", {"level_tag": "R210-LT-109", "table": [[0.0, 0.0], [2000.0, 10.0]]}, 500.0)
    np.testing.assert_allclose(roles["sigma:level"].to_numpy(), (5 * UREG.mm).to("m").magnitude, rtol=1e-12)


def test_percent_level_keeps_percent_of_span(tmp_path):
    # a level in %: "0.5 %" is 0.5 % of span, an absolute 0.005 of the fraction (unchanged behaviour)
    roles = _roles(tmp_path, "%", "0.5 %", {"level_tag": "R210-LT-109",
                                            "table": [[0.0, 0.6], [50.0, 8.1], [100.0, 15.6]]}, 60.0)
    np.testing.assert_allclose(roles["sigma:level"].to_numpy(), 0.005, rtol=1e-12)


@pytest.mark.parametrize("values", [np.array([1.0, 2.0]), np.array([np.nan, 0.5])])
def test_percent_of_reading_without_a_table(values):
    class Tag:
        role, unit, sigma = "level", "m", "2 %"

    np.testing.assert_allclose(_tag_sigma_array(Tag, values), 0.02 * np.abs(values), rtol=1e-12)
    np.testing.assert_allclose(_tag_sigma_array(Tag, values, level_span=3.0), 0.06, rtol=1e-12)
