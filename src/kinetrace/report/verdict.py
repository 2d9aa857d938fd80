"""The morning verdict of a unit: one sentence, built here only, that opens the check's output, the
report, the workbook's first sheet and the dashboard's first page.

    "R-210 below target for 20 days (since 10 Nov): conversion below expectation, catalyst activity
     0.54 against 0.61 needed; feed at plan; R210-FT-101 reads about +5.0 % since 26 Oct.
     Next: check R210-FT-101 (calibration, or a portable or lab cross-check)."

Only complete production days (site-local days whose data reach the day's end) are judged; the
day in progress is said apart, "so far today", against its target pro rata, and never sets the
status. Words of the states are :data:`STATES`; nothing else names a state.
"""

from __future__ import annotations

import datetime as dt
import math
from dataclasses import dataclass, field

import pandas as pd

#: States of a unit on a complete day, worst first. "down": the unit did not run (downtime makes
#: nearly all of the gap); "no data": no production could be computed for the day.
STATES = ("no data", "down", "below target", "on target")

#: Words of the gap parts, as causes.
CAUSE_WORDS = {"gap_feed_kg": "feed below plan", "gap_conversion_kg": "conversion below expectation",
               "gap_downtime_kg": "downtime", "gap_data_kg": "data too poor to judge"}

#: Smallest share of a run's gap [-] that a part must carry to be named as a cause.
CAUSE_SHARE = 0.10


def day_state(row) -> str:
    """State of one complete production day from its stored daily row.

    Parameters
    ----------
    row : mapping or None
        ``production_kg``, ``target_kg`` [kg], ``gap_downtime_kg`` [kg], ``hours_with_data`` [h].

    Returns
    -------
    str
        One of :data:`STATES`.

    Examples
    --------
    >>> day_state({"production_kg": 23000.0, "target_kg": 24000.0, "gap_downtime_kg": 0.0, "hours_with_data": 24})
    'below target'
    >>> day_state({"production_kg": 500.0, "target_kg": 24000.0, "gap_downtime_kg": 22000.0, "hours_with_data": 24})
    'down'
    >>> day_state(None)
    'no data'
    """
    if row is None:
        return "no data"
    prod, target = _f(row.get("production_kg")), _f(row.get("target_kg"))
    if not (math.isfinite(prod) and math.isfinite(target)) or _f(row.get("hours_with_data")) == 0:
        return "no data"
    if prod >= target:
        return "on target"
    gap, down = target - prod, _f(row.get("gap_downtime_kg"))
    if math.isfinite(down) and target > 0 and prod < 0.1 * target and down >= 0.9 * gap:
        return "down"
    return "below target"


def _f(x) -> float:
    try:
        return float(x)
    except (TypeError, ValueError):
        return float("nan")


def _date(d) -> str:
    return f"{pd.Timestamp(d):%d %b}".lstrip("0")


@dataclass(frozen=True)
class Verdict:
    """The verdict of one unit for one production day (see the module docstring)."""

    unit: str
    state: str                      # one of STATES
    day: dt.date
    days: int                       # consecutive complete days in this state, the day included
    since: dt.date | None           # first day of that run
    causes: tuple[str, ...] = ()    # main cause first
    alarms: tuple[str, ...] = ()    # open alarms, named
    next_step: str = ""
    so_far: str = ""                # the day in progress, "" when none
    forecast: str = ""              # expected first day below target, for a unit on target

    @property
    def attention(self) -> bool:
        """True when the unit needs attention: not on target, or an open alarm."""
        return self.state != "on target" or bool(self.alarms)

    @property
    def headline(self) -> str:
        """State and how long: "below target for 20 days (since 10 Nov)"."""
        if self.days <= 1:
            return f"{self.state} on {_date(self.day)}"
        return f"{self.state} for {self.days} days (since {_date(self.since)})"

    @property
    def sentence(self) -> str:
        """The whole verdict in one sentence (two with the next step)."""
        parts = list(self.causes) + list(self.alarms)
        if self.forecast:
            parts.append(self.forecast)
        text = f"{self.unit} {self.headline}" + (": " + "; ".join(parts) if parts else "") + "."
        if self.next_step:
            text += f" Next: {self.next_step}."
        if self.so_far:
            text += f" So far today: {self.so_far}."
        return text


def alarm_words(row) -> str:
    """An open alarm named in a few words (what, which signal, how big, since when).

    >>> alarm_words({"kind": "sensor_bias", "variable": "R210-FT-101", "magnitude": 5.04,
    ...              "magnitude_unit": "%", "onset": pd.Timestamp("2026-10-26T04:00Z")})
    'R210-FT-101 reads about +5.0 % since 26 Oct'
    >>> alarm_words({"kind": "ewma_down", "variable": "activity", "magnitude": -0.03,
    ...              "magnitude_unit": "-", "onset": pd.Timestamp("2026-11-20T00:00Z")})
    'catalyst activity falling faster than its trend (EWMA) since 20 Nov'
    >>> alarm_words({"kind": "sensor_drift", "variable": "K41-AI-P", "magnitude": 1.93, "rate": 0.49,
    ...              "magnitude_unit": "%", "onset": pd.Timestamp("2027-03-09T00:00Z"),
    ...              "last_check": pd.Timestamp("2027-03-12T12:30Z")})
    'analyzer K41-AI-P reads about +1.9 %, growing about +0.49 % a day since 9 Mar; last lab check 12 Mar'
    >>> alarm_words({"kind": "sensor_bias", "variable": "R1-FT-1", "magnitude": 0.42, "magnitude_unit": "m3/h",
    ...              "onset": pd.NaT})
    'R1-FT-1 reads about +0.42 m3/h'
    """
    kind, var = str(row.get("kind", "")), str(row.get("variable", ""))
    since = "" if pd.isna(row.get("onset")) else f" since {_date(row['onset'])}"
    mag = _f(row.get("magnitude"))
    unit = str(row.get("magnitude_unit") or "%")
    size = f"{mag:+.1f} %" if unit == "%" else f"{mag:+.3g} {unit}"   # the pipeline says sensors in %
    checked = "" if pd.isna(row.get("last_check")) else f"; last lab check {_date(row['last_check'])}"
    if kind == "sensor_drift":
        rate = _f(row.get("rate"))
        growing = f", growing about {rate:+.2f} % a day" if math.isfinite(rate) else ", drifting"
        return f"analyzer {var} reads about {size}{growing}{since}{checked}"
    if kind == "sensor_bias":
        return f"{var} reads about {size}{since}{checked}"
    if kind == "balance_mismatch":
        return f"the balances disagree with {var} by about {size} (a lab result or the feed specification may explain it){since}"
    method, _, direction = kind.partition("_")
    signal = "catalyst activity" if var == "activity" else var
    if method == "step":
        return f"sudden {'drop' if direction == 'down' else 'step'} in {signal}{since}"
    chart = {"ewma": "EWMA", "cusum": "CUSUM", "drift": "trend test"}.get(method, method)
    if direction in ("down", "up"):
        return f"{signal} {'falling' if direction == 'down' else 'rising'} faster than its trend ({chart}){since}"
    return f"{kind.replace('_', ' ')} on {signal}{since}"


def _streak(states: list[tuple[dt.date, str]], day: dt.date) -> tuple[int, dt.date | None]:
    """Consecutive days ending at ``day`` with its state (a missing day ends the run)."""
    by_day = dict(states)
    if day not in by_day:
        return 1, day
    state, n, d = by_day[day], 0, day
    while by_day.get(d) == state:
        n, d = n + 1, d - dt.timedelta(days=1)
    return n, d + dt.timedelta(days=1)


def build_verdict(unit: str, day: dt.date, daily: pd.DataFrame, *, alarms_open: pd.DataFrame | None = None,
                  forecast: dict | None = None, so_far_row=None, mass: str = "kg") -> Verdict:
    """The verdict of a unit for one complete production day, from stored rows only.

    Parameters
    ----------
    unit : str
        Unit id.
    day : date
        The (complete) production day judged.
    daily : DataFrame
        The unit's stored daily rows: ``day`` (date), ``production_kg``, ``target_kg``, the gap parts
        [kg] and ``hours_with_data`` [h]; complete days only.
    alarms_open : DataFrame, optional
        Alarms open at the end of the day (store rows: ``kind``, ``variable``, ``magnitude``,
        ``magnitude_unit``, ``onset``).
    forecast : dict, optional
        The newest forecast row: ``activity_now``, ``activity_needed`` [-], ``miss_expected`` [UTC].
    so_far_row : mapping, optional
        The daily row of the day in progress (partial), said pro rata.
    mass : str
        Mass unit the amounts are said in (the site's production unit's, e.g. ``"t"``).

    Returns
    -------
    Verdict
    """
    rows = {r["day"]: r for r in daily.to_dict("records")}
    state = day_state(rows.get(day))
    days, since = _streak([(d, day_state(r)) for d, r in rows.items()], day)
    causes: list[str] = []
    if state in ("below target", "down") and day in rows:
        run = [rows[d] for d in rows if since <= d <= day]
        parts = {k: sum(_f(r.get(k)) for r in run if math.isfinite(_f(r.get(k)))) for k in CAUSE_WORDS}
        # a part is named as a cause only when it carries a real share of the gap: a part of a few
        # kilograms in a gap of tonnes (or the round-off of the exact split) explains nothing
        # (common practice, no source: 10 % of the gap)
        gap = sum(_f(r.get("target_kg")) - _f(r.get("production_kg")) for r in run)
        floor = CAUSE_SHARE * gap if math.isfinite(gap) and gap > 0 else 0.0
        ranked = sorted((k for k in parts if parts[k] > floor), key=lambda k: -parts[k])
        for k in ranked[:2]:
            words = CAUSE_WORDS[k]
            if k == "gap_conversion_kg" and forecast and math.isfinite(_f(forecast.get("activity_now"))) \
                    and math.isfinite(_f(forecast.get("activity_needed"))):
                words += (f", catalyst activity {_f(forecast['activity_now']):.2f} against "
                          f"{_f(forecast['activity_needed']):.2f} needed")
            causes.append(words)
        if state == "below target" and parts["gap_feed_kg"] <= 0:
            causes.append("feed at plan")
    alarms = tuple(alarm_words(r) for r in (alarms_open.to_dict("records") if alarms_open is not None else []))
    fc = ""
    if state == "on target" and forecast and not pd.isna(forecast.get("miss_expected")):
        fc = f"expected to fall below target around {_date(forecast['miss_expected'])}"
    next_step = _next_step(state, causes, alarms_open)
    so_far = ""
    if so_far_row is not None:
        h = _f(so_far_row.get("hours_with_data"))
        prod, target = _f(so_far_row.get("production_kg")), _f(so_far_row.get("target_kg"))
        if h > 0 and math.isfinite(prod) and math.isfinite(target):
            pro_rata = target * h / 24.0
            from .wording import mass_text

            so_far = f"{mass_text(prod, mass)} in {h:.0f} h against {mass_text(pro_rata, mass)} pro rata"
    return Verdict(unit, state, day, days, since, tuple(causes), alarms, next_step, so_far, fc)


def _next_step(state: str, causes: list[str], alarms_open) -> str:
    if alarms_open is not None and len(alarms_open):
        a = alarms_open.iloc[0]
        if a["kind"] == "sensor_drift":
            return f"take a lab check of {a['variable']} or recalibrate it (its readings are corrected meanwhile)"
        if a["kind"] in ("sensor_bias", "balance_mismatch"):
            return f"check {a['variable']} (calibration, or a portable or lab cross-check)"
    if state == "no data":
        return "the historian connection and the unit's tags"
    if state == "down":
        return "the downtime log and the restart plan"
    if state == "below target":
        main = causes[0] if causes else ""
        if main.startswith("conversion"):
            return "the catalyst activity trend and the what-if settings (within the safe limits)"
        if main.startswith("feed"):
            return "the feed rate against plan"
        if main.startswith("data"):
            return "the data-quality counts of the unit's tags"
        if main.startswith("downtime"):
            return "the downtime log"
    if alarms_open is not None and len(alarms_open):
        return "the open alarm on the trends"
    return ""


__all__ = ["CAUSE_SHARE", "CAUSE_WORDS", "STATES", "Verdict", "alarm_words", "build_verdict", "day_state"]
