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
