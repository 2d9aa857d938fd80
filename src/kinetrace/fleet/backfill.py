"""The backfill: the daily check of every unit over a long period, mapped over units x time chunks on Dask.

A backfill is how a changed model or configuration is applied to history. Per unit x chunk a
worker reads and screens the readings (with context on both sides) and returns the chunk's grid
rows (:func:`kinetrace.fleet.chunks.chunk_rows`); this is most of the work of a check. Once all
chunks of a unit are in, one task per unit puts them end to end and runs the rest
(:func:`finish_from_chunks`): role frame, steady-state test and back-calculation of every
interval, reconciliation, the whole-history kinetic calibration and the re-derivation of every
interval with its parameters, and monitoring (:func:`kinetrace.pipeline.daily.finish_unit`). The
results therefore equal those of one whole run of the period.

Faults: a task whose worker dies is re-run on another worker (the scheduler reschedules it;
``retries`` more for errors raised in the task); every result is written by this process alone,
after the task has returned, so a lost worker leaves nothing half-written and nothing twice. A
unit whose data cannot be used is reported with the reason while the others complete.
"""

from __future__ import annotations

import logging
from dataclasses import dataclass, field
from pathlib import Path

import pandas as pd

from .chunks import DEFAULT_CHUNK, DEFAULT_CONTEXT, Chunk, chunk_rows, plan_chunks
from .cluster import DEFAULT_MEMORY_LIMIT, open_client, scheduler_address
from .output import (done_windows, encode_chunk, load_chunk, run_fingerprint, save_chunk, stage_chunks,
                     write_parquet, write_unit)
from .progress import FleetProgress

log = logging.getLogger("kinetrace")


@dataclass
class BackfillOutcome:
    """What a backfill did."""

    period: tuple
    units_done: list = field(default_factory=list)        # unit ids whose results were written now
    units_skipped: list = field(default_factory=list)     # found complete for the same fingerprint
    failed: dict = field(default_factory=dict)            # unit id -> reason
    chunks_run: int = 0                                   # chunks read by a worker in this run
    chunks_cached: int = 0                                # chunks taken from the cache of an earlier run
    transactions: int = 0                                 # store transactions committed
    results: dict = field(default_factory=dict)           # unit id -> UnitResult (keep_results=True)
    address: str = ""                                     # scheduler used

    @property
    def ok(self) -> bool:
        """True when no unit failed."""
        return not self.failed


def _guarded(fn, *args, **kwargs):
    """Run ``fn`` on a worker; a problem with the unit's inputs comes back as ("error", reason)."""
    from ..errors import KinetraceError

    try:
        return ("ok", fn(*args, **kwargs))
    except KinetraceError as exc:
        return ("error", str(exc))
    except Exception as exc:  # noqa: BLE001 - reported per unit; the other units go on
        return ("error", f"internal error: {type(exc).__name__}: {exc}")


def finish_from_chunks(config_path: str, unit_id: str, parts: list[dict]):
    """The rest of the check of one unit from its chunks put end to end (runs on a worker).

    Parameters
    ----------
    config_path : str
    unit_id : str
    parts : list of dict
        :func:`kinetrace.fleet.chunks.chunk_rows` of every chunk, in time order.

    Returns
    -------
    kinetrace.pipeline.daily.UnitResult
        With ``data`` None (the readings stay with the chunks).
    """
    from ..config import load_config, unit_model
    from ..pipeline.backcalc import back_calculate
    from ..pipeline.daily import finish_unit
    from ..pipeline.analyzer_step import track_analyzers
    from ..pipeline.roles import role_frame

    cfg = load_config(config_path)
    model = unit_model(next(u for u in cfg.units if u.id == unit_id))
    values = pd.concat([p["values"] for p in parts])
    if values.index.duplicated().any():
        raise RuntimeError(f"unit {unit_id}: chunks overlap at {values.index[values.index.duplicated()][0]}")
    valid = pd.concat([p["valid"] for p in parts])
    volume = pd.concat([p["volume"] for p in parts])
    analyzers = track_analyzers(values, valid, model)     # analyzers against the lab, as check_unit does
    roles = role_frame(analyzers.values, valid, volume, model)
    measured = back_calculate(roles, model)
    quality = sum_quality([p["quality"] for p in parts])
    return finish_unit(cfg, model, roles, measured, quality, analyzers=analyzers)


def read_chunk(config_path: str, unit_id: str, start, end, context, *, period=None) -> dict:
    """:func:`kinetrace.fleet.chunks.chunk_rows` with its cache files already encoded (on the worker)."""
    payload = chunk_rows(config_path, unit_id, start, end, context, period=period)
    payload["cache"] = encode_chunk(payload)
    return payload


def finish_and_stage(config_path: str, unit_id: str, parts: list[dict], chunks=None):
    """:func:`finish_from_chunks`, and its series staged per chunk for the store (on the worker).

    Returns
    -------
    (UnitResult, dict or None)
        The result, and :func:`kinetrace.fleet.output.stage_chunks` of it for ``chunks`` (None
        when ``chunks`` is None: no store).
    """
    result = finish_from_chunks(config_path, unit_id, parts)
    return result, (None if chunks is None else stage_chunks(result, chunks))


def sum_quality(frames: list[pd.DataFrame]) -> pd.DataFrame:
    """Per-tag quality counts of several reads added up (numeric columns). [-]

    >>> a = pd.DataFrame({"good": [3, 4]}, index=["FI-1", "TI-1"])
    >>> sum_quality([a, a])["good"].tolist()
    [6, 8]
    """
    num = [f.select_dtypes("number") for f in frames]
    out = num[0]
    for f in num[1:]:
        out = out.add(f, fill_value=0)
    return out


def run_backfill(config_path, *, since, until, chunk: str = DEFAULT_CHUNK, context: str = DEFAULT_CONTEXT,
                 units=None, workers: int = 2, address: str | None = None, client=None, store: str | None = "config",
                 parquet=None, cache_dir=None, progress_stream=None, progress_every: float = 2.0,
                 retries: int = 2, memory_limit: str = DEFAULT_MEMORY_LIMIT,
                 keep_results: bool = False, quiet: bool = False, resume: bool = True) -> BackfillOutcome:
    """Run the check of every unit over ``[since, until)`` in units x time chunks on Dask distributed.

    Parameters
    ----------
    config_path : path
        Plant configuration TOML.
    since, until : str or Timestamp
        Backfill period, on the grid. [UTC]
    chunk, context : str
        Chunk length, and the context read on each side of a chunk. [pandas time span]
    units : list of str, optional
        Only these units; default every unit of the config.
    workers : int
        Worker processes of the embedded ``LocalCluster``. [-]
    address : str, optional
        Scheduler of an existing cluster (else the environment or the config, see
        :func:`kinetrace.fleet.cluster.scheduler_address`; else a local cluster).
    client : distributed.Client, optional
        An open client to use (tests); overrides ``address`` and ``workers``.
    store : str or None
        ``"config"``: the config's results store; another string: a SQLAlchemy URL; None: none.
    parquet : path, optional
        Also write each unit's time series as Parquet partitioned by unit and month.
    cache_dir : path, optional
        Chunk cache; default ``<analysis.output_dir>/backfill-chunks``.
    progress_stream : file, optional
        Progress lines; default stderr.
    retries : int
        Extra attempts of a task that raised. [-]
    memory_limit : str
        Memory limit per local worker. [Dask size string]
    keep_results : bool
        Keep each unit's UnitResult in the outcome (tests; costs memory).
    quiet : bool
        Keep Dask distributed's INFO lines out of the log (the command line).
    resume : bool
        Skip units and chunks found done for the same run fingerprint (default); False re-derives
        everything (after corrections to the historian, which the fingerprint does not see).

    Returns
    -------
    BackfillOutcome
    """
    from .. import store as result_store
    from ..config import load_config, resolve_path, store_url
    from ..errors import KinetraceError

    config_path = str(Path(config_path).resolve())
    cfg = load_config(config_path)
    known = [u.id for u in cfg.units]
    chosen = list(units) if units else known
    unknown = [u for u in chosen if u not in known]
    if unknown:
        raise KinetraceError(f"{config_path}: unknown unit(s) {', '.join(unknown)}; the config has {', '.join(known)}")
    try:
        edges = plan_chunks(since, until, chunk=chunk, grid=cfg.analysis.grid)
    except ValueError as exc:
        raise KinetraceError(f"backfill period: {exc}") from None
    period = (edges[0][0], edges[-1][1])
    out_dir = resolve_path(config_path, cfg.analysis.output_dir)
    cache = Path(cache_dir) if cache_dir else Path(out_dir) / "backfill-chunks"
    url = None if store is None else (store_url(cfg, config_path) if store == "config" else store)
    db = result_store.open_store(url) if url is not None else None
    raw = Path(config_path).read_bytes()
    fps = {u: (run_fingerprint(raw, u, period=period, chunk=chunk, context=context),
               run_fingerprint(raw, u, period=period, chunk=chunk, context=context, kind="unit")) for u in chosen}
    plan = {u: [Chunk(u, i, a, b) for i, (a, b) in enumerate(edges)] for u in chosen}
    outcome = BackfillOutcome(period=period)
    progress = FleetProgress(len(chosen), len(chosen) * len(edges), stream=progress_stream, every=progress_every)
    try:
        done = done_windows(db) if (db is not None and resume) else set()
        todo = []
        for u in chosen:
            if (fps[u][1], period[0], period[1]) in done:
                outcome.units_skipped.append(u)
                for _ in plan[u]:
                    progress.chunk(skipped=True)
                progress.unit()
            else:
                todo.append(u)
        if todo:
            target = scheduler_address(cfg, address=address)
            if client is not None:
                _drive(client, config_path, todo, plan, fps, period, context, cache, db, done, parquet,
                       retries, progress, outcome, keep_results, resume)
            else:
                with open_client(target, workers=workers, memory_limit=memory_limit, quiet=quiet) as cl:
                    outcome.address = str(cl.scheduler.address)
                    _drive(cl, config_path, todo, plan, fps, period, context, cache, db, done, parquet,
                           retries, progress, outcome, keep_results, resume)
    finally:
        if db is not None:
            db.close()
    progress.show(force=True)
    return outcome


def _drive(client, config_path, todo, plan, fps, period, context, cache, db, done, parquet, retries,
           progress, outcome, keep_results, resume=True) -> None:
    """Submit the chunks, then each unit's finishing task as its chunks come in; write as results arrive."""
    from distributed import as_completed

    parts: dict[str, dict[int, dict]] = {u: {} for u in todo}
    what = {}
    futures = []
    for u in todo:
        for c in plan[u]:
            cached = load_chunk(cache, fps[u][0], u, c) if resume else None
            if cached is not None:
                parts[u][c.index] = cached
                outcome.chunks_cached += 1
                progress.chunk(skipped=True)
                continue
            f = client.submit(_guarded, read_chunk, config_path, u, c.start, c.end, context, period=period,
                              retries=retries, pure=False, key=f"kt-chunk-{u}-{c.key}-{fps[u][0][7:19]}")
            what[f.key] = ("chunk", u, c)
            futures.append(f)
    ac = as_completed(futures)

    def finish_if_ready(u):
        if u in outcome.failed or len(parts[u]) < len(plan[u]):
            return
        ordered = [parts[u][i] for i in range(len(plan[u]))]
        to_stage = None if db is None else [c for c in plan[u] if (fps[u][0], c.start, c.end) not in done]
        f = client.submit(_guarded, finish_and_stage, config_path, u, ordered, to_stage, retries=retries, pure=False,
                          key=f"kt-unit-{u}-{fps[u][1][7:19]}")
        what[f.key] = ("unit", u, None)
        ac.add(f)

    for u in todo:
        finish_if_ready(u)              # every chunk of the unit was cached
    for f in ac:
        kind, u, c = what[f.key]
        try:
            status, value = f.result()
        except Exception as exc:  # noqa: BLE001 - e.g. the task's workers kept dying (KilledWorker)
            status, value = "error", f"task lost: {type(exc).__name__}: {exc}"
        f.release()
        if kind == "chunk":
            if status == "ok":
                save_chunk(cache, fps[u][0], u, c, value)
                value.pop("cache", None)            # the finishing task needs the rows, not their files
                parts[u][c.index] = value
                outcome.chunks_run += 1
            elif u not in outcome.failed:
                outcome.failed[u] = f"chunk {c.start:%Y-%m-%d %H:%M} to {c.end:%Y-%m-%d %H:%M} UTC: {value}"
                log.warning("unit %s failed: %s", u, outcome.failed[u])
                progress.unit(failed=True)
            progress.chunk()
            if status == "ok":
                finish_if_ready(u)
            continue
        if status != "ok":
            outcome.failed[u] = value
            log.warning("unit %s failed: %s", u, value)
            progress.unit(failed=True)
            continue
        value, staged = value
        quality = {i: p["quality"] for i, p in parts[u].items()}
        if db is not None:
            outcome.transactions += write_unit(db, value, plan[u], quality, period=period, chunk_fp=fps[u][0],
                                               unit_fp=fps[u][1], done=done, staged=staged)
        if parquet is not None:
            write_parquet(parquet, u, value.series)
        outcome.units_done.append(u)
        if keep_results:
            outcome.results[u] = value
        parts[u] = {}
        progress.unit()
