"""``read_unit``: one unit's historian readings -> the canonical :class:`UnitData`.

Steps: tag units are checked and their SI maps built (a bad unit is a config
error naming the tag); the source is read for the window (pushed down into SQL);
each tag's readings are placed in time (daylight-saving policy), sorted,
screened (:mod:`~kinetrace.ingest.screening`), shifted by the tag's dead time,
converted to SI and aligned to the grid (:mod:`~kinetrace.ingest.align`).
Every reading read ends in exactly one fate, counted in ``quality``.

Window and look-back: readings in ``[since, until)`` make the grid; to carry
analyzer and lab values and hold continuous ones across ``since``, readings up
to the longest ``max_age`` / hold limit before ``since`` are read as well, and
up to the longest dead time after ``until``.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from ..config.load import resolve_path
from ..config.model import UnitModel, unit_model
from ..config.schema import PlantConfig, Tag, Unit
from ..errors import ConfigError, IngestError, Problem
from . import align, screening
from .collect import Collector
from .conversion import unit_scales
from .csv_source import read_csv_source
from .fates import (AMBIGUOUS_TIME, BAD_QUALITY, BAD_TIME, NONEXISTENT_TIME, BAD_VALUE, CONFLICT, FATE_NAMES, FROZEN, GOOD, N_FATES,
                    OUT_OF_RANGE, SPIKE)
from .sql_source import read_sql_source, source_tag_names
from .timestamps import NAT, place_repeated_hour
from .unitdata import UnitData, check_unit_data

#: Fates whose presence in an interval marks that interval not valid.
TAINTING = (BAD_QUALITY, BAD_VALUE, CONFLICT, OUT_OF_RANGE, SPIKE, FROZEN)
#: Largest share of flagged readings an interval may hold and still count as valid. [-]
MAX_FLAGGED_SHARE = 0.5
_DAY = 86_400 * 10**9


def _to_ns(t) -> int:
    if t is None:
        return NAT
    ts = pd.Timestamp(t)
    if ts.tzinfo is None:
        ts = ts.tz_localize("UTC")
    return int(ts.tz_convert("UTC").as_unit("ns").value)


def find_unit(cfg: PlantConfig, unit: UnitModel | Unit | str) -> tuple[int, Unit]:
    """The configured unit (and its position) for an id, a Unit or a UnitModel."""
    uid = unit if isinstance(unit, str) else unit.id
    for i, u in enumerate(cfg.units):
        if u.id == uid:
            return i, u
    raise ConfigError("config", [Problem("units", f"no unit {uid!r}; units are {[u.id for u in cfg.units]!r}")])


#: Longest default hold of a continuous reading (when no max_gap is configured). [s]
DEFAULT_HOLD_CAP = 6 * 3600.0


def _hold_limit(tag: Tag, source, grid: float, ts: np.ndarray) -> float:
    """How long a continuous reading holds: configured, else 5 sampling intervals (at least one grid
    step, at most max(grid, DEFAULT_HOLD_CAP)). [s]"""
    if tag.max_gap is not None:
        return tag.max_gap
    if source.max_gap is not None:
        return source.max_gap
    if ts.size > 1:
        med = _median_step(ts) / 1e9
        return min(max(grid, 5.0 * med), max(grid, DEFAULT_HOLD_CAP))
    return grid


def _median_step(ts: np.ndarray) -> float:
    """``np.median(np.diff(ts))`` exactly; without a selection over all steps when the median is the
    median of a sample of them (regular sampling, where most steps are equal). [ns]"""
    d = np.diff(ts)
    sample = np.sort(d[:: max(1, d.size // 1000)])
    c = sample[sample.size // 2]
    below, upto = np.count_nonzero(d < c), np.count_nonzero(d <= c)
    if below <= (d.size - 1) // 2 and d.size // 2 < upto:    # both middle steps equal c
        return float(c)
    return float(np.median(d))


def _lookback(unit: Unit, source, grid: float) -> float:
    lb = grid
    for t in unit.tags:
        if t.sampling == "continuous":
            lb = max(lb, t.max_gap or source.max_gap or max(grid, DEFAULT_HOLD_CAP))
        else:
            lb = max(lb, t.max_age or 0.0)
        lb = max(lb, t.dead_time + grid)
    return lb


def read_unit(cfg: PlantConfig, unit: UnitModel | Unit | str, *, config_path, since=None, until=None,
              grid: float | None = None, engine=None, complete_only: bool = False) -> UnitData | None:
    """Read, screen, convert and align one unit's historian readings.

    Parameters
    ----------
    cfg : PlantConfig
        Validated configuration.
    unit : UnitModel, Unit or str
        The unit, or its id.
    config_path : str or Path
        The config file; relative source paths are taken from its folder.
    since, until : datetime, str or Timestamp, optional
        Window ``[since, until)``; a naive time is taken as UTC. Default: all data.
    grid : float, optional
        Grid step. [s] Default ``cfg.analysis.grid``.
    engine : sqlalchemy.Engine, optional
        An engine to use for a SQL source (tests, connection pools).
    complete_only : bool
        Without ``until``: end the grid before the interval that holds the latest
        reading (it is still filling); used by incremental pulls.

    Returns
    -------
    UnitData
        Or None when ``complete_only`` leaves no complete interval after ``since``.

    Raises
    ------
    ConfigError
        A tag's unit cannot be converted; the SQL URL variable is not set.
    IngestError
        The source cannot be read (file missing or empty, header wrong, database
        down), or no reading at all exists for a tag the computation needs.
    """
    idx_u, u = find_unit(cfg, unit)
    model = unit if isinstance(unit, UnitModel) else unit_model(u)
    scales = unit_scales(u, dict(zip(model.species, model.molar_masses)), where=f"units[{idx_u}]",
                         source=str(config_path))
    grid = float(grid or cfg.analysis.grid)
    since_ns, until_ns = _to_ns(since), _to_ns(until)
    if since_ns != NAT and until_ns != NAT and until_ns <= since_ns:
        raise ValueError(f"until ({until}) must be after since ({since})")
    look = int(_lookback(u, cfg.source, grid) * 1e9)
    max_dead = int(max((t.dead_time for t in u.tags), default=0.0) * 1e9)
    lo = since_ns - look if since_ns != NAT else NAT
    hi = until_ns + max_dead if until_ns != NAT else NAT
    all_tags = {t.tag for uu in cfg.units for t in uu.tags}
    col = Collector(u.tags, cfg.source, all_tags, window=(lo, hi))
    src = cfg.source
    base = Path(config_path).resolve().parent
    if src.kind == "csv":
        report = read_csv_source(resolve_path(config_path, src.path), src, col, {t.tag: t for t in u.tags})
    else:
        report = read_sql_source(src, col, [t.tag for t in u.tags], lo, hi, base_dir=base, engine=engine)
    col.finish(_source_name(cfg))
    if src.kind != "csv" and not src.query and _missing_required(u, model, col):
        # the tag list was pushed down: ask the table which names it holds, for the hint
        col.seen_names |= source_tag_names(src, base_dir=base, engine=engine)
    _release_memory()
    return assemble(cfg, u, model, scales, col, report, grid=grid, since_ns=since_ns, until_ns=until_ns,
                    complete_only=complete_only)


def _release_memory() -> None:
    """Hand memory freed by the parsers back to the system before alignment (lower peak)."""
    import pyarrow as pa

    for pool in (pa.default_memory_pool(), pa.system_memory_pool()):
        try:
            pool.release_unused()
        except (AttributeError, NotImplementedError):
            pass
    try:   # glibc keeps freed blocks of the parser threads' arenas unless asked
        import ctypes

        ctypes.CDLL("libc.so.6").malloc_trim(0)
    except (OSError, AttributeError):
        pass


def _resolve_repeated_hour(ts, fate, second):
    if not second:
        return ts, fate
    pos = np.concatenate([p for p, _ in second])
    sec = np.concatenate([s for _, s in second])
    keep = fate[pos] == AMBIGUOUS_TIME
    pos, sec = pos[keep], sec[keep]
    if pos.size == 0:
        return ts, fate
    first = ts[pos]
    place = place_repeated_hour(first // _DAY, first)
    ts, fate = ts.copy(), fate.copy()
    ts[pos[place == 1]] = sec[place == 1]
    fate[pos[place >= 0]] = GOOD
    return ts, fate


def assemble(cfg, u: Unit, model: UnitModel, scales, col: Collector, report: dict, *, grid: float,
             since_ns: int = NAT, until_ns: int = NAT, complete_only: bool = False) -> UnitData | None:
    """Screen and align the collected readings of a unit (the pure part of :func:`read_unit`).

    With ``complete_only`` and no ``until``, the grid ends where the interval holding the
    latest reading starts; None if that leaves no interval after ``since``.
    """
    shift_max = int(max((t.dead_time for t in u.tags), default=0.0) * 1e9)
    src = cfg.source
    names = col.names
    # grid: the window, else the span of the time stamps read (so the grid is known before screening,
    # and each tag is screened, aligned and freed in turn)
    spans = [(b.tmin, b.tmax) for b in col.buffers if b.tmin != NAT]
    first = since_ns if since_ns != NAT else (min(a for a, _ in spans) if spans else NAT)
    if until_ns == NAT and complete_only and spans:
        step = int(round(grid * 1e9))     # end where the interval holding the latest reading starts
        until_ns = (max(z for _, z in spans) - shift_max) // step * step
        if first != NAT and until_ns <= first:
            return None
    last = until_ns - 1 if until_ns != NAT else (max(z for _, z in spans) if spans else NAT)
    counts = [b.n for b in col.buffers]
    problems = []
    for key, tags in _missing_required(u, model, col).items():
        problems.append(Problem(", ".join(tags), f"no readings in the source for {_window_text(since_ns, until_ns)}; "
                                f"unit {u.id} needs a {key[0]} tag{' for ' + key[1] if key[1] else ''} "
                                f"(check the tag name against the historian{_nearest_tags(tags, col)})"))
    if first == NAT and not problems:
        problems.append(Problem(f"unit {u.id}", f"no readings with a usable time stamp for "
                                f"{_window_text(since_ns, until_ns)}{_rejected_stamps(col)}"))
    if problems:
        raise IngestError(_source_name(cfg), problems + [Problem(w, m) for w, m in col.notes[:20]])
    edges = align.grid_edges(first, last, grid)
    if until_ns != NAT and edges[-1] > until_ns and (until_ns - edges[0]) % int(grid * 1e9) == 0:
        edges = edges[edges <= until_ns]
    index = pd.DatetimeIndex(edges[:-1].view("datetime64[ns]"), name="timestamp").tz_localize("UTC")
    nb = len(index)
    # column-major, so each tag's column is one contiguous run of memory, written once
    values = np.empty((nb, len(names)), order="F")
    valid = np.empty((nb, len(names)), dtype=bool, order="F")
    rows = []
    flagged = []
    # configured events (catalyst change, shutdown, restart, feed change ...) stop a carried lab value
    # or feed assay: a sample taken at or before one describes the plant before it
    resets = np.sort(np.array([_to_ns(c) for c in model.event_times], dtype=np.int64))
    for i, t in enumerate(u.tags):
        # one tag at a time, its reading buffers freed before the next: the buffers shrink as the frame fills
        ts, val, fate, second = col.arrays(i)
        ts, fate = _resolve_repeated_hour(ts, fate, second)
        late, ts, (val, fate) = screening.sort_readings(ts, val, fate)
        frozen = None if t.sampling == "lab" else (t.frozen_after if t.frozen_after is not None else src.frozen_after)
        fate = screening.screen(ts, val, fate, valid_range=t.valid_range, max_rate=t.max_rate, frozen_after=frozen)
        shift = np.int64(round(t.dead_time * 1e9))
        fc = np.bincount(fate, minlength=N_FATES)
        row = {"rows_read": int(ts.size)}
        row.update({FATE_NAMES[k]: int(fc[k]) for k in range(N_FATES)})
        tainted = _tainted(ts, fate, edges, shift)
        g = fate == GOOD
        if fc[GOOD] < ts.size:
            bad = ~g
            flagged.append((i, ts[bad], val[bad], fate[bad]))
            del bad
        tg = ts[g]
        tg -= shift
        del ts, fate
        xg = scales[t.tag].to_si(val[g])
        del val, g
        if t.sampling == "continuous":
            v, _ = align.time_weighted_mean(tg, xg, edges, _hold_limit(t, src, grid, tg))
            carried = np.zeros(nb, bool)
        else:
            v, carried = align.sample_mean_carry(tg, xg, edges, t.max_age, resets)
        del tg, xg
        values[:, i] = v
        missing = np.isnan(v)
        del v
        valid[:, i] = ok = ~missing & ~tainted
        row.update(outside_window=int(col.outside[i]), out_of_order=int(late), intervals=nb,
                   missing_intervals=int(missing.sum()), carried_intervals=int(carried.sum()),
                   flagged_intervals=int((tainted & ~missing).sum()), valid_intervals=int(ok.sum()))
        rows.append(row)
        del missing, carried, tainted, ok
    if not any(r["good"] for r in rows):
        raise IngestError(_source_name(cfg), [Problem(f"unit {u.id}", "no usable readings of any of its tags for "
                                                      f"{_window_text(since_ns, until_ns)}")]
                          + _refusals(col, rows) + [Problem(w, m) for w, m in col.notes[:20]])
    vdf = pd.DataFrame(values, index=index, columns=names, copy=False)
    mdf = pd.DataFrame(valid, index=index, columns=names, copy=False)
    del values, valid
    quality = pd.DataFrame(rows, index=pd.Index(names, name="tag"))
    notes = [Problem(w, m) for w, m in col.notes]
    for i, t in enumerate(u.tags):
        if counts[i] == 0:
            notes.append(Problem(t.tag, f"no readings for {_window_text(since_ns, until_ns)}; its column is all missing"))
    for name, n in sorted(col.unknown.items()):
        notes.append(Problem(name, f"{n} reading(s) of a tag that is in no unit of the config; counted, not used"))
    volume = _volume(u, model, vdf, mdf)
    roles: dict = {}
    for t in u.tags:
        roles.setdefault((t.role, t.species), []).append(t.tag)
    details = pd.DataFrame([(d.where, d.tag, FATE_NAMES[d.fate], d.message) for d in col.details],
                           columns=["where", "tag", "fate", "message"])
    flagged_df = _flagged_frame(names, flagged)
    report = dict(report, rows_total=col.rows_total, rows_other_units=col.other_unit,
                  rows_unknown_tags=int(sum(col.unknown.values())), rows_without_tag=col.no_tag,
                  unknown_tags=dict(col.unknown))
    data = UnitData(unit_id=u.id, values=vdf, valid=mdf, quality=quality, roles=roles, volume=volume,
                    flagged=flagged_df, details=details, notes=notes, source_report=report, grid=grid)
    check_unit_data(data)
    return data


_TAINT = np.isin(np.arange(N_FATES), TAINTING)


def _tainted(ts: np.ndarray, fate: np.ndarray, edges: np.ndarray, shift: int) -> np.ndarray:
    """Intervals where flagged readings are more than MAX_FLAGGED_SHARE of a tag's readings.

    ``ts`` sorted [ns], ``shift`` the tag's dead time [ns]. One bad row among sixty leaves a
    good mean of the other fifty-nine; the count of all readings is only taken in intervals
    that hold a flagged one.
    """
    nb = len(edges) - 1
    out = np.zeros(nb, bool)
    t_flag = ts[_TAINT[fate]]
    if t_flag.size == 0:
        return out
    n_flag = align.count_per_interval(t_flag - shift, edges)
    k = np.flatnonzero(n_flag)
    # readings in [edge_k, edge_k+1) after the shift; readings without a time (NAT) sort first
    n_all = np.searchsorted(ts, edges[k + 1] + shift) - np.searchsorted(ts, edges[k] + shift)
    out[k] = n_flag[k] > MAX_FLAGGED_SHARE * np.maximum(n_all, 1)
    return out


def _flagged_frame(names: list[str], flagged: list) -> pd.DataFrame:
    """One row per refused reading: tag, UTC time (NaT if unreadable), value [tag unit], fate."""
    if not flagged:
        return pd.DataFrame({"tag": pd.Series(dtype=str), "timestamp": pd.Series(dtype="datetime64[ns, UTC]"),
                             "value": pd.Series(dtype=float), "fate": pd.Series(dtype=str)})
    tag = np.concatenate([np.full(len(t), i) for i, t, _, _ in flagged])
    ts = np.concatenate([t for _, t, _, _ in flagged])
    fate = np.concatenate([f for _, _, _, f in flagged])
    return pd.DataFrame({
        "tag": pd.Categorical.from_codes(tag, categories=names).astype(str),
        "timestamp": pd.DatetimeIndex(ts.view("datetime64[ns]")).tz_localize("UTC"),
        "value": np.concatenate([v for _, _, v, _ in flagged]),
        "fate": pd.Categorical.from_codes(fate, categories=[FATE_NAMES[k] for k in range(N_FATES)]).astype(str)})


def _refusals(col: Collector, rows: list[dict]) -> list[Problem]:
    """Why each tag's readings were refused: counts by fate and the first located message."""
    out = []
    for name, r in zip(col.names, rows):
        if not r["rows_read"]:
            continue
        text = ", ".join(f"{r[FATE_NAMES[k]]} {FATE_NAMES[k]}" for k in range(1, N_FATES) if r[FATE_NAMES[k]])
        first = next((d for d in col.details if d.tag == name), None)
        more = f" (first: {first.where}: {first.message})" if first else ""
        out.append(Problem(name, f"all {r['rows_read']} readings refused: {text}{more}"))
    return out


def _volume(u: Unit, model: UnitModel, values: pd.DataFrame, valid: pd.DataFrame) -> pd.Series:
    if model.fixed_volume is not None:
        return pd.Series(model.fixed_volume, index=values.index, name="volume")
    if u.volume.volume_tag is not None:           # a volume transmitter, already in m3
        return pd.Series(values[u.volume.volume_tag].to_numpy(), index=values.index, name="volume")
    tab = model.level_table
    lv = values[u.volume.level_tag].to_numpy()
    vol = np.interp(lv, tab[:, 0], tab[:, 1])
    vol = np.where((lv >= tab[0, 0]) & (lv <= tab[-1, 0]), vol, np.nan)
    return pd.Series(vol, index=values.index, name="volume")


def _required(u: Unit, model: UnitModel) -> dict:
    by: dict = {}
    for t in u.tags:
        by.setdefault((t.role, t.species), []).append(t.tag)
    req = {k: v for k, v in by.items() if k in (("feed_flow", None), ("outlet_flow", None), ("temperature", None),
                                                  ("outlet_conc", u.key_reactant))}
    if u.volume.level_tag:
        req[("level", None)] = [u.volume.level_tag]
    if u.volume.volume_tag:
        req[("volume", None)] = [u.volume.volume_tag]
    return req


def _missing_required(u: Unit, model: UnitModel, col: Collector) -> dict:
    """The needed roles (role, species) none of whose tags has a reading, with their tags."""
    counts = {name: b.n for name, b in zip(col.names, col.buffers)}
    return {k: tags for k, tags in _required(u, model).items() if all(counts[t] == 0 for t in tags)}


def _nearest_tags(tags: list[str], col: Collector, n: int = 3) -> str:
    """``"; nearest tag names in the source: 'A', 'B', 'C'"`` (difflib, Ratcliff/Obershelp similarity), or ""."""
    import difflib

    pool = sorted(col.seen_names - col.all_tags)     # a tag of some unit's config is not the one renamed
    near = []
    for t in tags:
        near += [m for m in difflib.get_close_matches(t, pool, n=n, cutoff=0.0) if m not in near]
    return f"; nearest tag names in the source: {', '.join(map(repr, near[:n]))}" if near else ""


def _rejected_stamps(col: Collector, n: int = 3) -> str:
    """Up to ``n`` refused time stamps with their line and reason, for a "no usable time stamp" message."""
    seen, out = set(), []
    for d in col.details:
        if d.fate in (BAD_TIME, NONEXISTENT_TIME) and d.message not in seen:
            seen.add(d.message)
            out.append(f"{d.where}: {d.message}")
            if len(out) == n:
                break
    return ("; rejected stamps: " + "; ".join(out)) if out else ""


def _window_text(since_ns, until_ns) -> str:
    f = (lambda n: "open" if n == NAT else pd.Timestamp(n, tz="UTC").isoformat())
    return f"[{f(since_ns)}, {f(until_ns)})"


def _source_name(cfg) -> str:
    s = cfg.source
    return s.path if s.kind in ("csv", "sqlite") else f"database from ${s.url_env}"
