"""Time chunks of a backfill and the work done on one unit x chunk (on a Dask worker)."""

from __future__ import annotations

from dataclasses import dataclass

import pandas as pd

#: Default length of a time chunk. [pandas time span]
DEFAULT_CHUNK = "30D"
#: Extra time read before and after a chunk and dropped again. Ingest already reads its own
#: look-back before a window (the longest hold of a continuous tag, a lab result's ``max_age``, a
#: dead time) and look-ahead after it (dead times), so the grid rows of a chunk equal those of one
#: whole read without more; the steady-state test and the derivatives, which look at neighbouring
#: rows, run on the chunks put end to end. [pandas time span]
DEFAULT_CONTEXT = "0s"


@dataclass(frozen=True)
class Chunk:
    """One unit x time chunk, half-open ``[start, end)``. [UTC]"""

    unit: str
    index: int
    start: pd.Timestamp
    end: pd.Timestamp

    @property
    def key(self) -> str:
        """A name of the chunk, safe in file names."""
        return f"{self.start:%Y%m%dT%H%M%SZ}-{self.end:%Y%m%dT%H%M%SZ}"


def plan_chunks(since, until, *, chunk=DEFAULT_CHUNK, grid: float = 3600.0) -> list[tuple[pd.Timestamp, pd.Timestamp]]:
    """Split ``[since, until)`` into consecutive chunks whose edges lie on the grid.

    Parameters
    ----------
    since, until : str or Timestamp
        Period of the backfill; naive times are UTC. [UTC]
    chunk : str or Timedelta
        Chunk length, rounded down to whole grid steps (at least one). [pandas time span]
    grid : float
        Grid step. [s]

    Returns
    -------
    list of (Timestamp, Timestamp)
        Half-open chunks covering the period exactly; the last one may be shorter. [UTC]

    >>> [f"{a:%m-%d}..{b:%m-%d}" for a, b in plan_chunks("2026-01-01", "2026-01-26", chunk="10D")]
    ['01-01..01-11', '01-11..01-21', '01-21..01-26']
    """
    start, end = _utc(since), _utc(until)
    if end <= start:
        raise ValueError(f"the backfill period is empty: until ({end}) is not after since ({start})")
    step = pd.Timedelta(seconds=grid)
    if start != start.floor(step) or end != end.floor(step):
        raise ValueError(f"since ({start}) and until ({end}) must lie on the {grid:g} s grid")
    length = pd.Timedelta(chunk)
    length = max(step, (length // step) * step)
    edges = []
    t = start
    while t < end:               # a handful of chunks per unit, not a loop over time steps
        edges.append((t, min(t + length, end)))
        t = t + length
    return edges


def _utc(t) -> pd.Timestamp:
    ts = pd.Timestamp(t)
    return ts.tz_localize("UTC") if ts.tzinfo is None else ts.tz_convert("UTC")


def chunk_rows(config_path: str, unit_id: str, start: pd.Timestamp, end: pd.Timestamp,
               context=DEFAULT_CONTEXT, *, period=None) -> dict:
    """The ingested rows of one unit x chunk: tag values on the grid, their validity, volume, quality.

    Reads ``[start - context, end + context)``, clipped to the backfill ``period`` (ingest adds
    its own look-back for screening and lab carry-over), and keeps the grid rows in
    ``[start, end)``; a chunk after the historian's last reading (or before its first) is read
    from further back (or ahead), see :func:`_read_around`. Everything after ingest that looks at more than one row (the role frame's
    uncertainty floor, a median over the period; the steady-state test, whose noise scale is a
    median over the period and whose derivatives are centred) runs on the chunks put end to end
    (:func:`kinetrace.fleet.backfill.finish_from_chunks`), so the seams leave no trace.

    Parameters
    ----------
    config_path : str
        Plant configuration TOML.
    unit_id : str
        The unit.
    start, end : Timestamp
        The chunk. [UTC]
    context : str or Timedelta
        Context read on each side and then dropped. [pandas time span]
    period : (Timestamp, Timestamp), optional
        The whole backfill period; context is not read outside it. [UTC]

    Returns
    -------
    dict
        ``values`` (DataFrame, SI per tag), ``valid`` (DataFrame of bool), ``volume`` (Series,
        [m^3]), ``quality`` (per-tag counts of the read, context included) and ``context_rows``
        (grid rows read as context and dropped).
    """
    from ..config import load_config, unit_model

    cfg = load_config(config_path)
    unit = next(u for u in cfg.units if u.id == unit_id)
    model = unit_model(unit)
    lo, hi = start - pd.Timedelta(context), end + pd.Timedelta(context)
    if period is not None:
        lo, hi = max(lo, period[0]), min(hi, period[1])
    data = _read_around(cfg, model, config_path, lo, hi, period)
    keep = (data.values.index >= start) & (data.values.index < end)
    return {"values": data.values.loc[keep], "valid": data.valid.loc[keep],
            "volume": data.volume.reindex(data.values.index).loc[keep], "quality": data.quality,
            "context_rows": int((~keep).sum())}


def _read_around(cfg, model, config_path, lo: pd.Timestamp, hi: pd.Timestamp, period):
    """``read_unit`` of ``[lo, hi)``, widened where that window holds no reading of a tag the unit needs.

    A chunk after the historian's last reading is read from further back, one before its first
    reading from further ahead, the span doubling each time, within the period: one whole read of
    the period fills such rows with missing intervals (after carrying the last readings forward),
    and ingest gives the same grid rows whatever the window's edges. With no readings in the whole
    period the whole read's error is raised.
    """
    from ..errors import IngestError
    from ..ingest import read_unit

    span = hi - lo
    while True:
        try:
            return read_unit(cfg, model, config_path=config_path, since=lo, until=hi)
        except IngestError:
            if period is None or (lo <= period[0] and hi >= period[1]):
                raise
            span = 2 * span                     # a few reads at most: the span doubles each time
            if lo > period[0]:
                lo = max(period[0], hi - span)
            else:
                hi = min(period[1], lo + span)
