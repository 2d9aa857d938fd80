"""Small helpers shared by the monitor modules (array handling, time axes, cautions text)."""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd

from kinetrace.errors import KinetraceError

#: Seconds per day. [s]
DAY = 86400.0

#: Cautions attached to every what-if and forecast result that could lead to a change of set point.
CAUTIONS = (
    "These are model estimates only. Before any change of temperature, feed rate or hold-up, check it "
    "against the unit's safe operating envelope, its relief and runaway studies and the site management "
    "of change procedure; site procedures, local codes and licensed engineering practice take precedence "
    "over this result."
)


def float_values(values: Any, name: str) -> np.ndarray:
    """``values`` as a 1-d float array (Series lose their index), with a clear error otherwise."""
    if isinstance(values, pd.Series):
        arr = values.to_numpy(dtype=float, na_value=np.nan)
    else:
        try:
            arr = np.asarray(values, dtype=float)
        except (TypeError, ValueError):
            raise KinetraceError(f"{name} must be numeric, got {type(values).__name__}") from None
    return np.atleast_1d(arr)


def as_array(value: Any) -> np.ndarray:
    """``value`` as a float ndarray (a Series loses its index, NaN kept)."""
    if isinstance(value, pd.Series):
        return value.to_numpy(dtype=float, na_value=np.nan)
    return np.asarray(value, dtype=float)


def as_result(result: Any, *inputs: Any) -> Any:
    """``result`` as float (0-d), Series (index of the first Series input, when lengths match) or ndarray."""
    result = np.asarray(result, dtype=float)
    if result.ndim == 0:
        return float(result)
    for v in inputs:
        if isinstance(v, pd.Series) and result.ndim == 1 and len(v) == result.shape[0]:
            return pd.Series(result, index=v.index)
    return result


def utc_index(series: pd.Series | pd.DataFrame, name: str) -> pd.DatetimeIndex:
    """The index of ``series`` as a tz-aware UTC DatetimeIndex, or a KinetraceError naming ``name``."""
    idx = series.index
    if not isinstance(idx, pd.DatetimeIndex):
        raise KinetraceError(f"{name} must have a DatetimeIndex (UTC), got {type(idx).__name__}")
    if idx.tz is None:
        raise KinetraceError(f"{name} has a time index without time zone; expected UTC timestamps")
    if not idx.is_monotonic_increasing:
        raise KinetraceError(f"{name}: time index is not increasing")
    return idx.tz_convert("UTC")


def utc_timestamp(value: Any, name: str) -> pd.Timestamp:
    """``value`` as a UTC Timestamp (naive values are taken as UTC)."""
    try:
        ts = pd.Timestamp(value)
    except (TypeError, ValueError):
        raise KinetraceError(f"{name} must be a timestamp, got {value!r}") from None
    return ts.tz_localize("UTC") if ts.tzinfo is None else ts.tz_convert("UTC")


def seconds_between(index: pd.DatetimeIndex, origin: pd.Timestamp) -> np.ndarray:
    """Seconds from ``origin`` to each time of ``index``. [s]"""
    return (index - origin).total_seconds().to_numpy(dtype=float)


def format_day(ts: pd.Timestamp) -> str:
    """'14 March 2027' (no leading zero)."""
    return f"{ts.day} {ts:%B %Y}"


def format_range(a: pd.Timestamp, b: pd.Timestamp) -> str:
    """A compact date range: '14-19 March 2027', '28 February - 5 March 2027', or one day."""
    if a.normalize() == b.normalize():
        return format_day(a)
    if (a.year, a.month) == (b.year, b.month):
        return f"{a.day}-{b.day} {b:%B %Y}"
    if a.year == b.year:
        return f"{a.day} {a:%B} - {b.day} {b:%B %Y}"
    return f"{format_day(a)} - {format_day(b)}"


def restart_positions(index: pd.DatetimeIndex, events: Any, name: str = "restart") -> np.ndarray:
    """Positions of the first observation at or after each event (0 < position < len(index)). [-]

    A chart or a step window that restarts there never mixes observations from before an
    event with those after it.

    >>> idx = pd.date_range("2027-01-01", periods=4, freq="h", tz="UTC")
    >>> restart_positions(idx, ["2027-01-01 01:30", "2027-01-01 00:00", "2027-02-01"]).tolist()
    [2]
    """
    if events is None or not len(events) or not len(index):
        return np.zeros(0, dtype=int)
    ev = pd.DatetimeIndex([utc_timestamp(e, name) for e in events])
    pos = np.unique(index.searchsorted(ev, side="left"))
    return pos[(pos > 0) & (pos < len(index))]
