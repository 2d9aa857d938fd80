"""Charts of the trends page: full-width panels on one shared time axis, in the site's local time.

Every panel layers, bottom to top: the stretches the unit was **not** steady (pale sand), the
stretches it was down (slate), an uncertainty band, the min/max envelope of bucketed series, the
lines, dashed levels (target, plan, activity needed), and event rules with tooltips: catalyst
changes of the configuration (green, solid), alarm onsets of the store (red, dashed) and the
forecast crossing (orange, dotted). The y axes have one fixed label width so the plot areas of
all panels line up under each other.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import altair as alt
import numpy as np
import pandas as pd

#: Colours of the context layers (our own palette; the lines use :data:`kinedash.ui.COLOURS`).
CONTEXT = {"unsteady": "#eadfcb", "down": "#4a4e69", "catalyst change": "#2e7d32", "alarm onset": "#a4161a",
           "expected crossing": "#c2571a"}
#: Dash pattern of each event kind (shape as well as colour).
DASHES = {"catalyst change": [1, 0], "alarm onset": [6, 3], "expected crossing": [2, 3]}
#: Width of the y-axis label area of every panel, so the plot areas align. [px]
Y_AXIS_WIDTH = 70


def complement(windows: pd.DataFrame, start, end) -> pd.DataFrame:
    """The stretches of ``[start, end)`` outside the given windows (e.g. the unsteady ones).

    Parameters
    ----------
    windows : DataFrame
        ``start``, ``end`` of the windows, sorted, not overlapping. [UTC]
    start, end : Timestamp
        The range. [UTC]

    Returns
    -------
    DataFrame
        ``start``, ``end`` of the gaps between (and around) the windows. [UTC]

    >>> t = lambda h: pd.Timestamp("2026-11-30", tz="UTC") + pd.Timedelta(hours=h)
    >>> w = pd.DataFrame({"start": [t(1), t(4)], "end": [t(3), t(5)]})
    >>> g = complement(w, t(0), t(6))
    >>> [(a.hour, b.hour) for a, b in zip(g["start"], g["end"])]
    [(0, 1), (3, 4), (5, 6)]
    """
    start, end = pd.Timestamp(start), pd.Timestamp(end)
    if windows is None or not len(windows):
        return pd.DataFrame({"start": [start], "end": [end]})
    a = np.r_[np.datetime64(start.tz_convert("UTC").tz_localize(None)),
              windows["end"].dt.tz_convert("UTC").dt.tz_localize(None).to_numpy()]
    b = np.r_[windows["start"].dt.tz_convert("UTC").dt.tz_localize(None).to_numpy(),
              np.datetime64(end.tz_convert("UTC").tz_localize(None))]
    keep = b > a
    return pd.DataFrame({"start": pd.DatetimeIndex(a[keep]).tz_localize("UTC"),
                         "end": pd.DatetimeIndex(b[keep]).tz_localize("UTC")})


def projection(t0, a0: float, needed: float, t1, n: int = 48) -> pd.DataFrame:
    """A line from the last fitted activity to the activity needed at a stored crossing time, drawn
    geometrically (straight in ln a: exact for the exponential decay law, a guide for the others).

    Parameters
    ----------
    t0 : Timestamp
        Time of the last fitted (or band) value. [UTC]
    a0 : float
        That value. [-]
    needed : float
        Activity needed for the target. [-]
    t1 : Timestamp
        Stored crossing time of this line (expected, earliest or latest). [UTC]
    n : int
        Points of the line. [-]

    Returns
    -------
    DataFrame
        ``value`` on a UTC index from ``t0`` to ``t1``; empty when the inputs do not make a line
        (no crossing time, ``t1`` not after ``t0``, or ``a0`` not above the need).

    >>> p = projection(pd.Timestamp("2026-12-01", tz="UTC"), 0.8, 0.4, pd.Timestamp("2026-12-11", tz="UTC"), n=3)
    >>> [round(v, 4) for v in p["value"]]
    [0.8, 0.5657, 0.4]
    """
    if t1 is None or pd.isna(t1) or not (np.isfinite(a0) and np.isfinite(needed)) or a0 <= 0 or needed <= 0:
        return pd.DataFrame({"value": []}, index=pd.DatetimeIndex([], tz="UTC"))
    t0, t1 = pd.Timestamp(t0), pd.Timestamp(t1)
    if t1 <= t0 or a0 <= needed:       # a crossing ahead needs a value above the need today
        return pd.DataFrame({"value": []}, index=pd.DatetimeIndex([], tz="UTC"))
    f = np.linspace(0.0, 1.0, n)
    idx = pd.DatetimeIndex(t0 + (t1 - t0) * f)
    return pd.DataFrame({"value": np.exp(np.log(a0) + f * (np.log(needed) - np.log(a0)))}, index=idx)


@dataclass
class TimeFrame:
    """The shared time axis and the context every panel shows.

    Attributes
    ----------
    start, end : Timestamp
        Axis range (``end`` may reach a forecast crossing beyond the data). [UTC]
    tz : str
        Site time zone the axis is drawn in.
    unsteady, down : DataFrame
        ``start``, ``end`` of the stretches shaded. [UTC]
    events : DataFrame
        ``t`` [UTC], ``kind`` (a key of :data:`DASHES`), ``label`` (the tooltip).
    """

    start: pd.Timestamp
    end: pd.Timestamp
    tz: str = "UTC"
    unsteady: pd.DataFrame = field(default_factory=lambda: pd.DataFrame({"start": [], "end": []}))
    down: pd.DataFrame = field(default_factory=lambda: pd.DataFrame({"start": [], "end": []}))
    events: pd.DataFrame = field(default_factory=lambda: pd.DataFrame({"t": [], "kind": [], "label": []}))

    def local(self, ts) -> pd.DatetimeIndex:
        """Times as naive local wall-clock values (Vega-Lite draws them as given)."""
        return pd.DatetimeIndex(ts).tz_convert(self.tz).tz_localize(None)

    def x(self, title: bool = False) -> alt.X:
        dom = [pd.Timestamp(t).tz_convert(self.tz).tz_localize(None).isoformat() for t in (self.start, self.end)]
        return alt.X("t:T", scale=alt.Scale(domain=dom), title=f"time ({self.tz})" if title else None,
                     axis=alt.Axis(labelOverlap=True, tickCount=8, format="%d %b %H:%M" if
                                   self.end - self.start <= pd.Timedelta(days=3) else "%d %b"))


def _stretch_layer(frame: TimeFrame, stretches: pd.DataFrame, what: str, colour: str, opacity: float):
    if stretches is None or not len(stretches):
        return None
    s = pd.DataFrame({"t": frame.local(stretches["start"]), "t2": frame.local(stretches["end"]), "what": what})
    s["from"] = s["t"].dt.strftime("%d %b %H:%M")
    s["to"] = s["t2"].dt.strftime("%d %b %H:%M")
    return alt.Chart(s).mark_rect(color=colour, opacity=opacity).encode(
        x=frame.x(), x2="t2:T", tooltip=[alt.Tooltip("what:N", title="stretch"), "from:N", "to:N"])


def panel(lines: dict[str, pd.DataFrame], *, frame: TimeFrame, y_title: str, colours: dict[str, str],
          factor: float = 1.0, offset: float = 0.0, band: tuple | None = None, hlines: dict | None = None,
          dashed: tuple = (), envelope: bool = False, y_format: str = "~g", height: int = 210,
          axis_title: bool = False) -> alt.LayerChart:
    """One full-width panel of the trends page.

    Parameters
    ----------
    lines : dict
        ``label -> DataFrame`` (UTC index; ``value`` and optionally ``lo``, ``hi``). [stored unit]
    frame : TimeFrame
        Shared time axis and context layers.
    y_title : str
        Whole y-axis title with its unit, e.g. ``"k_ref [1/h]"``.
    colours : dict
        ``label -> colour`` of each line and of the band's label.
    factor, offset : float
        Shown value = stored value * factor + offset (the display unit). [-]
    band : (DataFrame, DataFrame, str), optional
        Lower and upper edges and the band's label.
    hlines : dict, optional
        ``label -> level`` dashed horizontal levels. [stored unit]
    dashed : tuple of str
        Labels of lines drawn dashed (projections, plans).
    envelope : bool
        Draw each line's bucket min/max (bucketed reads).
    y_format : str
        d3 format of the y ticks (``"~g"``: no trailing zeros, exponent only for extreme values).
    axis_title : bool
        Show the time axis title (on the bottom panel).
    """
    conv = lambda v: np.asarray(v, dtype=float) * factor + offset  # noqa: E731
    frames = []
    for label, f in lines.items():
        if f is None or not len(f):
            continue
        frames.append(pd.DataFrame({"t": frame.local(f.index), "value": conv(f["value"]),
                                    "lo": conv(f["lo"]) if "lo" in f else np.nan,
                                    "hi": conv(f["hi"]) if "hi" in f else np.nan, "series": label}))
    data = pd.concat(frames, ignore_index=True) if frames else \
        pd.DataFrame({"t": pd.DatetimeIndex([]), "value": [], "lo": [], "hi": [], "series": []})
    shown = set(data["series"]) | ({band[2]} if band is not None and len(band[0]) else set())
    domain = [k for k in colours if k in shown] or list(colours)
    scale = alt.Scale(domain=domain, range=[colours[k] for k in domain])
    colour = alt.Color("series:N", scale=scale, title=None, legend=alt.Legend(orient="top", direction="horizontal"))
    x = frame.x(axis_title)
    y_axis = alt.Axis(format=y_format, tickCount=4, minExtent=Y_AXIS_WIDTH, maxExtent=Y_AXIS_WIDTH, titleLimit=height)
    y = alt.Y("value:Q", title=y_title, scale=alt.Scale(zero=False), axis=y_axis)
    layers = [lay for lay in (_stretch_layer(frame, frame.unsteady, "not steady", CONTEXT["unsteady"], 0.55),
                              _stretch_layer(frame, frame.down, "unit down", CONTEXT["down"], 0.22)) if lay is not None]
    if band is not None and len(band[0]):
        lo, hi, label = band
        common = lo.index.intersection(hi.index)
        b = pd.DataFrame({"t": frame.local(common), "lo": conv(lo.loc[common, "value"]),
                          "hi": conv(hi.loc[common, "value"]), "series": label})
        layers.append(alt.Chart(b).mark_area(opacity=0.35).encode(
            x=x, y=alt.Y("lo:Q", title=y_title, scale=alt.Scale(zero=False), axis=y_axis), y2="hi:Q", color=colour))
    if envelope and len(data):
        layers.append(alt.Chart(data).mark_area(opacity=0.22).encode(
            x=x, y=alt.Y("lo:Q", title=y_title, scale=alt.Scale(zero=False), axis=y_axis), y2="hi:Q",
            color=colour, detail="series:N"))
    tip = [alt.Tooltip("t:T", format="%d %b %Y %H:%M", title="time"), alt.Tooltip("series:N", title="series"),
           alt.Tooltip("value:Q", format=".4~g", title="value")]
    solid = data[~data["series"].isin(dashed)]
    if len(solid) or not len(data):
        layers.append(alt.Chart(solid).mark_line(strokeWidth=1.6).encode(x=x, y=y, color=colour, tooltip=tip))
    if len(data) and data["series"].isin(dashed).any():
        layers.append(alt.Chart(data[data["series"].isin(dashed)]).mark_line(strokeWidth=1.8, strokeDash=[6, 4]).encode(
            x=x, y=y, color=colour, detail="series:N", tooltip=tip))
    for label, level in (hlines or {}).items():
        if level is None or not np.isfinite(level):
            continue
        layers.append(alt.Chart(pd.DataFrame({"value": [float(conv(level))], "label": [label]})).mark_rule(
            strokeDash=[6, 3], color="#4a4e69", strokeWidth=1.4).encode(
            y="value:Q", tooltip=[alt.Tooltip("label:N", title="level"), alt.Tooltip("value:Q", format=".4~g")]))
    ev = frame.events
    if ev is not None and len(ev):
        ev = ev[(ev["t"] >= frame.start) & (ev["t"] <= frame.end)]
        for kind, part in ev.groupby("kind"):
            e = pd.DataFrame({"t": frame.local(part["t"]), "event": kind, "what": part["label"].to_numpy()})
            layers.append(alt.Chart(e).mark_rule(color=CONTEXT.get(kind, "#333333"), strokeWidth=1.6,
                                                 strokeDash=DASHES.get(kind, [4, 2])).encode(
                x=x, tooltip=[alt.Tooltip("event:N"), alt.Tooltip("t:T", format="%d %b %Y %H:%M", title="time"),
                              alt.Tooltip("what:N")]))
    return alt.layer(*layers).properties(height=height)


__all__ = ["CONTEXT", "DASHES", "TimeFrame", "complement", "panel", "projection"]
