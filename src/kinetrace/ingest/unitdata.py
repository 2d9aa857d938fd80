"""The canonical frame of one unit that leaves ingest, and its schema check.

Schema (checked once by :func:`check_unit_data`; later stages trust it):

* ``values``: DataFrame, index a regular tz-aware UTC DatetimeIndex named
  ``"timestamp"`` (interval starts), one float column per configured tag in SI
  (m^3/s, mol/m^3, K, level as a fraction of span);
* ``valid``: bool DataFrame of the same shape, False where the value is NaN or
  flagged readings make up more than half (``MAX_FLAGGED_SHARE``) of its readings of that tag;
* ``quality``: per-tag summary (rows = tags) of every reading's fate and of the
  grid intervals;
* ``roles``: ``(role, species or None) -> [tag, ...]``;
* ``volume``: liquid volume on the grid [m^3].
"""

from __future__ import annotations

from dataclasses import dataclass, field

import pandas as pd

from ..errors import IngestError, Problem
from .fates import fate_names


_FATE_COLUMNS = set(fate_names())


@dataclass
class UnitData:
    """One unit's readings aligned to the grid, in SI, with their quality record.

    Attributes
    ----------
    unit_id : str
    values : DataFrame
        Tag values on the grid. [SI unit of each tag's kind]
    valid : DataFrame of bool
        Usable cells.
    quality : DataFrame
        Per tag: ``rows_read`` and one count per fate (``good``, ``bad_quality_code``,
        ``out_of_range``, ``spike``, ``frozen``, ...; they add up to ``rows_read``),
        ``out_of_order``, and interval counts (``intervals``, ``missing_intervals``,
        ``carried_intervals``, ``flagged_intervals``, ``valid_intervals``).
    roles : dict
        ``(role, species or None) -> list of tag names``.
    volume : Series
        Liquid volume. [m^3]
    flagged : DataFrame
        Every reading not used: ``tag, timestamp, value`` [tag unit] ``, fate``.
    details : DataFrame
        Located messages (``where`` = file:line, ``tag``, ``fate``, ``message``), at most
        50 per tag and fate.
    notes : list of Problem
        Non-fatal problems (malformed lines, unknown tags, optional tags without data).
    source_report : dict
        Counts of the source as a whole (rows, lines, other units' rows, unknown tags).
    grid : float
        Grid step. [s]
    """

    unit_id: str
    values: pd.DataFrame
    valid: pd.DataFrame
    quality: pd.DataFrame
    roles: dict
    volume: pd.Series
    flagged: pd.DataFrame
    details: pd.DataFrame
    notes: list = field(default_factory=list)
    source_report: dict = field(default_factory=dict)
    grid: float = 3600.0

    def tags_for(self, role: str, species: str | None = None) -> list[str]:
        """Tag names with a role (and species)."""
        return list(self.roles.get((role, species), []))


def check_unit_data(d: UnitData) -> None:
    """Raise :class:`IngestError` unless ``d`` follows the documented schema."""
    p = []
    idx = d.values.index
    if not isinstance(idx, pd.DatetimeIndex) or idx.tz is None or str(idx.tz) != "UTC" or idx.name != "timestamp":
        p.append(Problem("values.index", "must be a UTC DatetimeIndex named 'timestamp'"))
    elif len(idx) > 1 and not (idx[1:] - idx[:-1] == pd.Timedelta(seconds=d.grid)).all():
        p.append(Problem("values.index", f"must be a regular grid of {d.grid} s"))
    if list(d.valid.columns) != list(d.values.columns) or not d.valid.index.equals(idx):
        p.append(Problem("valid", "must have the shape, index and columns of values"))
    if not all(str(t) == "bool" for t in d.valid.dtypes):
        p.append(Problem("valid", "must be boolean"))
    if (d.valid & d.values.isna()).any().any():
        p.append(Problem("valid", "a NaN value is marked valid"))
    if not d.volume.index.equals(idx):
        p.append(Problem("volume", "must be on the grid of values"))
    q = d.quality
    fates = [c for c in q.columns if c in _FATE_COLUMNS]
    if len(q) and not (q[fates].sum(axis=1) == q["rows_read"]).all():
        p.append(Problem("quality", "fate counts do not add up to rows_read"))
    if p:
        raise IngestError(f"unit {d.unit_id}", p)
