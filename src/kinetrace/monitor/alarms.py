"""The alarm record shared by the drift charts and the step detector."""

from __future__ import annotations

from dataclasses import dataclass

import pandas as pd

__all__ = ["Alarm"]


@dataclass(frozen=True)
class Alarm:
    """One signal of a drift chart or step detector.

    Attributes
    ----------
    signal : str
        Name of the monitored series (``activity``, ``residual``, ...).
    method : str
        ``cusum``, ``ewma`` or ``step``.
    direction : str
        ``up`` or ``down``.
    onset : Timestamp
        Estimated time of the first observation after the change (UTC).
    detected : Timestamp
        Time of the observation at which the chart signalled (UTC).
    size : float
        Estimated shift of the mean after the change. [unit of the series]
    size_sigma : float
        The same shift in in-control standard deviations. [-]
    statistic : float
        Chart statistic at detection (CUSUM sum, EWMA value or step z-score). [sigma]
    threshold : float
        The limit it crossed. [sigma]
    evidence : str
        Plain-language account of what was seen.
    """

    signal: str
    method: str
    direction: str
    onset: pd.Timestamp
    detected: pd.Timestamp
    size: float
    size_sigma: float
    statistic: float
    threshold: float
    evidence: str


def when(ts: pd.Timestamp) -> str:
    """'2026-11-20 14:00 UTC'."""
    return f"{ts:%Y-%m-%d %H:%M} UTC"


def span(a: pd.Timestamp, b: pd.Timestamp) -> str:
    """A duration in hours or days, e.g. '31 hours', '4.5 days'."""
    hours = (b - a).total_seconds() / 3600.0
    return f"{hours:.0f} hours" if hours < 72 else f"{hours / 24:.1f} days"
