"""Plant simulator and sample historian: the ground truth the estimation stages are tested against.

Layers, each usable alone:

* :mod:`.ratelaws` - Arrhenius and the rate laws, evaluated independently of ``kinetrace.kinetics``;
* :mod:`.cstr` - the dynamic CSTR balances integrated piecewise with ``scipy.integrate.solve_ivp``;
* :mod:`.plant` - one configured unit through its scenario plan -> ground truth (SI);
* :mod:`.sensors`, :mod:`.faults` - tag readings with noise, bias, dead time, lab samples and faults;
* :mod:`.writers` - long CSV, SQLite, Parquet truth, JSON facts;
* :mod:`.generate` - :func:`generate_sample_historian`, the whole chain.
"""

from .cstr import CstrRun, FeedProfile, LevelControl, Segment, integrate_cstr, list_integrators
from .generate import check_scenario, daily_production, generate_sample_historian
from .plant import TRUTH_COLUMNS, build_segments, simulate_unit, truth_frame
from .ratelaws import Kinetics, arrhenius, list_rate_laws
from .scenario import QUALITY_CODES, Scenario, UnitPlan, load_scenario, scenario_from_dict
from .sensors import Readings, read_tag
from .writers import READINGS_COLUMNS, readings_frame, write_csv, write_sqlite, write_truth

__all__ = [
    "generate_sample_historian", "load_scenario", "scenario_from_dict", "check_scenario", "Scenario", "UnitPlan",
    "QUALITY_CODES", "simulate_unit", "truth_frame", "build_segments", "TRUTH_COLUMNS", "integrate_cstr",
    "list_integrators", "Segment", "LevelControl", "FeedProfile", "CstrRun", "Kinetics", "arrhenius",
    "list_rate_laws", "Readings", "read_tag", "readings_frame", "write_csv", "write_sqlite", "write_truth",
    "READINGS_COLUMNS", "daily_production",
]
