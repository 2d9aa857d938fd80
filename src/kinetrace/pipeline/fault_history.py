"""Sensor faults judged with the stored history: a run over a short window continues an open alarm.

A run over a few days sees a bias that began before its window as present from its first hour. The
balances cannot tell a feed flowmeter reading 5 % high from an outlet flowmeter reading about 5 % low
(their columns in the volume balance are parallel), and the step in the faulty meter's own reading,
which names it in a full run, lies before the window. Left alone, a short run could name the other
meter and open a second alarm that contradicts the open one.

The results store keeps every alarm with its onset and sign. Before the faults of a window are
attributed, the unit's open sensor alarms detected before the window are read
(:func:`known_faults`); an event under way when the window opens, among whose candidates one sensor
carries an open alarm of the same sign, is that alarm continued (:func:`continuing`): the same sensor,
its stored onset and detection time (so the store updates that alarm instead of adding one), and the
size the window's data give. Common practice, no source: an engineer reads today's trend with
yesterday's findings beside it.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from .backcalc import _utc

__all__ = ["KnownFault", "known_faults", "continuing"]

#: Alarm kinds of the store that name a sensor fault (see :func:`kinetrace.pipeline.daily.write_unit_findings`).
FAULT_KINDS = ("sensor_bias", "balance_mismatch")


@dataclass(frozen=True)
class KnownFault:
    """An open sensor alarm of the store."""

    variable: str           # the alarm's variable: the tags of the faulty quantity, comma-separated
    sign: int               # +1 reads high, -1 reads low
    onset: pd.Timestamp     # [UTC]
    detected: pd.Timestamp  # [UTC]
    magnitude: float        # as stored [%]


def known_faults(alarms: pd.DataFrame, before) -> tuple[KnownFault, ...]:
    """Open sensor alarms of a unit detected before ``before``, from the store's alarms table.

    Parameters
    ----------
    alarms : DataFrame
        Rows of :meth:`kinetrace.store.Store.alarms` for the unit (columns ``kind``, ``variable``,
        ``onset``, ``detected``, ``magnitude``, ``state``).
    before : timestamp
        Start of the run's window. [UTC]

    Returns
    -------
    tuple of KnownFault

    Examples
    --------
    >>> t = pd.Timestamp("2027-04-10 02:00", tz="UTC")
    >>> rows = pd.DataFrame({"kind": ["sensor_bias", "step_up"], "variable": ["FT-1", "activity"],
    ...                      "onset": [t, t], "detected": [t, t], "magnitude": [5.0, 0.1], "state": ["open", "open"]})
    >>> [(k.variable, k.sign) for k in known_faults(rows, "2027-05-01")]
    [('FT-1', 1)]
    """
    if alarms is None or not len(alarms):
        return ()
    start = _utc(before)
    out = []
    for row in alarms.to_dict("records"):
        if row.get("kind") not in FAULT_KINDS or row.get("state") != "open":
            continue
        detected = _utc(row["detected"])
        mag = float(row.get("magnitude", np.nan))
        if detected >= start or not np.isfinite(mag) or mag == 0:
            continue
        onset = _utc(row["onset"]) if pd.notna(row.get("onset")) else detected
        out.append(KnownFault(str(row["variable"]), int(np.sign(mag)), onset, detected, mag))
    return tuple(out)


def continuing(known, candidates, variable_of, estimates: dict, onset_index: int, span: int = 6):
    """The candidate sensor of a new event that continues an open stored alarm, or None.

    Parameters
    ----------
    known : sequence of KnownFault
        Open sensor alarms detected before the window (:func:`known_faults`).
    candidates : sequence of str
        Sensors (reconciliation variables) the event could be on, the detector's choice first.
    variable_of : callable
        Candidate -> the alarm variable the store would give it (its tags, comma-separated).
    estimates : dict
        Candidate -> (bias, its standard error, scale) under the hypothesis that it alone is wrong.
        [SI of the candidate]
    onset_index : int
        Row of the event's onset in the window. [rows]
    span : int
        An event whose onset lies within this many rows of the window's start was under way when
        the window opened. [rows]

    Returns
    -------
    (str, KnownFault) or None
        None when the event began inside the window (its own step is then seen) or no candidate
        carries an open alarm of the same sign.

    Examples
    --------
    >>> t = pd.Timestamp("2027-04-10 02:00", tz="UTC")
    >>> k = (KnownFault("FT-1", 1, t, t, 5.0),)
    >>> est = {"q_in": (0.05, 0.001, 1.0), "q_out": (-0.048, 0.001, 1.0)}
    >>> name = {"q_in": "FT-1", "q_out": "FT-2"}.get
    >>> continuing(k, ["q_out", "q_in"], name, est, 0)[0]
    'q_in'
    >>> continuing(k, ["q_out", "q_in"], name, est, 40) is None
    True
    """
    if onset_index > span or not known:
        return None
    for cand in candidates:
        if cand not in estimates:
            continue
        sign = int(np.sign(estimates[cand][0]))
        for k in known:
            if k.variable == variable_of(cand) and k.sign == sign:
                return cand, k
    return None


def whole_event_size(prior: KnownFault, relative: float, relative_sd: float, window_rows: int,
                     window_start, step: float) -> tuple[float, float]:
    """Relative size of a continued fault over its whole duration, and its standard error. [-]

    The stored size covers the hours from the alarm's onset to the window's start; the window's
    estimate covers ``window_rows`` hours of the event. With the same noise per hour the
    inverse-variance weighted mean is the mean weighted by hours, and the window's standard
    error shrinks by sqrt(window / whole) (common practice, no source). A fault whose size
    changes over time (a drift) is averaged by this; its present size is the window's.

    Parameters
    ----------
    prior : KnownFault
        The open stored alarm continued. Its ``magnitude`` [%].
    relative, relative_sd : float
        The window's estimate and its standard error. [-]
    window_rows : int
        Rows of the event inside the window. [rows]
    window_start : timestamp
        First row of the window. [UTC]
    step : float
        Grid step. [s]

    Returns
    -------
    (float, float)
        Relative size and its standard error. [-]

    Examples
    --------
    >>> t = pd.Timestamp("2027-04-10 00:00", tz="UTC")
    >>> k = KnownFault("FT-1", 1, t, t, 5.0)
    >>> rel, sd = whole_event_size(k, 0.053, 0.001, 24, t + pd.Timedelta("49D"), 3600.0)
    >>> round(rel, 5), round(sd, 5)
    (0.05006, 0.00014)
    """
    start = _utc(window_start)
    hist = max(0.0, (start - prior.onset).total_seconds() / step) if step > 0 else 0.0
    n = max(int(window_rows), 1)
    whole = hist + n
    rel = (hist * prior.magnitude / 100.0 + n * relative) / whole
    return float(rel), float(relative_sd * np.sqrt(n / whole))
