"""Plain-text quality summary of a :class:`UnitData`, for ``kinetrace check`` and logs.

One line per tag: readings read, how many were used, how many each rule
refused (only rules that refused something), and the grid intervals that are
missing, carried forward or flagged. Followed by the source-level counts and the
notes, so the summary shows where every reading went.
"""

from __future__ import annotations

from .fates import fate_names
from .unitdata import UnitData


def quality_text(data: UnitData, max_notes: int = 20) -> str:
    """The quality summary of one unit as text.

    Parameters
    ----------
    data : UnitData
    max_notes : int
        Notes listed at most (the count of the rest is given).

    Returns
    -------
    str
    """
    q = data.quality
    lines = [f"unit {data.unit_id}: {len(data.values)} intervals of {data.grid:g} s"
             + (f" from {data.values.index[0]} " if len(data.values) else "")]
    refused = [f for f in fate_names()[1:] if f in q and q[f].sum()]
    width = max([len(t) for t in q.index] + [3])
    for tag, r in q.iterrows():
        parts = [f"{int(r['rows_read'])} read", f"{int(r['good'])} good"]
        parts += [f"{int(r[f])} {f}" for f in refused if r[f]]
        if r.get("out_of_order", 0):
            parts.append(f"{int(r['out_of_order'])} out of order (sorted)")
        if r.get("outside_window", 0):
            parts.append(f"{int(r['outside_window'])} outside the window")
        iv = [f"{int(r['valid_intervals'])}/{int(r['intervals'])} intervals valid"]
        for k, label in (("missing_intervals", "missing"), ("carried_intervals", "carried"),
                         ("flagged_intervals", "flagged")):
            if r.get(k, 0):
                iv.append(f"{int(r[k])} {label}")
        lines.append(f"  {tag:<{width}}  " + ", ".join(parts) + "; " + ", ".join(iv))
    rep = data.source_report
    src = [f"{k.replace('_', ' ')}: {v}" for k, v in rep.items()
           if k not in ("unknown_tags",) and isinstance(v, int) and v]
    if src:
        lines.append("  source: " + ", ".join(src))
    for p in data.notes[:max_notes]:
        lines.append(f"  note: {p}")
    if len(data.notes) > max_notes:
        lines.append(f"  ... and {len(data.notes) - max_notes} more notes")
    return "\n".join(lines)
