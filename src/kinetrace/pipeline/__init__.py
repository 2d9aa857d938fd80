"""The pipeline that chains the stages for one unit, and the daily check over a plant."""

from .backcalc import COLUMNS, back_calculate, steady_mask
from .daily import UnitResult, check_unit, output_frame, run_check, summarise
from .roles import role_column, role_frame

__all__ = ["COLUMNS", "back_calculate", "steady_mask", "UnitResult", "check_unit", "output_frame", "run_check",
           "summarise", "role_column", "role_frame"]
