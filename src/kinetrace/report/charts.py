"""Chart definitions shared by the report and the dashboard (Altair / Vega-Lite), so the two never
disagree: the dashboard shows the chart objects, the report renders the same specifications to inline
SVG with vl-convert (no scripts, no external references).

* :func:`production_chart`: production per day as bars (our green at or above target, our rust below),
  the day's target as a tick.
* :func:`activity_chart`: hourly catalyst activity as a line, the activity needed for the target as a
  dashed rule.
"""

from __future__ import annotations

import altair as alt
import pandas as pd

#: Colours of the report and the dashboard (our own palette).
COLOURS = {
    "ink": "#1f2b33",
    "grid": "#d9dde0",
    "met": "#2e7d6b",       # production at or above target
    "short": "#b5532a",     # production below target
    "target": "#28323a",
    "line": "#3b5b92",
    "needed": "#b5532a",
}


def production_chart(rows: pd.DataFrame, *, title: str, width: int = 380, height: int = 150) -> alt.LayerChart:
    """Daily production against target.

    Parameters
    ----------
    rows : DataFrame
        ``day`` (date), ``production_kg`` and ``target_kg``. [kg]
    title : str
        Chart title.

    Returns
    -------
    altair.LayerChart
    """
    d = pd.DataFrame({"day": pd.to_datetime(pd.Series(rows["day"]).astype(str)).dt.strftime("%d %b"),
                      "production_t": rows["production_kg"].to_numpy(dtype=float) / 1000.0,
                      "target_t": rows["target_kg"].to_numpy(dtype=float) / 1000.0})
    d["state"] = ["on target" if p >= t else "below target" for p, t in zip(d["production_t"], d["target_t"])]
    x = alt.X("day:O", sort=None, title=None, axis=alt.Axis(labelAngle=0))
    bars = alt.Chart(d).mark_bar().encode(
        x=x, y=alt.Y("production_t:Q", title="t per day"),
        color=alt.Color("state:N", scale=alt.Scale(domain=["on target", "below target"],
                                                   range=[COLOURS["met"], COLOURS["short"]]), title=None),
        tooltip=["day:O", alt.Tooltip("production_t:Q", format=",.2f", title="production, t"),
                 alt.Tooltip("target_t:Q", format=",.2f", title="target, t")])
    ticks = alt.Chart(d).mark_tick(color=COLOURS["target"], thickness=2, size=24).encode(x=x, y="target_t:Q")
    return alt.layer(bars, ticks).properties(title=title, width=width, height=height)


def activity_chart(series: pd.Series, *, title: str, needed: float | None = None, width: int = 380,
                   height: int = 130) -> alt.LayerChart:
    """Hourly catalyst activity with the activity needed for the target.

    Parameters
    ----------
    series : Series
        Activity on a tz-aware DatetimeIndex. [-]
    title : str
        Chart title.
    needed : float, optional
        Activity needed for the target, drawn as a dashed rule. [-]

    Returns
    -------
    altair.LayerChart
    """
    d = pd.DataFrame({"time": series.index.tz_convert("UTC").tz_localize(None), "activity": series.to_numpy(float)})
    line = alt.Chart(d).mark_line(color=COLOURS["line"], strokeWidth=1.5).encode(
        x=alt.X("time:T", title=None, axis=alt.Axis(format="%d %b", tickCount=5)),
        y=alt.Y("activity:Q", title="activity [-]", scale=alt.Scale(zero=False)))
    layers = [line]
    if needed is not None and pd.notna(needed):
        layers.append(alt.Chart(pd.DataFrame({"needed": [float(needed)]})).mark_rule(
            color=COLOURS["needed"], strokeDash=[5, 4]).encode(y="needed:Q"))
    return alt.layer(*layers).properties(title=title, width=width, height=height)


def to_svg(chart) -> str:
    """The chart as an inline ``<svg>`` element (vl-convert; no scripts, no external references)."""
    import vl_convert as vlc

    svg = vlc.vegalite_to_svg(chart.to_json())
    svg = svg[svg.index("<svg"):]
    # inline SVG in HTML needs no namespace declarations (they only look like addresses)
    for ns in (' xmlns="http://www.w3.org/2000/svg"', ' xmlns:xlink="http://www.w3.org/1999/xlink"'):
        svg = svg.replace(ns, "", 1)
    return svg


__all__ = ["COLOURS", "activity_chart", "production_chart", "to_svg"]
