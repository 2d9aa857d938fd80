"""Altair chart builders; every chart is fed thinned data (see :mod:`.source`).

A trend chart layers, bottom to top: shaded steady windows, an uncertainty band, the
min/max envelope of bucketed series, the lines, then horizontal and vertical rules.
"""

from __future__ import annotations

import altair as alt
import numpy as np
import pandas as pd

from .display import to_display
from .ui import COLOURS


def _long(parts: dict[str, pd.DataFrame], unit: str) -> pd.DataFrame:
    frames = []
    for label, f in parts.items():
        v, _ = to_display(f["value"].to_numpy(), unit)
        lo, _ = to_display(f["lo"].to_numpy(), unit)
        hi, _ = to_display(f["hi"].to_numpy(), unit)
        frames.append(pd.DataFrame({"ts": f.index, "value": v, "lo": lo, "hi": hi, "series": label}))
    if not frames:
        return pd.DataFrame({"ts": pd.DatetimeIndex([], tz="UTC"), "value": [], "lo": [], "hi": [], "series": []})
    return pd.concat(frames, ignore_index=True)


def trend_chart(lines: dict[str, pd.DataFrame], *, unit: str, y_title: str, colours: dict[str, str],
                band: tuple[pd.DataFrame, pd.DataFrame, str] | None = None, windows: pd.DataFrame | None = None,
                hlines: dict[str, float] | None = None, vlines: dict[str, pd.Timestamp] | None = None,
                envelope: bool = False, height: int = 220) -> alt.LayerChart:
    """A time trend in display units.

    Parameters
    ----------
    lines : dict
        ``label -> DataFrame`` (index ts UTC, columns ``value``, ``lo``, ``hi``). [``unit``]
    unit : str
        Stored unit of the values; shown in its display unit (:mod:`.display`).
    y_title : str
        Axis title (the display unit is appended).
    colours : dict
        ``label -> colour`` of each line (and of the band label).
    band : (DataFrame, DataFrame, str), optional
        Lower and upper edges (same time stamps) and the band's label.
    windows : DataFrame, optional
        ``start``, ``end`` of steady windows, shaded.
    hlines, vlines : dict, optional
        Labelled horizontal levels [``unit``] and vertical times [UTC].
    envelope : bool
        Draw each line's bucket min/max as a light area (bucketed reads).
    """
    _, shown = to_display(1.0, unit)
    data = _long(lines, unit)
    shown_labels = set(lines) | ({band[2]} if band is not None and len(band[0]) else set())
    domain = [k for k in colours if k in shown_labels] or list(colours)
    scale = alt.Scale(domain=domain, range=[colours[k] for k in domain])
    x = alt.X("ts:T", title="time (UTC)")
    y_title = f"{y_title} [{shown}]" if shown and shown != "-" else y_title
    layers = []
    if windows is not None and len(windows):
        w = windows.assign(kind="steady window")
        layers.append(alt.Chart(w).mark_rect(color=COLOURS["steady"], opacity=0.6).encode(
            x="start:T", x2="end:T", tooltip=[alt.Tooltip("start:T"), alt.Tooltip("end:T")]))
    if band is not None and len(band[0]):
        lo, hi, label = band
        common = lo.index.intersection(hi.index)
        b = pd.DataFrame({"ts": common, "lo": to_display(lo.loc[common, "value"].to_numpy(), unit)[0],
                          "hi": to_display(hi.loc[common, "value"].to_numpy(), unit)[0], "series": label})
        layers.append(alt.Chart(b).mark_area(opacity=0.35).encode(
            x=x, y=alt.Y("lo:Q", title=y_title, scale=alt.Scale(zero=False)), y2="hi:Q",
            color=alt.Color("series:N", scale=scale, title=None)))
    if envelope and len(data):
        layers.append(alt.Chart(data).mark_area(opacity=0.25).encode(
            x=x, y=alt.Y("lo:Q", title=y_title, scale=alt.Scale(zero=False)), y2="hi:Q",
            color=alt.Color("series:N", scale=scale, title=None), detail="series:N"))
    layers.append(alt.Chart(data).mark_line(strokeWidth=1.6).encode(
        x=x, y=alt.Y("value:Q", title=y_title, scale=alt.Scale(zero=False)),
        color=alt.Color("series:N", scale=scale, title=None),
        tooltip=[alt.Tooltip("ts:T", format="%Y-%m-%d %H:%M"), "series:N", alt.Tooltip("value:Q", format=".4g")]))
    for label, level in (hlines or {}).items():
        if level is None or not np.isfinite(level):
            continue
        v, _ = to_display(level, unit)
        layers.append(alt.Chart(pd.DataFrame({"y": [v], "label": [label]})).mark_rule(
            strokeDash=[6, 3], color=COLOURS["target"]).encode(y="y:Q", tooltip=["label:N", "y:Q"]))
    for label, when in (vlines or {}).items():
        if when is None or pd.isna(when):
            continue
        layers.append(alt.Chart(pd.DataFrame({"t": [pd.Timestamp(when)], "label": [label]})).mark_rule(
            strokeDash=[2, 2], color=COLOURS["alarm"]).encode(x="t:T", tooltip=["label:N", "t:T"]))
    return alt.layer(*layers).properties(height=height).interactive(bind_y=False)


def chart_points(chart) -> int:
    """Rows of data a chart sends to the browser (all its datasets). [-]"""
    spec = chart.to_dict()
    return sum(len(v) for v in spec.get("datasets", {}).values())


def _spark_x(domain, tz: str):
    return alt.X("t:T", title=None, scale=alt.Scale(domain=[_vl_time(domain[0], tz), _vl_time(domain[1], tz)]),
                 axis=alt.Axis(format="%d %b", tickCount=4, labelOverlap=True, grid=False))


def _vl_time(ts, tz: str) -> str:
    """A time as the naive local wall-clock ISO text Vega-Lite draws as given (no browser zone shift)."""
    return pd.Timestamp(ts).tz_convert(tz).tz_localize(None).isoformat()


def _local_naive(index, tz: str):
    return pd.DatetimeIndex(index).tz_convert(tz).tz_localize(None)


def spark_production(rows: pd.DataFrame, *, domain, tz: str, mass_factor: float = 1e-3, height: int = 150):
    """Sparkline of daily production against the day's target (dashed step): a mark per day, a green
    square at or above target, a rust triangle pointing down below it (shape and colour).

    Parameters
    ----------
    rows : DataFrame
        ``day`` (date), ``production_kg``, ``target_kg``. [kg]
    domain : (Timestamp, Timestamp)
        Time axis shared with the activity sparkline. [UTC]
    tz : str
        Site time zone of the axis.
    mass_factor : float
        Factor from kg to the shown mass (1e-3: t). [-]
    """
    from kinetrace.report.charts import COLOURS as RC

    days = pd.to_datetime(pd.Series(rows["day"]).astype(str)) + pd.Timedelta(hours=12)
    d = pd.DataFrame({"t": days.to_numpy(), "production": rows["production_kg"].to_numpy(float) * mass_factor,
                      "target": rows["target_kg"].to_numpy(float) * mass_factor})
    d["state"] = np.where(d["production"] >= d["target"], "on target", "below target")
    x = _spark_x(domain, tz)
    tip = [alt.Tooltip("t:T", format="%d %b %Y", title="day"), alt.Tooltip("production:Q", format=",.2f"),
           alt.Tooltip("target:Q", format=",.2f"), "state:N"]
    lo = float(np.nanmin(np.r_[d["production"], d["target"]])) if len(d) else 0.0
    hi = float(np.nanmax(np.r_[d["production"], d["target"]])) if len(d) else 1.0
    pad = 0.15 * (hi - lo) if hi > lo else 0.05 * max(abs(hi), 1.0)
    y = alt.Y("production:Q", title=None, scale=alt.Scale(domain=[lo - pad, hi + pad]),
              axis=alt.Axis(tickCount=3, format="~g"))
    line = alt.Chart(d).mark_line(color=RC["line"], strokeWidth=1.2).encode(x=x, y=y)
    bars = alt.Chart(d).mark_point(filled=True, size=40, opacity=1).encode(
        x=x, y=y, tooltip=tip,
        shape=alt.Shape("state:N", legend=None, scale=alt.Scale(domain=["on target", "below target"],
                                                               range=["square", "triangle-down"])),
        color=alt.Color("state:N", legend=None, scale=alt.Scale(domain=["on target", "below target"],
                                                               range=[RC["met"], RC["short"]])))
    target = alt.Chart(d).mark_line(color=RC["target"], strokeDash=[4, 2], strokeWidth=1.5,
                                    interpolate="step-after").encode(
        x=x, y=alt.Y("target:Q", scale=alt.Scale(domain=[lo - pad, hi + pad])))
    return alt.layer(target, line, bars).properties(height=height)


def spark_activity(series: pd.Series, *, needed: float | None, domain, tz: str, height: int = 150):
    """Sparkline of catalyst activity (hourly means) with the activity needed for the target as a dashed rule.

    Parameters
    ----------
    series : Series
        Activity on a UTC index. [-]
    needed : float, optional
        Activity needed for the target. [-]
    """
    from kinetrace.report.charts import COLOURS as RC

    d = pd.DataFrame({"t": _local_naive(series.index, tz), "activity": series.to_numpy(float)})
    lo = np.nanmin(d["activity"]) if len(d) else 0.0
    hi = np.nanmax(d["activity"]) if len(d) else 1.0
    if needed is not None and np.isfinite(needed):
        lo, hi = min(lo, needed), max(hi, needed)
    pad = 0.1 * (hi - lo) if hi > lo else 0.05
    x = _spark_x(domain, tz)
    y = alt.Y("activity:Q", title=None, scale=alt.Scale(domain=[lo - pad, hi + pad]),
              axis=alt.Axis(tickCount=3, format=".2f"))
    layers = [alt.Chart(d).mark_line(color=RC["line"], strokeWidth=1.5).encode(
        x=x, y=y, tooltip=[alt.Tooltip("t:T", format="%d %b %H:%M"), alt.Tooltip("activity:Q", format=".3f")])]
    if needed is not None and np.isfinite(needed):
        layers.append(alt.Chart(pd.DataFrame({"activity": [float(needed)], "label": ["activity needed"]})).mark_rule(
            color=RC["needed"], strokeDash=[5, 4], strokeWidth=1.5).encode(
            y="activity:Q", tooltip=["label:N", alt.Tooltip("activity:Q", format=".3f")]))
    return alt.layer(*layers).properties(height=height)
