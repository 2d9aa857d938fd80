"""Command-line arguments checked before any work: ISO 8601 times of ``--since``, ``--until``, ``--date``.

Only ISO 8601 is accepted (a date, or a date and time with an optional offset or ``Z``):
a date such as ``03/11/2026`` reads as 3 November in one country and 11 March in another,
so it is refused rather than guessed. A time without an offset is UTC.

References
----------
.. [1] ISO 8601-1:2019, Date and time - Representations for information interchange.
"""

from __future__ import annotations

import re

import pandas as pd

from .errors import KinetraceError

__all__ = ["iso_time", "iso_window", "iso_day", "out_folder"]

_ISO = re.compile(r"\d{4}-\d{2}-\d{2}(?:[T ]\d{2}:\d{2}(?::\d{2}(?:\.\d{1,9})?)?(?:Z|[+-]\d{2}:?\d{2})?)?")
_EXAMPLES = "e.g. 2026-11-01, 2026-11-01T06:00, 2026-11-01T06:00:00+01:00 or 2026-11-01T05:00Z"


def iso_time(value: str | None, option: str) -> pd.Timestamp | None:
    """The UTC instant of an ISO 8601 argument, or None when it is not given.

    Parameters
    ----------
    value : str or None
        The argument as typed.
    option : str
        Its name, for the message (``--since``).

    Returns
    -------
    Timestamp (UTC) or None

    Raises
    ------
    KinetraceError
        Not ISO 8601, or not a real date or time (month 13, 25 o'clock, before 1678 ...).

    Examples
    --------
    >>> iso_time("2026-11-01T06:00+01:00", "--since")
    Timestamp('2026-11-01 05:00:00+0000', tz='UTC')
    >>> iso_time("2026-13-01", "--since")
    Traceback (most recent call last):
    ...
    kinetrace.errors.KinetraceError: --since '2026-13-01' is not a valid date or time: month must be in 1..12 (ISO 8601, e.g. 2026-11-01, 2026-11-01T06:00, 2026-11-01T06:00:00+01:00 or 2026-11-01T05:00Z)
    """
    if value is None:
        return None
    text = str(value).strip()
    if not _ISO.fullmatch(text):
        raise KinetraceError(f"{option} {value!r} is not an ISO 8601 date or date-time ({_EXAMPLES})")
    try:
        ts = pd.Timestamp(text)
    except (ValueError, OverflowError) as exc:
        reason = str(exc).split(":")[0].strip() or "out of range"
        raise KinetraceError(f"{option} {value!r} is not a valid date or time: {reason} (ISO 8601, {_EXAMPLES})") from None
    if not 1678 <= ts.year <= 2261:
        raise KinetraceError(f"{option} {value!r} lies outside the years 1678-2261 that time stamps can hold")
    return ts.tz_localize("UTC") if ts.tzinfo is None else ts.tz_convert("UTC")


def iso_window(since: str | None, until: str | None) -> tuple[pd.Timestamp | None, pd.Timestamp | None]:
    """``--since`` and ``--until`` as UTC instants, the first before the second when both are given."""
    start, end = iso_time(since, "--since"), iso_time(until, "--until")
    if start is not None and end is not None and not start < end:
        raise KinetraceError(f"--since {since!r} must be before --until {until!r}")
    return start, end


def iso_day(value: str | None, option: str = "--date") -> str | None:
    """A production day argument (``YYYY-MM-DD``), checked; returned as typed."""
    if value is None:
        return None
    if not re.fullmatch(r"\d{4}-\d{2}-\d{2}", str(value).strip()):
        raise KinetraceError(f"{option} {value!r} is not a day written YYYY-MM-DD (e.g. 2026-11-29)")
    iso_time(value, option)
    return str(value).strip()


def out_folder(value, option: str = "--out"):
    """An output folder argument, checked: it may be missing (it is created) but not a file.

    >>> out_folder(None) is None
    True
    """
    from pathlib import Path

    if value is None:
        return None
    p = Path(value)
    if p.exists() and not p.is_dir():
        raise KinetraceError(f"{option} {str(value)!r} is a file; give a folder (it is created if missing)")
    return p
