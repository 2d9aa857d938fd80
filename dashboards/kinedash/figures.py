"""Altair figures of the kinetics and what-if pages: the safe-range scale, the Arrhenius plot and
the model-weight bars (the trend charts are in :mod:`.charts`).

The safe-range scale is drawn per lever on its own safe range, 0 % at the low limit and
100 % at the high one: a pale track, the last tenth at either end shaded as "near a limit",
the present operation as a hollow ring and the setting tried as a filled diamond, with the
limits written at the ends in the lever's display unit.
"""

from __future__ import annotations

import math

import altair as alt
import pandas as pd

from .ui import COLOURS

#: Share of the safe range at either end shaded as close to a limit. [-]
NEAR_LIMIT = 0.10


def nice_ticks(lo: float, hi: float, n: int = 5) -> list[float]:
    """About ``n`` round tick values covering ``[lo, hi]`` (steps of 1, 2 or 5 x 10^k).

    Parameters
    ----------
    lo, hi : float
        Data range. [any]
    n : int
        Ticks wanted (the result has between 2 and about n + 1). [-]

    >>> nice_ticks(2.9, 2.95)
    [2.9, 2.91, 2.92, 2.93, 2.94, 2.95]
    >>> nice_ticks(2.9151, 2.9319)
    [2.92, 2.925, 2.93]
    """
    if not (math.isfinite(lo) and math.isfinite(hi)) or hi <= lo:
        return [lo] if math.isfinite(lo) else []
    raw = (hi - lo) / max(n - 1, 1)
    mag = 10 ** math.floor(math.log10(raw))

    def count(step):
        return math.floor(hi / step + 1e-9) - math.ceil(lo / step - 1e-9) + 1

    # the round step (1, 2 or 5 x 10^k) whose tick count is closest to n; ties: the larger step
    step = min((m * mag for m in (10, 5, 2, 1)), key=lambda st: abs(count(st) - n))
    digits = max(0, -int(math.floor(math.log10(step))) + 1)
    first = math.ceil(lo / step - 1e-9) * step
    ticks = [round(first + i * step, digits) for i in range(count(step))]
    return ticks if len(ticks) >= 2 else [round(lo, digits + 1), round(hi, digits + 1)]


def safe_range_scale(rows: pd.DataFrame) -> alt.LayerChart:
    """The safe-range scale of the what-if.

    Parameters
    ----------
    rows : DataFrame
        One row per lever: ``lever`` (readable name), ``low``, ``high``, ``present``, ``tried``
        (display unit), ``unit`` (display unit name).
    """
    span = (rows["high"] - rows["low"]).where(rows["high"] > rows["low"])

    def pos(v):
        return (100.0 * (v - rows["low"]) / span).fillna(50.0).clip(0.0, 100.0)

    base = pd.DataFrame({"lever": rows["lever"], "unit": rows["unit"], "low": rows["low"], "high": rows["high"],
                         "present": rows["present"], "tried": rows["tried"],
                         "p_present": pos(rows["present"]), "p_tried": pos(rows["tried"])})
    base["low_text"] = [f"{v:.4g} {u}" for v, u in zip(base["low"], base["unit"])]
    base["high_text"] = [f"{v:.4g} {u}" for v, u in zip(base["high"], base["unit"])]
    y = alt.Y("lever:N", title=None, sort=list(rows["lever"]), axis=alt.Axis(labelFontSize=13, labelLimit=220))
    x_scale = alt.Scale(domain=[-22, 122])
    track = alt.Chart(base.assign(a=0.0, b=100.0)).mark_bar(height=16, color="#e9eef2").encode(
        x=alt.X("a:Q", scale=x_scale, title="position in the configured safe range [%]",
                axis=alt.Axis(values=[0, 25, 50, 75, 100])), x2="b:Q", y=y)
    ends = pd.concat([base.assign(a=0.0, b=100 * NEAR_LIMIT), base.assign(a=100 * (1 - NEAR_LIMIT), b=100.0)])
    near = alt.Chart(ends).mark_bar(height=16, color="#f2c57c").encode(
        x="a:Q", x2="b:Q", y=y, tooltip=[alt.Tooltip("lever:N"), alt.Tooltip("low_text:N", title="low limit"),
                                        alt.Tooltip("high_text:N", title="high limit")])
    lo_lab = alt.Chart(base).mark_text(align="right", dx=-6, fontSize=12, color=COLOURS["target"]).encode(
        x=alt.datum(0), y=y, text="low_text:N")
    hi_lab = alt.Chart(base).mark_text(align="left", dx=6, fontSize=12, color=COLOURS["target"]).encode(
        x=alt.datum(100), y=y, text="high_text:N")
    shape = alt.Scale(domain=["present operation", "setting tried"], range=["circle", "diamond"])
    colour = alt.Scale(domain=["present operation", "setting tried"], range=[COLOURS["target"], COLOURS["fit"]])
    marks = pd.concat([
        base.assign(what="present operation", p=base["p_present"], v=base["present"]),
        base.assign(what="setting tried", p=base["p_tried"], v=base["tried"])])
    marks["value_text"] = [f"{v:.4g} {u}" for v, u in zip(marks["v"], marks["unit"])]
    present = alt.Chart(marks[marks["what"] == "present operation"]).mark_point(
        size=260, filled=False, strokeWidth=3).encode(
        x="p:Q", y=y, shape=alt.Shape("what:N", scale=shape, title=None),
        color=alt.Color("what:N", scale=colour, title=None, legend=alt.Legend(orient="bottom")),
        tooltip=[alt.Tooltip("what:N", title=" "), "lever:N", alt.Tooltip("value_text:N", title="value")])
    tried = alt.Chart(marks[marks["what"] == "setting tried"]).mark_point(size=200, filled=True).encode(
        x="p:Q", y=y, shape=alt.Shape("what:N", scale=shape, title=None),
        color=alt.Color("what:N", scale=colour, title=None),
        tooltip=[alt.Tooltip("what:N", title=" "), "lever:N", alt.Tooltip("value_text:N", title="value")])
    return alt.layer(track, near, lo_lab, hi_lab, present, tried).properties(height=48 * len(rows) + 40)


def arrhenius_figure(points: pd.DataFrame, lines: pd.DataFrame, y_title: str) -> alt.LayerChart:
    """ln k against 1000/T: the steady points, coloured by time, and the stored fit's lines.

    Parameters
    ----------
    points : DataFrame
        ``ts`` (UTC), ``inv_t_k`` (1000/T [1/K]), ``ln_k`` [-], ``t_c`` (T [degC]).
    lines : DataFrame
        ``inv_t_k``, ``ln_k``, ``line`` (label: the fitted Ea, the ends of its interval).
    y_title : str
        Axis title of ln k.
    """
    ticks = nice_ticks(float(points["inv_t_k"].min()), float(points["inv_t_k"].max()), 5)
    digits = max(0, max(len(f"{t:.6f}".rstrip("0").split(".")[1]) for t in ticks)) if ticks else 3
    x = alt.X("inv_t_k:Q", title="1000 / T [1/K]", scale=alt.Scale(zero=False, nice=False),
              axis=alt.Axis(values=ticks, format=f".{digits}f", labelOverlap=True))
    pts = alt.Chart(points).mark_circle(size=30, opacity=0.8).encode(
        x=x, y=alt.Y("ln_k:Q", title=y_title, scale=alt.Scale(zero=False), axis=alt.Axis(tickCount=6)),
        color=alt.Color("ts:T", title="time", scale=alt.Scale(
            range=["#b8d4e0", COLOURS["measured"]],
            domain=[points["ts"].min().isoformat(), points["ts"].max().isoformat()])),
        tooltip=[alt.Tooltip("ts:T", title="bucket start", format="%Y-%m-%d %H:%M"),
                 alt.Tooltip("t_c:Q", title="T [degC]", format=".2f"), alt.Tooltip("ln_k:Q", format=".4f")])
    dash = alt.Scale(domain=list(dict.fromkeys(lines["line"])), range=[[1, 0], [5, 3], [5, 3]])
    fit = alt.Chart(lines).mark_line(color=COLOURS["fit"]).encode(
        x="inv_t_k:Q", y="ln_k:Q", detail="line:N",
        strokeDash=alt.StrokeDash("line:N", scale=dash, title=None, legend=alt.Legend(orient="bottom")),
        tooltip=["line:N"])
    return alt.layer(pts, fit).properties(height=320)


def weight_bars(table: pd.DataFrame, what: str) -> alt.Chart:
    """Akaike weights as bars from 0 to 1 (longer is better supported).

    Parameters
    ----------
    table : DataFrame
        ``candidate``, ``weight`` [-], ``delta`` [-].
    what : str
        Axis title of the candidates.
    """
    order = list(table.sort_values("weight", ascending=False)["candidate"])
    bars = alt.Chart(table).mark_bar(color=COLOURS["measured"]).encode(
        x=alt.X("weight:Q", title="Akaike weight (share of support, 0 to 1)", scale=alt.Scale(domain=[0, 1])),
        y=alt.Y("candidate:N", title=what, sort=order),
        tooltip=[alt.Tooltip("candidate:N"), alt.Tooltip("weight:Q", format=".3f"),
                 alt.Tooltip("delta:Q", title="difference to the best", format=".1f")])
    text = bars.mark_text(align="left", dx=4, color=COLOURS["target"]).encode(
        text=alt.Text("weight:Q", format=".3f"))
    return (bars + text).properties(height=34 * len(table) + 30)

