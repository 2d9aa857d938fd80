"""Persistent sensor bias over time: tabular CUSUM on each sensor's standardised
adjustment, with winsorised input and a minimum duration so that a single outlier
is not taken for a fault."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ._errors import ReconciliationError
from .results import Reconciliation
from .serial_error import location_standard_error


@dataclass(frozen=True)
class BiasEvent:
    """One persistent bias found on one sensor.

    Attributes
    ----------
    sensor : str
        Variable name.
    direction : int
        +1 reading high, -1 reading low.
    onset_index, alarm_index, end_index : int
        Estimated start (last CUSUM zero + 1), first step over the threshold, and
        estimated end (CUSUM peak).
    onset_time, alarm_time, end_time
        The same as times (type of the ``time`` argument).
    magnitude : float
        Mean estimated bias over onset..end. [units of the sensor]
    magnitude_sd : float
        Standard error of ``magnitude``, widened for serial correlation (AR(1) effective sample
        size, :func:`kinetrace.reconcile.serial_error.location_standard_error`). [units of the sensor]
    mean_standardized : float
        Mean standardised adjustment over the event (sign: reading high > 0). [-]
    primary : bool
        True if this sensor explains the overlapping alarms best (largest mean
        standardised shift); False if its alarm is smearing from ``smeared_from``.
    smeared_from : str or None
    equivalent : tuple of str
        Other sensors alarming at the same time with a mean standardised shift within
        ``equivalence`` of this one: the data cannot tell them apart (e.g. feed and outlet
        analysers of the same species in a CSTR, whose balance columns are parallel).
    """

    sensor: str
    direction: int
    onset_index: int
    alarm_index: int
    end_index: int
    onset_time: object
    alarm_time: object
    end_time: object
    magnitude: float
    magnitude_sd: float
    mean_standardized: float
    primary: bool = True
    smeared_from: str | None = None
    equivalent: tuple = ()


def cusum(u, k):
    """One-sided tabular CUSUM ``S_t = max(0, S_{t-1} + u_t - k)``, ``S_0 = 0``, vectorised.

    Uses the closed form ``S_t = C_t - min(0, min_{s<=t} C_s)`` with ``C`` the cumulative
    sum of ``u - k`` (no loop over time).

    Parameters
    ----------
    u : ndarray (T, ...)
        Standardised observations. [-]
    k : float
        Reference value (allowance). [-]

    Returns
    -------
    ndarray
        CUSUM statistic, same shape as ``u``. [-]

    References
    ----------
    .. [1] Page, E. S. (1954). Continuous inspection schemes. Biometrika 41, 100-115.

    Examples
    --------
    >>> cusum(np.array([0.0, 2.0, 2.0, -3.0, 1.0]), 0.5).tolist()
    [0.0, 1.5, 3.0, 0.0, 0.5]
    """
    c = np.cumsum(u - k, axis=0)
    return c - np.minimum(np.minimum.accumulate(c, axis=0), 0.0)


def _bias_estimate(result):
    """Per-step bias estimate of each sensor, ``(y - x) sigma^2 / Var(y - x)``. [units of y]"""
    va = result.var_adjustment
    ok = result.redundant & (va > 0)
    return np.where(ok, -result.adjustment * result.sigma**2 / np.where(ok, va, 1.0), np.nan)


def detect_persistent_bias(result: Reconciliation, time=None, *, k=0.5, h=5.0, clip=3.0,
                           min_duration=0.0, sensors=None, equivalence=0.1) -> list[BiasEvent]:
    """Find persistent biases in the sensors of a time series of reconciliations.

    For every redundant sensor a two-sided tabular CUSUM runs on its standardised
    adjustment (sign: reading high > 0), winsorised at ``+-clip`` (a robust CUSUM, so one
    outlier adds at most ``clip - k``); missing steps add nothing. A run of the CUSUM
    that reaches ``h`` and lasts at least ``min_duration`` from onset to peak is an event.
    Where several sensors alarm over overlapping intervals, the one with the largest mean
    standardised shift is marked primary: for a single bias on sensor j and diagonal
    measurement covariance, the expected shift of sensor j's standardised adjustment
    is the largest of all (Cauchy-Schwarz), the others show smearing.

    Parameters
    ----------
    result : Reconciliation
        Reconciliation of consecutive time steps.
    time : array_like (T,), optional
        Time stamps (datetime64 or numbers); default step index. [s if numeric]
    k : float
        CUSUM allowance: half the standardised shift to detect fastest. [-]
    h : float
        Decision threshold. [-]
    clip : float
        Winsorising limit of the standardised adjustments. [-]
    min_duration : float or numpy.timedelta64
        Shortest onset-to-peak duration accepted as a fault (same kind as ``time``
        differences). [s if numeric]
    sensors : sequence of str, optional
        Names to monitor (default: all variables).
    equivalence : float
        Relative closeness of mean standardised shifts below which overlapping alarms
        are reported as an equivalent set of the primary event. [-]

    Returns
    -------
    list of BiasEvent
        Sorted by onset.

    References
    ----------
    .. [1] Page, E. S. (1954). Continuous inspection schemes. Biometrika 41, 100-115.
    .. [2] Lucas, J. M., Crosier, R. B. (1982). Robust CUSUM: a robustness study for
       CUSUM quality control schemes. Commun. Statist. Theory Methods 11(23), 2669-2687.

    Examples
    --------
    >>> from kinetrace.reconcile import reconcile_linear
    >>> rng = np.random.default_rng(0)
    >>> y = 10.0 + rng.standard_normal((600, 4))
    >>> y[300:, 1] += 3.0                      # sensor 1 reads 3 sigma high from step 300
    >>> A = [[1.0, -1, 0, 0], [0, 1, -1, 0], [0, 0, 1, -1]]
    >>> events = detect_persistent_bias(reconcile_linear(y, 1.0, A), min_duration=30)
    >>> ev = [e for e in events if e.primary]
    >>> ev[0].sensor, abs(ev[0].onset_index - 300) < 15, round(ev[0].magnitude)
    ('x[1]', True, 3)
    """
    if h <= 0 or k < 0 or clip <= k:
        raise ValueError(f"need h > 0, k >= 0 and clip > k; got h={h}, k={k}, clip={clip}")
    T, n = result.x.shape
    time = np.arange(T) if time is None else np.asarray(time)
    if time.shape != (T,):
        raise ReconciliationError(f"time has shape {time.shape}; expected ({T},)")
    names = list(result.names) if result.names else [f"x[{j}]" for j in range(n)]
    cols = [names.index(s) for s in sensors] if sensors is not None else range(n)
    u = -np.clip(np.nan_to_num(result.standardized_adjustment, nan=0.0), -clip, clip)
    bhat = _bias_estimate(result)
    missing = ~np.isfinite(result.standardized_adjustment)
    events = []
    for j in cols:  # loop over sensors and the few alarming runs, not over time
        for sign in (1, -1):
            uj = sign * u[:, j]
            uj = np.where(missing[:, j], k, uj)  # a missing step adds nothing
            s = cusum(uj, k)
            pos = s > 0
            start = np.flatnonzero(pos & ~np.concatenate([[False], pos[:-1]]))
            if start.size == 0:
                continue
            stop = np.flatnonzero(pos & ~np.concatenate([pos[1:], [False]])) + 1
            peak = np.maximum.reduceat(s, start)
            for a, b in zip(start[peak >= h], stop[peak >= h]):
                seg = s[a:b]
                end = a + int(np.argmax(seg))
                alarm = a + int(np.argmax(seg >= h))
                if not (time[end] - time[a]) >= min_duration:
                    continue
                bseg = bhat[a:end + 1, j]
                bseg = bseg[np.isfinite(bseg)]
                mag = float(np.mean(bseg)) if bseg.size else np.nan
                msd = location_standard_error(bseg, "mean")
                mz = float(np.mean(-result.standardized_adjustment[a:end + 1, j][~missing[a:end + 1, j]]))
                events.append(BiasEvent(names[j], sign, int(a), int(alarm), int(end), time[a],
                                        time[alarm], time[end], mag, msd, mz))
    events.sort(key=lambda e: (e.onset_index, -abs(e.mean_standardized)))
    return _attribute(events, equivalence)


def _attribute(events, equivalence):
    """Mark, within groups of overlapping events, the one with largest mean shift as primary."""
    out = []
    for e in events:
        rivals = [f for f in events if f.onset_index <= e.end_index and e.onset_index <= f.end_index]
        best = max(rivals, key=lambda f: abs(f.mean_standardized))
        if best is e:
            top = abs(e.mean_standardized)
            eq = tuple(f.sensor for f in rivals
                       if f is not e and abs(f.mean_standardized) >= (1 - equivalence) * top)
            out.append(BiasEvent(**{**e.__dict__, "equivalent": eq}))
        else:
            out.append(BiasEvent(**{**e.__dict__, "primary": False, "smeared_from": best.sensor}))
    return out
