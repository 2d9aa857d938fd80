"""kinetrace.ingest: historian readings (CSV exports, SQL historians) -> one canonical frame per unit.

Public entry point: :func:`read_unit`, returning :class:`UnitData` (values in SI
on a regular UTC grid, a validity mask, a per-tag quality summary that
accounts for every reading, the unit's liquid volume).
"""

from .align import grid_edges, sample_mean_carry, time_weighted_mean
from .conversion import TagScale, tag_scale, unit_scales
from .deadtime import DeadTimeEstimate, estimate_dead_time
from .fates import FATE_NAMES, fate_names
from .incremental import Pull, read_new
from .reader import read_unit
from .screening import screen
from .timestamps import parse_timestamps
from .unitdata import UnitData, check_unit_data

__all__ = ["read_unit", "read_new", "Pull", "estimate_dead_time", "DeadTimeEstimate", "UnitData", "check_unit_data", "TagScale", "tag_scale", "unit_scales", "fate_names",
           "FATE_NAMES", "grid_edges", "time_weighted_mean", "sample_mean_carry", "screen", "parse_timestamps"]
