"""``kinetrace backfill``: the command's work, kept here so that ``cli.py`` only declares it."""

from __future__ import annotations

import sys


def backfill_command(config, *, since, until, chunk: str, workers: int, scheduler: str | None,
                     parquet, units, memory_limit: str, redo: bool = False, echo=print) -> int:
    """Run a backfill and say what it did; returns the exit code.

    0 every unit's results written (or found written by an earlier run of the same fingerprint);
    1 a unit failed (its reason is printed; the others completed). Input problems raise
    :class:`kinetrace.errors.KinetraceError` (exit 2 in the command line).
    """
    from ..errors import KinetraceError
    from .backfill import run_backfill

    if since is None or until is None:
        raise KinetraceError("a backfill needs --since and --until (the period to re-derive)")
    if workers < 1:
        raise KinetraceError(f"--workers {workers}: must be at least 1")
    outcome = run_backfill(config, since=since, until=until, chunk=chunk, workers=workers, address=scheduler,
                           parquet=parquet, units=units or None, memory_limit=memory_limit,
                           progress_stream=sys.stderr, quiet=True, resume=not redo)
    where = f" on {outcome.address}" if outcome.address else ""
    echo(f"Backfill {outcome.period[0]:%Y-%m-%d %H:%M} to {outcome.period[1]:%Y-%m-%d %H:%M} UTC{where}: "
         f"{len(outcome.units_done)} unit(s) written, {len(outcome.units_skipped)} found done, "
         f"{len(outcome.failed)} failed; {outcome.chunks_run} chunk(s) read, {outcome.chunks_cached} from the cache; "
         f"{outcome.transactions} store transaction(s).")
    if parquet:
        echo(f"Parquet time series under {parquet} (unit=<id>/month=<YYYY-MM>).")
    for unit, reason in outcome.failed.items():
        echo(f"  - unit {unit} failed: {reason}")
    return 1 if outcome.failed else 0
