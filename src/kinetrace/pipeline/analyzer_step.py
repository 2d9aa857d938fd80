"""Analyzer-against-lab step of the daily check: each online analyzer that has a lab tag for the
same quantity gets its bias tracked (:mod:`kinetrace.reconcile.analyzer_bias`: local linear trend,
Kalman filter and Rauch-Tung-Striebel smoother, GLR of a step and of a ramp), and where it is
found off (a step or a drift, until it is found recalibrated) its readings are divided by
``1 + bias`` before the roles are combined and reconciled.

Columns added to the unit's series, per analyzer tag ``<tag>``:

==================================  =====  ================================================
``analyzer_bias:<tag>``             -      smoothed relative bias (reads high > 0)
``analyzer_bias_sd:<tag>``          -      its standard error
``analyzer_bias_rate:<tag>``        1/d    smoothed bias rate
``analyzer_bias_rate_sd:<tag>``     1/d    its standard error
``analyzer_corrected:<tag>``        -      1 where the reading used was corrected
``analyzer_lab_diff:<tag>``         -      at a lab sample's interval: analyzer / lab - 1
``analyzer_lab_diff_sd:<tag>``      -      its standard uncertainty
==================================  =====  ================================================

The last two are what an incremental run, which re-reads only a few days of readings, takes
back from the store (its ``history``) so that the track still spans months of lab samples.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..config import UnitModel
from ..reconcile.analyzer_bias import BiasTrack, lab_comparisons, track_bias
from .reconciliation import SensorFault
from .roles import _tag_sigma_array, role_column


#: Analyzer readings within this time of a lab sample enter its comparison (a local line through
#: them): long enough to average the analyzer's noise, short enough that the process stays near a
#: line (the residence time of a CSTR is an hour or two). [s]
HALF_WINDOW = 4 * 3600.0


@dataclass
class AnalyzerOutcome:
    """The analyzers of one unit against the lab."""

    values: pd.DataFrame                                  # per-tag values, corrected analyzers [SI]
    columns: pd.DataFrame                                 # series columns (module docstring)
    tracks: dict = field(default_factory=dict)            # analyzer tag -> BiasTrack
    faults: list = field(default_factory=list)            # SensorFault records (source "lab")


def lab_samples(values: pd.Series, valid: pd.Series, step: float) -> tuple[pd.DatetimeIndex, np.ndarray]:
    """Lab results as (sampling time, value) from a lab tag on the grid.

    A result is the first grid interval of a run of one value (later intervals carry it
    forward); it is placed at the interval's midpoint, the grid keeping no finer time. [UTC], [SI]
    """
    v = values.to_numpy(dtype=float)
    ok = valid.to_numpy(dtype=bool) & np.isfinite(v)
    new = ok.copy()
    new[1:] &= ~(ok[:-1] & (v[1:] == v[:-1]))
    times = values.index[new] + pd.Timedelta(seconds=step / 2)
    return times, v[new]


def _relative_sigma(tag, values: np.ndarray) -> float:
    """Relative standard uncertainty of one reading of a tag (median over its readings). [-]"""
    ok = np.isfinite(values) & (values != 0)
    if not ok.any():
        return 0.01
    return float(np.median(_tag_sigma_array(tag, values[ok]) / np.abs(values[ok])))


def track_analyzers(values: pd.DataFrame, valid: pd.DataFrame, model: UnitModel,
                    history: pd.DataFrame | None = None) -> AnalyzerOutcome:
    """Track the bias of every analyzer with a lab counterpart and correct its readings.

    Parameters
    ----------
    values, valid : DataFrame
        Per-tag values on the grid [SI] and their usable cells (:class:`kinetrace.ingest.UnitData`).
    model : UnitModel
    history : DataFrame, optional
        Earlier stored results of the unit: their ``analyzer_lab_diff`` columns give the lab
        comparisons before the readings read now. [-]

    Returns
    -------
    AnalyzerOutcome
    """
    out_values = values.copy()
    cols: dict[str, np.ndarray] = {}
    tracks, faults = {}, []
    if len(values.index) < 2:
        return AnalyzerOutcome(out_values, pd.DataFrame(index=values.index))
    step = float((values.index[1] - values.index[0]).total_seconds())
    labs = {}
    for t in model.tags:
        if t.sampling == "lab" and t.tag in values:
            labs.setdefault((t.role, t.species), []).append(t)
    for tag in model.tags:
        pair = labs.get((tag.role, tag.species))
        if tag.sampling != "analyzer" or not pair or tag.tag not in values:
            continue
        lab = pair[0]
        a = values[tag.tag].where(valid[tag.tag])
        times, results = lab_samples(values[lab.tag], valid[lab.tag], step)
        if len(times) < 3:
            continue
        comp = lab_comparisons(a, times, results, analyzer_sigma=_relative_sigma(tag, a.to_numpy(dtype=float)),
                               lab_sigma=_relative_sigma(lab, results), half_window=HALF_WINDOW)
        rows = values.index.get_indexer(comp.index.floor(pd.Timedelta(seconds=step)))
        for name, col in (("z", "analyzer_lab_diff"), ("z_sd", "analyzer_lab_diff_sd")):
            arr = np.full(len(values.index), np.nan)
            arr[rows[rows >= 0]] = comp[name].to_numpy()[rows >= 0]
            cols[f"{col}:{tag.tag}"] = arr
        comp = _with_history(comp, history, tag.tag, step)
        track = track_bias(comp, result_delay=lab.result_delay, analysis_delay=HALF_WINDOW,
                           as_of=values.index[-1] + pd.Timedelta(seconds=step))
        tracks[tag.tag] = track
        grid = track.on_grid(values.index)
        corrected = grid["corrected"].to_numpy() > 0.5
        raw = values[tag.tag].to_numpy(dtype=float)
        out_values[tag.tag] = np.where(corrected, raw / (1.0 + grid["bias"].to_numpy()), raw)
        cols[f"analyzer_bias:{tag.tag}"] = grid["bias"].to_numpy()
        cols[f"analyzer_bias_sd:{tag.tag}"] = grid["bias_sd"].to_numpy()
        cols[f"analyzer_bias_rate:{tag.tag}"] = grid["rate"].to_numpy()
        cols[f"analyzer_bias_rate_sd:{tag.tag}"] = grid["rate_sd"].to_numpy()
        cols[f"analyzer_corrected:{tag.tag}"] = corrected.astype(float)
        faults += _faults(track, tag, role_column(tag.role, tag.species), raw, values.index)
    return AnalyzerOutcome(out_values, pd.DataFrame(cols, index=values.index), tracks, faults)


def _with_history(comp: pd.DataFrame, history, tag: str, step: float) -> pd.DataFrame:
    """Stored lab comparisons of earlier runs put before the ones computed now."""
    zc, sc = f"analyzer_lab_diff:{tag}", f"analyzer_lab_diff_sd:{tag}"
    if history is None or zc not in history or sc not in history or comp.empty:
        return comp
    old = history.loc[np.isfinite(history[zc].to_numpy(dtype=float)), [zc, sc]]
    old.index = old.index + pd.Timedelta(seconds=step / 2)
    old = old.loc[old.index < comp.index[0]].rename(columns={zc: "z", sc: "z_sd"})
    if old.empty:
        return comp
    return pd.concat([old, comp]).sort_index()


def _faults(track: BiasTrack, tag, role: str, raw: np.ndarray, index: pd.DatetimeIndex) -> list:
    """SensorFault records of a track's step and drift segments."""
    s = track.samples
    out = []
    if s.empty:
        return out
    last_check = s.index[-1]
    for k, seg in enumerate(track.segments):
        if seg.kind == "in control" or seg.alarm is None:
            continue
        closed = k + 1 < len(track.segments)
        end = s.index[seg.last] if closed else index[-1]
        level = float(np.nanmedian(np.abs(raw[index >= seg.onset]))) if (index >= seg.onset).any() else np.nan
        rel = seg.bias
        if not closed and seg.kind == "drift":      # the bias now, by the segment's rate
            rel = seg.bias + seg.rate * (end - s.index[seg.last]).total_seconds() / 86400.0
        out.append(SensorFault(
            role=role, tags=(tag.tag,), onset=seg.onset, alarm=min(max(seg.alarm, seg.onset), end) if closed else seg.alarm,
            end=max(end, seg.alarm), magnitude=rel * level, relative=rel, magnitude_sd=seg.bias_sd * level,
            kind=seg.kind, rate=seg.rate, rate_sd=seg.rate_sd, source="lab",
            last_check=last_check if not closed else s.index[seg.last]))
    return out


__all__ = ["AnalyzerOutcome", "lab_samples", "track_analyzers"]
