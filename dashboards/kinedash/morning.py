"""Words and marks of the first page (pure functions; no Streamlit, no store access).

* :data:`MARKS` and :func:`status_mark`: each verdict state (:data:`kinetrace.report.verdict.STATES`)
  drawn as a colour *and* a shape of our own, so the state reads without colour too:
  a level bar resting on a base line (on target), a bar stepped down below the line (below
  target), a hollow ring with a bar across it (down), a dashed empty ring (no data).
* :func:`local_stamp`, :func:`how_long`: time stamps in the site's local time and durations
  in days and hours, never a raw UTC offset.
* :func:`forecast_words`: the forecast said once, with its interval, or "below target since
  ..." when the unit already is.
* :func:`run_words`: which run the page reads (the last complete one) and what became of newer ones.
"""

from __future__ import annotations

import html
import math

import pandas as pd

from kinetrace.report.verdict import STATES

#: state -> (colour, SVG path of the mark on a 24 x 24 box, fill or outline)
MARKS = {
    "on target": ("#2e7d6b", "M3 19 H21 M5 15 H19 V11 H5 Z", "fill"),
    "below target": ("#b5532a", "M3 19 H21 M5 5 H11 V11 H19 V15 H5 Z", "fill"),
    "down": ("#4a4e69", "M12 3 A9 9 0 1 1 11.99 3 Z M6 12 H18", "outline"),
    "no data": ("#80868b", "M12 3 A9 9 0 1 1 11.99 3 Z", "dashed"),
}


def status_mark(state: str, size: int = 28) -> str:
    """Inline SVG mark of a verdict state (colour and shape).

    Parameters
    ----------
    state : str
        One of :data:`kinetrace.report.verdict.STATES`.
    size : int
        Width and height in CSS pixels. [px]

    Returns
    -------
    str
        An ``<svg>`` element with a ``<title>`` naming the state.

    >>> "below target" in status_mark("below target") and "<path" in status_mark("down")
    True
    >>> status_mark("sideways")
    Traceback (most recent call last):
    ...
    ValueError: unknown state 'sideways'; known: no data, down, below target, on target
    """
    if state not in MARKS:
        raise ValueError(f"unknown state {state!r}; known: {', '.join(STATES)}")
    colour, path, style = MARKS[state]
    if style == "fill":
        paint = f'fill="{colour}" stroke="{colour}" stroke-width="2" stroke-linejoin="round"'
    else:
        dash = ' stroke-dasharray="3 2.5"' if style == "dashed" else ""
        paint = f'fill="none" stroke="{colour}" stroke-width="2.4"{dash}'
    return (f'<svg width="{size}" height="{size}" viewBox="0 0 24 24" role="img" aria-label="{html.escape(state)}">'
            f"<title>{html.escape(state)}</title><path d=\"{path}\" {paint}/></svg>")


def status_badge(state: str) -> str:
    """The mark and the state's word side by side, in the state's colour (HTML).

    >>> "on target</span>" in status_badge("on target")
    True
    """
    colour = MARKS[state][0]
    return (f'<span style="display:inline-flex;align-items:center;gap:0.4rem;border:2px solid {colour};'
            f'border-radius:0.3rem;padding:0.1rem 0.55rem 0.1rem 0.3rem;font-weight:600;color:{colour}">'
            f"{status_mark(state, 26)}<span>{html.escape(state)}</span></span>")


def local_stamp(ts, tz: str, with_time: bool = True) -> str:
    """A time stamp in the site's local time, with the zone's abbreviation (no numeric offset).

    Parameters
    ----------
    ts : Timestamp or str
        Time (naive values are taken as UTC). [UTC]
    tz : str
        IANA time zone of the site.
    with_time : bool
        False: the date only.

    >>> local_stamp(pd.Timestamp("2026-11-30T23:00Z"), "Europe/London")
    '30 Nov 2026 23:00 GMT'
    >>> local_stamp(pd.Timestamp("2026-07-01T06:30Z"), "Europe/London")
    '1 Jul 2026 07:30 BST'
    >>> local_stamp(None, "UTC")
    'not available'
    """
    if ts is None or (not isinstance(ts, str) and pd.isna(ts)):
        return "not available"
    t = pd.Timestamp(ts)
    t = (t.tz_localize("UTC") if t.tzinfo is None else t).tz_convert(tz)
    day = f"{t.day} {t:%b %Y}"
    return f"{day} {t:%H:%M %Z}" if with_time else day


def how_long(start, end) -> str:
    """Length of a stretch in days and hours (minutes under an hour).

    >>> how_long(pd.Timestamp("2026-11-25T04:00Z"), pd.Timestamp("2026-11-30T23:00Z"))
    '5 d 19 h'
    >>> how_long(pd.Timestamp("2026-11-30T22:20Z"), pd.Timestamp("2026-11-30T23:00Z"))
    '40 min'
    """
    s = max((pd.Timestamp(end) - pd.Timestamp(start)).total_seconds(), 0.0)
    d, h = int(s // 86400), int((s % 86400) // 3600)
    if d:
        return f"{d} d {h} h" if h else f"{d} d"
    if h:
        return f"{h} h"
    return f"{int(s // 60)} min"


def forecast_words(verdict, forecast: dict | None, tz: str) -> str:
    """The forecast of the first day below target, said once.

    Parameters
    ----------
    verdict : kinetrace.report.verdict.Verdict or None
        The unit's verdict (its state and since when).
    forecast : dict, optional
        Newest stored forecast row: ``miss_earliest``, ``miss_expected``, ``miss_latest`` [UTC].
    tz : str
        Site time zone for the dates.

    Returns
    -------
    str
        "below target since 10 Nov 2026 (20 days)" for a unit already below target;
        "expected 8 Jan 2027 (interval 31 Dec 2026 to 17 Jan 2027)" for a crossing ahead;
        "not within the forecast horizon" when the trend does not cross.

    >>> import datetime as dt
    >>> from kinetrace.report.verdict import Verdict
    >>> v = Verdict("R-210", "below target", dt.date(2026, 11, 29), 20, dt.date(2026, 11, 10))
    >>> forecast_words(v, None, "UTC")
    'below target since 10 Nov 2026 (20 days)'
    >>> v = Verdict("R-220", "on target", dt.date(2026, 11, 29), 26, dt.date(2026, 11, 4))
    >>> f = {"miss_earliest": pd.Timestamp("2026-12-31T12:00Z"), "miss_expected": pd.Timestamp("2027-01-08T12:00Z"),
    ...      "miss_latest": pd.Timestamp("2027-01-17T12:00Z")}
    >>> forecast_words(v, f, "Europe/London")
    'expected 8 Jan 2027 (interval 31 Dec 2026 to 17 Jan 2027)'
    """
    if verdict is not None and verdict.state == "below target":
        n = verdict.days
        return f"below target since {local_stamp(pd.Timestamp(verdict.since), 'UTC', False)} ({n} day{'s' * (n != 1)})"
    if verdict is not None and verdict.state in ("down", "no data"):
        return f"{verdict.state} since {local_stamp(pd.Timestamp(verdict.since), 'UTC', False)}: no forecast judged"
    if not forecast:
        return "no forecast stored"
    exp, lo, hi = (forecast.get(k) for k in ("miss_expected", "miss_earliest", "miss_latest"))
    if exp is None or pd.isna(exp):
        if lo is not None and not pd.isna(lo):
            return (f"not within the forecast horizon (the band allows a fall below the need from "
                    f"{local_stamp(lo, tz, False)})")
        return "not within the forecast horizon"
    text = f"expected {local_stamp(exp, tz, False)}"
    lo_t = local_stamp(lo, tz, False) if lo is not None and not pd.isna(lo) else None
    hi_t = local_stamp(hi, tz, False) if hi is not None and not pd.isna(hi) else None
    if lo_t and hi_t and lo_t != hi_t:
        text += f" (interval {lo_t} to {hi_t})"
    elif lo_t and not hi_t:
        text += f" (interval from {lo_t}, no upper end within the horizon)"
    return text


def decline_words(kd_per_s: float | None, method: str = "") -> str:
    """The fitted decline of the catalyst activity per day, from the stored decay constant.

    >>> decline_words(8.1e-8, "exponential")
    'fitted decline 0.70 %/d (exponential decay law)'
    >>> decline_words(float("nan"))
    ''
    """
    if kd_per_s is None or not math.isfinite(kd_per_s):
        return ""
    pct = 100.0 * (1.0 - math.exp(-kd_per_s * 86400.0)) if method == "exponential" else 100.0 * kd_per_s * 86400.0
    return f"fitted decline {pct:.2f} %/d" + (f" ({method} decay law)" if method else "")


def run_words(runs: pd.DataFrame, tz: str) -> str:
    """Which run the page reads: the last complete one, and what became of any newer run.

    Parameters
    ----------
    runs : DataFrame
        The store's runs table (``run_id``, ``status``, ``started``, ``finished``, ``window_start``,
        ``window_end``), oldest first.
    tz : str
        Site time zone.

    >>> r = pd.DataFrame({"run_id": [4, 5], "status": ["complete", "abandoned"],
    ...     "started": pd.to_datetime(["2026-12-01T05:00Z", "2026-12-02T05:00Z"]),
    ...     "finished": pd.to_datetime(["2026-12-01T05:03Z", None], utc=True),
    ...     "window_start": pd.to_datetime(["2026-09-01T00:00Z", "2026-09-01T00:00Z"]),
    ...     "window_end": pd.to_datetime(["2026-12-01T00:00Z", "2026-12-02T00:00Z"])})
    >>> print(run_words(r, "UTC"))
    Results of run 4, the last complete run (finished 1 Dec 2026 05:03 UTC; data 1 Sep 2026 00:00 UTC to 1 Dec 2026 00:00 UTC). Run 5 is abandoned (started 2 Dec 2026 05:00 UTC, never finished): nothing of it is shown.
    """
    if runs is None or not len(runs):
        return "No run is recorded in the store."
    done = runs.loc[runs["status"] == "complete"]
    if not len(done):
        return "No complete run in the store yet: the results shown may be partial."
    r = done.iloc[-1]
    text = (f"Results of run {r['run_id']}, the last complete run (finished {local_stamp(r['finished'], tz)}; "
            f"data {local_stamp(r['window_start'], tz)} to {local_stamp(r['window_end'], tz)}).")
    for _, n in runs.loc[runs["run_id"] > r["run_id"]].iterrows():
        fate = {"running": "still running or stopped without a word", "failed": "failed",
                "abandoned": "abandoned"}.get(n["status"], n["status"])
        text += (f" Run {n['run_id']} is {fate} (started {local_stamp(n['started'], tz)}, never finished): "
                 "nothing of it is shown.") if n["status"] != "failed" else \
            f" Run {n['run_id']} failed (started {local_stamp(n['started'], tz)}): nothing of it is shown."
    return text


__all__ = ["MARKS", "decline_words", "forecast_words", "how_long", "local_stamp", "run_words", "status_badge",
           "status_mark"]
