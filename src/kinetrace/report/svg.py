"""Small hand-made SVG charts for the report page (inline, no scripts, no external references)."""

from __future__ import annotations

import math
from html import escape

import numpy as np
import pandas as pd

from .wording import number, sig

#: Colours of the report (our own palette).
COLOURS = {
    "ink": "#1f2b33",
    "grid": "#d9dde0",
    "met": "#2e7d6b",       # production at or above target
    "short": "#b5532a",     # production below target
    "target": "#28323a",
    "line": "#3b5b92",
    "needed": "#b5532a",
}


def _nice_top(v: float) -> float:
    """Round an axis maximum up to a round multiple of a power of ten.

    >>> _nice_top(25200.0), _nice_top(0.87)
    (30000.0, 1.0)
    """
    if not math.isfinite(v) or v <= 0:
        return 1.0
    p = 10 ** math.floor(math.log10(v))
    for m in (1, 1.2, 1.5, 2, 2.5, 3, 4, 5, 6, 8, 10):
        if m * p >= v:
            return float(m * p)
    return float(10 * p)


def _svg_open(width: int, height: int, title: str) -> list[str]:
    return [f'<svg class="chart" width="{width}" height="{height}" viewBox="0 0 {width} {height}" role="img">',
            f"<title>{escape(title)}</title>"]


def _hline(x1: float, x2: float, y: float, colour: str, width: float = 1, extra: str = "") -> str:
    return (f'<line x1="{x1:.1f}" x2="{x2:.1f}" y1="{y:.1f}" y2="{y:.1f}" stroke="{colour}" '
            f'stroke-width="{width}"{extra}/>')


def _label(x: float, y: float, text: str, anchor: str) -> str:
    return (f'<text x="{x:.1f}" y="{y:.1f}" text-anchor="{anchor}" font-size="10" '
            f'fill="{COLOURS["ink"]}">{escape(text)}</text>')


def production_bars(rows: pd.DataFrame, *, title: str, width: int = 420, height: int = 170) -> str:
    """Bar chart of daily production with a tick at each day's target.

    Parameters
    ----------
    rows : DataFrame
        Columns ``day`` (date), ``production_kg`` and ``target_kg``. [kg]
    title : str
        Accessible title of the chart.

    Returns
    -------
    str
        An ``<svg>`` element.
    """
    left, right, top, bottom = 52, 8, 10, 26
    pw, ph = width - left - right, height - top - bottom
    prod = rows["production_kg"].to_numpy(dtype=float)
    targ = rows["target_kg"].to_numpy(dtype=float)
    both = np.concatenate([prod, targ])
    ymax = _nice_top(float(np.nanmax(both)) * 1.05 if np.isfinite(both).any() else 1.0)
    n = max(len(rows), 1)
    slot = pw / n
    y = lambda v: top + ph * (1 - v / ymax)  # noqa: E731
    out = _svg_open(width, height, title)
    for k in range(3):
        v = ymax * k / 2
        out.append(_hline(left, width - right, y(v), COLOURS["grid"]))
        out.append(_label(left - 4, y(v) + 4, f"{number(v / 1000, 1)} t", "end"))
    for i, (day, p, t) in enumerate(zip(rows["day"], prod, targ)):
        x0 = left + i * slot + slot * 0.15
        bw = slot * 0.7
        if math.isfinite(p):
            colour = COLOURS["met"] if not math.isfinite(t) or p >= t else COLOURS["short"]
            out.append(f'<rect x="{x0:.1f}" y="{y(max(p, 0)):.1f}" width="{bw:.1f}" '
                       f'height="{ph - (y(max(p, 0)) - top):.1f}" fill="{colour}">'
                       f"<title>{escape(str(day))}: {escape(number(p))} kg</title></rect>")
        if math.isfinite(t):
            out.append(_hline(x0 - 3, x0 + bw + 3, y(t), COLOURS["target"], 2))
        out.append(_label(x0 + bw / 2, height - 8, pd.Timestamp(day).strftime("%d %b").lstrip("0"), "middle"))
    out.append("</svg>")
    return "".join(out)


def trend_line(series: pd.Series, *, title: str, needed: float | None = None, width: int = 420,
               height: int = 150) -> str:
    """Line chart of a series (e.g. hourly catalyst activity) with an optional dashed floor.

    Parameters
    ----------
    series : Series
        Values on a tz-aware DatetimeIndex. [-]
    title : str
        Accessible title of the chart.
    needed : float, optional
        Level drawn as a dashed line (e.g. the activity needed for the target). [-]

    Returns
    -------
    str
        An ``<svg>`` element.
    """
    left, right, top, bottom = 52, 8, 10, 24
    pw, ph = width - left - right, height - top - bottom
    v = series.to_numpy(dtype=float)
    t = series.index.asi8.astype(float)
    levels = np.concatenate([v[np.isfinite(v)], [needed] if needed is not None and math.isfinite(needed) else []])
    lo, hi = (float(levels.min()), float(levels.max())) if len(levels) else (0.0, 1.0)
    pad = (hi - lo) * 0.1 or 0.05
    lo, hi = lo - pad, hi + pad
    t0, t1 = (t[0], t[-1]) if len(t) > 1 else (0.0, 1.0)
    xs = left + pw * (t - t0) / ((t1 - t0) or 1.0)
    ys = top + ph * (1 - (v - lo) / (hi - lo))
    out = _svg_open(width, height, title)
    for level in (lo + pad, hi - pad):
        yy = top + ph * (1 - (level - lo) / (hi - lo))
        out.append(_hline(left, width - right, yy, COLOURS["grid"]))
        out.append(_label(left - 4, yy + 4, sig(level, 3), "end"))
    if needed is not None and math.isfinite(needed):
        yy = top + ph * (1 - (needed - lo) / (hi - lo))
        out.append(_hline(left, width - right, yy, COLOURS["needed"], 1.5, ' stroke-dasharray="5 4"'))
    ok = np.isfinite(ys)
    if ok.sum() >= 2:
        pts = " ".join(f"{a:.1f},{b:.1f}" for a, b in zip(xs[ok], ys[ok]))
        out.append(f'<polyline points="{pts}" fill="none" stroke="{COLOURS["line"]}" stroke-width="1.5"/>')
    if len(series):
        for x, ts, anchor in ((left, series.index[0], "start"), (width - right, series.index[-1], "end")):
            out.append(_label(x, height - 6, ts.strftime("%d %b").lstrip("0"), anchor))
    out.append("</svg>")
    return "".join(out)
