"""Is there anything to check? The verdict on a unit that is down or has no usable readings.

A unit is checked only when the design equation can be written for at least part of the
period: a valid flow (feed or outlet; the volume balance gives the other), the reactor
temperature, the outlet concentration of the key reactant and the liquid volume must each
have at least one valid interval. Where one of them has none (every reading negative, a word,
a thousands separator, a level above 100 % of span ... all flagged and counted by ingest), the
unit's verdict is **no usable data**: no rates, no fit and no reconciled value is made up for
it. A unit whose feed (or, without a feed reading, outlet) flow is below
:data:`DOWN_FRACTION` of its plan feed rate (or of its upper feed-flow limit without a plan)
on every valid interval is **down**. A shutdown inside a period with running hours is not a
verdict: the check counts those hours itself.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..config import UnitModel
from ..errors import KinetraceError
from .roles import role_column

#: A flow below this fraction of the plan feed rate (else of the upper feed-flow limit) is "off". [-]
#: (common practice, no source: a transmitter's zero reading lies within about 1 % of its span)
DOWN_FRACTION = 0.01

#: Verdicts a unit can get instead of a check.
VERDICTS = ("down", "no usable data")


@dataclass(frozen=True)
class Verdict:
    """Why a unit was not checked."""

    status: str      # one of VERDICTS
    reason: str      # plain language, names the quantity and its tags

    def __str__(self) -> str:
        return f"{self.status}: {self.reason}"


class UnitNotCheckable(KinetraceError):
    """A unit is down or has no usable readings; carries the :class:`Verdict` and what was read.

    Attributes
    ----------
    verdict : Verdict
    data : kinetrace.ingest.UnitData or None
        The readings and their fates (the bad ones counted), when they were read.
    roles : DataFrame or None
        The role frame on the grid. [SI]
    """

    def __init__(self, verdict: Verdict, data=None, roles: pd.DataFrame | None = None):
        super().__init__(str(verdict))
        self.verdict, self.data, self.roles = verdict, data, roles


def _tags(model: UnitModel, role: str, species: str | None = None) -> str:
    names = [t.tag for t in model.tags if t.role == role and (species is None or t.species == species)]
    return ", ".join(names) if names else "no tag"


def _none_valid(roles: pd.DataFrame, column: str) -> bool:
    return column not in roles or not np.isfinite(roles[column].to_numpy(dtype=float)).any()


def unit_verdict(roles: pd.DataFrame, model: UnitModel, *, down_fraction: float = DOWN_FRACTION) -> Verdict | None:
    """The verdict on a unit that cannot be checked, or None when it can.

    Parameters
    ----------
    roles : DataFrame
        Role frame of the unit on the grid (:func:`kinetrace.pipeline.roles.role_frame`);
        NaN where no valid reading is left. [SI]
    model : UnitModel
        The unit.
    down_fraction : float
        A flow below this fraction of the plan feed rate (else of the upper feed-flow limit)
        counts as off. [-]

    Returns
    -------
    Verdict or None

    Examples
    --------
    >>> from types import SimpleNamespace as NS
    >>> m = NS(tags=[NS(tag="FT-1", role="feed_flow", species=None)], key_reactant="A",
    ...        plan_feed_flow=1e-3, feed_flow_limits=(0.0, 2e-3), fixed_volume=1.0, level_table=None)
    >>> r = pd.DataFrame({"feed_flow": [0.0, 0.0], "outlet_flow": [np.nan, np.nan], "temperature": [340.0, 340.0],
    ...                   "volume": [1.0, 1.0], "outlet_conc:A": [10.0, 10.0]})
    >>> print(unit_verdict(r, m))
    down: feed flow (FT-1) below 1 % of the plan feed rate on every valid interval of the period
    """
    if roles.empty:
        return Verdict("no usable data", "no interval in the period")
    if _none_valid(roles, "feed_flow") and _none_valid(roles, "outlet_flow"):
        return Verdict("no usable data", f"no valid feed flow ({_tags(model, 'feed_flow')}) nor outlet flow "
                                         f"({_tags(model, 'outlet_flow')}) reading in the period")
    if _none_valid(roles, "temperature"):
        return Verdict("no usable data", f"no valid temperature ({_tags(model, 'temperature')}) reading in the period")
    key = model.key_reactant
    if _none_valid(roles, role_column("outlet_conc", key)):
        return Verdict("no usable data", f"no valid outlet concentration of {key} "
                                         f"({_tags(model, 'outlet_conc', key)}) in the period")
    if _none_valid(roles, "volume"):
        return Verdict("no usable data", f"no valid level reading ({_tags(model, 'level')}) in the period, so the "
                                         "liquid volume is unknown")
    role = "feed_flow" if not _none_valid(roles, "feed_flow") else "outlet_flow"
    flow = roles[role].to_numpy(dtype=float)
    ref, basis = ((model.plan_feed_flow, "the plan feed rate") if model.plan_feed_flow
                  else (model.feed_flow_limits[1], "the upper feed-flow limit"))
    if np.all(np.abs(flow[np.isfinite(flow)]) < down_fraction * ref):
        return Verdict("down", f"{role.replace('_', ' ')} ({_tags(model, role)}) below {100 * down_fraction:g} % of "
                               f"{basis} on every valid interval of the period")
    return None


def verdict_summary(model: UnitModel, verdict: Verdict, index: pd.DatetimeIndex) -> dict:
    """The summary row of a unit that was not checked (the keys of :func:`kinetrace.pipeline.daily.summarise`).

    Production is 0 kg/h for a unit that is down (its feed was off) and unknown (NaN) without
    usable data; conversion, k_ref and activity are NaN in both cases.
    """
    target = float(model.target_rate * model.molar_masses[model.product_index] * 3600)
    production = 0.0 if verdict.status == "down" else float("nan")
    return {"unit": model.id, "period_start": index[0] if len(index) else pd.NaT,
            "period_end": index[-1] if len(index) else pd.NaT, "production_kg_h": production,
            "target_kg_h": target, "hours_with_data": 0, "conversion": float("nan"), "k_ref": float("nan"),
            "activity": float("nan"), "steady_hours": 0, "production_ratio": production / target,
            "status": verdict.status, "verdict": verdict.reason}


def verdict_series(verdict: Verdict, index: pd.DatetimeIndex) -> pd.DataFrame:
    """The time series of a unit that was not checked: never steady; production 0 when down, else NaN. [SI]"""
    production = 0.0 if verdict.status == "down" else np.nan
    return pd.DataFrame({"steady": np.zeros(len(index), bool), "production_mass": np.full(len(index), production)},
                        index=index)
