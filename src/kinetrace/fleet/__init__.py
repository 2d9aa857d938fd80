"""kinetrace.fleet: backfill of many units and long histories on Dask distributed.

The daily check of one unit (:func:`kinetrace.pipeline.daily.check_unit`) is split in two:

* per **unit x time chunk** (parallel, on Dask workers): read the chunk's readings together
  with leading context rows, combine them into the role frame and run the steady-state test
  (:mod:`kinetrace.fleet.chunks`); the context rows are dropped again, so the chunks put end to
  end are the rows one whole read would give;
* per **unit** (after its chunks): reconciliation, the whole-history kinetic calibration, the
  re-derivation of every interval with the fitted parameters, and the monitoring stage
  (:func:`kinetrace.pipeline.daily.finish_unit`), exactly as one whole run does them.

Results go through the store's single writer (the client process), one transaction per unit and
chunk plus one per unit for its daily, parameter, alarm, forecast and what-if rows
(:mod:`kinetrace.fleet.output`). :func:`run_backfill` is the entry point.
"""

from .backfill import BackfillOutcome, run_backfill
from .chunks import plan_chunks

__all__ = ["BackfillOutcome", "plan_chunks", "run_backfill"]
