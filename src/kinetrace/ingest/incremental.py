"""Incremental pulls: read only what is new since a watermark, so a daily job does not reread history.

The watermark of a unit is the end of the last grid interval already
processed (UTC). :func:`read_new` reads from it (pushing the window into SQL),
returns the complete intervals only (the interval holding the newest reading
is still filling and is left for the next pull) and the new watermark. Values
near the watermark are the same as in a one-shot read of the whole history,
because readings up to the longest hold / carry-forward limit before it are
read too (see :func:`~kinetrace.ingest.reader.read_unit`). Keeping the
watermark between runs is the caller's job (e.g. with the unit's results).
"""

from __future__ import annotations

from dataclasses import dataclass

import pandas as pd

from ..config.model import UnitModel
from ..config.schema import PlantConfig, Unit
from .reader import read_unit
from .unitdata import UnitData


@dataclass(frozen=True)
class Pull:
    """Result of :func:`read_new`: the new complete intervals (None if there are none) and the watermark to keep."""

    data: UnitData | None
    watermark: pd.Timestamp | None

    @property
    def intervals(self) -> int:
        return 0 if self.data is None else len(self.data.values)


def read_new(cfg: PlantConfig, unit: UnitModel | Unit | str, *, config_path, watermark=None,
             grid: float | None = None, engine=None) -> Pull:
    """Read a unit's complete grid intervals from ``watermark`` on.

    Parameters
    ----------
    cfg, unit, config_path, grid, engine
        As for :func:`~kinetrace.ingest.read_unit`.
    watermark : datetime, str or Timestamp, optional
        End of the last interval already processed (UTC; naive is taken as UTC).
        None reads the whole history.

    Returns
    -------
    Pull
        ``data`` holds the intervals ``[watermark, new watermark)``; ``watermark``
        is the new one (unchanged when nothing complete is new).
    """
    old = None if watermark is None else pd.Timestamp(watermark)
    if old is not None and old.tzinfo is None:
        old = old.tz_localize("UTC")
    data = read_unit(cfg, unit, config_path=config_path, since=old, grid=grid, engine=engine, complete_only=True)
    if data is None or len(data.values) == 0:
        return Pull(None, old)
    new = data.values.index[-1] + pd.Timedelta(seconds=data.grid)
    return Pull(data, new)
