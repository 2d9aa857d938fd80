"""Catalyst activity trend of one unit: time on stream, catalyst changes, decay fit of the current charge.

Time on stream restarts at every catalyst change: changes given as events
(e.g. from the plant's maintenance log) and, optionally, steps up in activity
found by :func:`kinetrace.monitor.steps.detect_steps`. The decay law is fitted
to the activity of the current charge only (from the last change on).

References
----------
.. [1] Fogler, H. S. (2016). Elements of Chemical Reaction Engineering, 5th ed., ch. 10.
.. [2] Levenspiel, O. (1999). Chemical Reaction Engineering, 3rd ed., ch. 21.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from kinetrace.errors import DataQualityError
from kinetrace.monitor._common import seconds_between, utc_index, utc_timestamp
from kinetrace.monitor.decay import DecayFit, fit_decay
from kinetrace.monitor.steps import detect_steps

__all__ = ["ActivityTrend", "time_on_stream", "catalyst_changes", "fit_activity_trend"]


def time_on_stream(index: pd.DatetimeIndex, changes: Iterable = (), start=None) -> np.ndarray:
    """Time since the latest catalyst change at or before each time.

    Parameters
    ----------
    index : DatetimeIndex
        Times (UTC).
    changes : iterable of timestamps
        Catalyst changes (UTC; naive taken as UTC).
    start : timestamp, optional
        Time the first charge went on stream; default the first time of ``index``.

    Returns
    -------
    ndarray
        Time on stream. [s] Before ``start`` (and before any change) NaN.

    References
    ----------
    .. [1] Levenspiel, O. (1999). Chemical Reaction Engineering, 3rd ed., ch. 21.

    Examples
    --------
    >>> import pandas as pd
    >>> t = pd.date_range("2026-11-01", periods=4, freq="D", tz="UTC")
    >>> (time_on_stream(t, ["2026-11-03"]) / 86400).tolist()
    [0.0, 1.0, 0.0, 1.0]
    """
    if len(index) == 0:
        return np.array([], dtype=float)
    origin = utc_timestamp(start if start is not None else index[0], "start")
    marks = sorted({origin, *(utc_timestamp(c, "catalyst change") for c in changes)})
    marks_idx = pd.DatetimeIndex(marks)
    pos = marks_idx.searchsorted(index, side="right") - 1
    out = np.full(len(index), np.nan)
    ok = pos >= 0
    out[ok] = (index[ok] - marks_idx[pos[ok]]).total_seconds().to_numpy(dtype=float)
    return out


def catalyst_changes(
    activity: pd.Series,
    *,
    events: Sequence = (),
    detect: bool = True,
    min_step: float = 0.1,
    window: int = 12,
) -> list[pd.Timestamp]:
    """Catalyst changes: the given events and, with ``detect``, steps up in activity.

    Parameters
    ----------
    activity : Series
        Activity on a UTC DatetimeIndex. [-]
    events : sequence of timestamps
        Known changes (UTC).
    detect : bool
        Also look for sudden rises of activity.
    min_step : float
        Smallest rise taken as a change. [-]
    window : int
        Observations each side of a candidate step.

    Returns
    -------
    list of Timestamp
        Sorted; a detected step within ``window`` observations of an event is
        taken as that event.

    References
    ----------
    .. [1] Basseville, M., Nikiforov, I. V. (1993). Detection of Abrupt Changes, ch. 2.
    """
    idx = utc_index(activity, "activity")
    out = sorted({utc_timestamp(e, "catalyst change event") for e in events})
    if detect and activity.notna().sum() >= 2 * window:
        step_tol = (idx[1:] - idx[:-1]).median() * window
        for s in detect_steps(activity, window=window, min_size=min_step, direction="up", name="activity"):
            if all(abs(s.onset - e) > step_tol for e in out):
                out.append(s.onset)
    return sorted(out)


@dataclass(frozen=True)
class ActivityTrend:
    """Decay fit of the current catalyst charge (see :func:`fit_activity_trend`).

    Attributes
    ----------
    fit : DecayFit
        The chosen decay law.
    run_start : Timestamp
        Start of the current charge's time on stream (UTC).
    changes : list of Timestamp
        Catalyst changes used.
    residuals : Series
        (observed - fitted) / residual sd over the rows fitted. [-]
    last_observation : Timestamp
        Last time with activity data in the current charge.
    """

    fit: DecayFit
    run_start: pd.Timestamp
    changes: list[pd.Timestamp]
    residuals: pd.Series = field(repr=False)
    last_observation: pd.Timestamp

    def predict(self, times, *, level: float = 0.95, band: str = "prediction") -> pd.DataFrame:
        """Fitted activity with its band at given times (UTC).

        Parameters
        ----------
        times : DatetimeIndex or sequence of timestamps
        level, band
            As in :meth:`DecayFit.predict`.

        Returns
        -------
        DataFrame
            Columns ``activity``, ``lower``, ``upper`` [-], index the times.
        """
        if isinstance(times, pd.DatetimeIndex):       # the usual case: converted at once, no loop over times
            idx = times.tz_localize("UTC") if times.tz is None else times.tz_convert("UTC")
        else:
            idx = pd.DatetimeIndex([utc_timestamp(t, "time") for t in times])
        tos = seconds_between(idx, self.run_start)
        mean, lo, hi = self.fit.predict(tos, level=level, band=band)
        return pd.DataFrame({"activity": mean, "lower": lo, "upper": hi}, index=idx)


def fit_activity_trend(
    activity: pd.Series,
    *,
    events: Sequence = (),
    detect_changes: bool = True,
    steady: pd.Series | None = None,
    method="auto",
    weights: pd.Series | None = None,
    min_step: float = 0.1,
    window: int = 12,
) -> ActivityTrend:
    """Fit the decay of the current catalyst charge of a unit.

    Parameters
    ----------
    activity : Series
        Activity a = k_ref / k_ref,fresh on a UTC DatetimeIndex. [-]
    events : sequence of timestamps
        Known catalyst changes.
    detect_changes : bool
        Also restart the time on stream at detected steps up in activity.
    steady : Series of bool, optional
        Rows at steady state; only these are fitted when given (activity from
        the CSTR design equation holds at steady state only).
    method : str or list of str
        Decay law(s), see :func:`kinetrace.monitor.decay.fit_decay`.
    weights : Series, optional
        Relative weights of the rows. [-]
    min_step, window
        Step detection settings, see :func:`catalyst_changes`.

    Returns
    -------
    ActivityTrend

    Raises
    ------
    DataQualityError
        Too few usable rows since the last change.

    References
    ----------
    .. [1] Fogler, H. S. (2016). Elements of Chemical Reaction Engineering, 5th ed., ch. 10.

    Examples
    --------
    >>> import numpy as np, pandas as pd
    >>> t = pd.date_range("2026-09-01", periods=24 * 60, freq="h", tz="UTC")
    >>> days = np.arange(t.size) / 24.0
    >>> a = np.where(days < 20, 0.9 * np.exp(-0.01 * days), 0.97 * np.exp(-0.01 * (days - 20)))
    >>> trend = fit_activity_trend(pd.Series(a, index=t), method="exponential")
    >>> str(trend.run_start), round(trend.fit.params["a0"], 3)
    ('2026-09-21 00:00:00+00:00', 0.97)
    """
    idx = utc_index(activity, "activity")
    changes = catalyst_changes(activity, events=events, detect=detect_changes, min_step=min_step, window=window)
    run_start = max((c for c in changes if c <= idx[-1]), default=idx[0])
    sel = idx >= run_start
    use = sel & activity.notna().to_numpy()
    if steady is not None:
        use &= steady.reindex(idx, fill_value=False).to_numpy(dtype=bool)
    if use.sum() < 5:
        raise DataQualityError(
            f"activity trend: {int(use.sum())} usable rows since the catalyst change of {run_start:%Y-%m-%d %H:%M} "
            f"UTC ({int(sel.sum())} rows in the charge); need at least 5"
        )
    tos = seconds_between(idx[use], run_start)
    a = activity.to_numpy(dtype=float, na_value=np.nan)[use]
    w = None if weights is None else weights.reindex(idx).to_numpy(dtype=float, na_value=np.nan)[use]
    fit = fit_decay(tos, a, method=method, weights=w)
    mean, _, _ = fit.predict(tos)
    sd = fit.residual_sd if fit.residual_sd > 0 else np.nan
    resid = pd.Series((a - mean) / sd, index=idx[use], name="residual")
    return ActivityTrend(fit, run_start, changes, resid, idx[use][-1])
