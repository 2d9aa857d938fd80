"""kinetrace.store: the results store, the only module that writes results.

SQLAlchemy 2 Core on SQLite (default, one file) or PostgreSQL (psycopg 3). The daily
report and the dashboard read from here; they never recompute the pipeline.

Quick start
-----------
>>> import pandas as pd
>>> from kinetrace.store import open_store, fingerprint
>>> store = open_store("sqlite://")                      # in memory; use sqlite:///out/results.sqlite
>>> ts = pd.date_range("2026-11-30", periods=3, freq="1min", tz="UTC")
>>> frame = pd.DataFrame({"conversion": [0.81, 0.82, 0.80]}, index=ts)
>>> with store.write_run((ts[0], ts[-1] + pd.Timedelta("1min")),
...                      config_fingerprint=fingerprint(b"demo config")) as run:
...     _ = run.write_series("R-210", frame, units={"conversion": "-"})
...     _ = run.set_watermark("R-210", ts[-1])
>>> store.series("R-210", ["conversion"]).iloc[:, 0].tolist()
[0.81, 0.82, 0.8]
>>> store.runs()["status"].tolist()
['complete']

Guarantees
----------
* **One run is one transaction.** :meth:`Store.write_run` commits the run record
  (status ``running``) first, then every result of the run and the status
  ``complete`` together. A run that raises is rolled back and marked ``failed``; a
  process killed mid-run leaves its run ``running`` without a finish time and the
  previous results untouched, and the next run to start marks it ``abandoned`` (each
  run holds a run lease that the OS releases when its process dies; see
  :meth:`Store.write_run`). The report shows the last ``complete`` run.
* **Idempotent windows.** Each run has a half-open window ``[start, end)``. Every
  ``write_*`` call first deletes the unit's rows that belong to the window (rule per
  table below), then inserts, in the same transaction, so re-running a window replaces
  its rows and never duplicates them.
* **UTC.** Time columns are ``timestamptz`` on PostgreSQL and integer microseconds since
  1970-01-01Z on SQLite; both keep microseconds exactly, and reads return tz-aware UTC
  timestamps. Naive time stamps are refused.
* **Watermarks** only move forward; an incremental run starts after
  :meth:`Store.watermark` of each unit.

Schema
------

=================== ================================================== ===================================
table               columns (primary key first)                        rows of a window replaced when
=================== ================================================== ===================================
runs                run_id; started, finished, status (running /        never (one row per run)
                    complete / failed / abandoned), config_fingerprint,
                    window_start, window_end, software_version,
                    message
series_keys         key_id; unique (unit_id, variable);                 never (dictionary of series)
                    unit_of_measure
series_values       (key_id, ts); value, run_id                         ts in [start, end)
daily_production    (unit_id, day); production_kg, target_kg,           the day overlaps [start, end)
                    gap_kg, gap_feed_kg (a), gap_conversion_kg (b),
                    gap_downtime_kg (c), gap_data_kg (d),
                    hours_with_data, run_id
parameters          (unit_id, as_of, name); value, std_error, ci_low,   as_of in (start, end]
                    ci_high, ci_level, unit_of_measure, method, run_id
alarms              (unit_id, kind, variable, detected); onset,         detected in [start, end); earlier
                    magnitude, magnitude_unit, evidence, state          alarms are updated by their key
                    (open / closed), closed, run_id, rate (of a drift,
                    magnitude_unit per day), last_check (last lab result)
data_quality        (unit_id, tag, period_start, measure);              period_start in [start, end)
                    period_end, count, run_id
forecasts           (unit_id, as_of); activity_now, activity_needed,    as_of in (start, end]
                    miss_earliest, miss_expected, miss_latest,
                    statement, run_id
whatif              (unit_id, as_of, lever); current_value,             as_of in (start, end]
                    proposed_value, safe_low, safe_high,
                    unit_of_measure, restores_target, note, run_id
series_summarised   key_id                                              never (series first written with
                                                                        ten rows per hour or more)
series_hourly       (key_id, hour); t_first, lo, hi, total, n           hours meeting [start, end) of the
                    (of the hour's non-NULL values)                     summarised series, from the rows
watermarks          unit_id; last_ts, run_id                            moves forward only
store_meta          key; value (schema_version)                         never
=================== ================================================== ===================================

The same table in markdown:

| table | primary key | other columns | replaced by a re-run of [start, end) |
|---|---|---|---|
| `runs` | `run_id` | `started`, `finished`, `status`, `config_fingerprint`, `window_start`, `window_end`, `software_version`, `message` | never |
| `series_keys` | `key_id` (unique `unit_id`, `variable`) | `unit_of_measure` | never |
| `series_values` | `key_id`, `ts` | `value`, `run_id` | `ts` in [start, end) |
| `daily_production` | `unit_id`, `day` | `production_kg`, `target_kg`, `gap_kg`, `gap_feed_kg`, `gap_conversion_kg`, `gap_downtime_kg`, `gap_data_kg`, `hours_with_data`, `run_id` | day overlaps the window |
| `parameters` | `unit_id`, `as_of`, `name` | `value`, `std_error`, `ci_low`, `ci_high`, `ci_level`, `unit_of_measure`, `method`, `run_id` | `as_of` in (start, end] |
| `alarms` | `unit_id`, `kind`, `variable`, `detected` | `onset`, `magnitude`, `magnitude_unit`, `evidence`, `state`, `closed`, `run_id`, `rate` [magnitude_unit/d], `last_check` | `detected` in [start, end) |
| `data_quality` | `unit_id`, `tag`, `period_start`, `measure` | `period_end`, `count`, `run_id` | `period_start` in [start, end) |
| `forecasts` | `unit_id`, `as_of` | `activity_now`, `activity_needed`, `miss_earliest`, `miss_expected`, `miss_latest`, `statement`, `run_id` | `as_of` in (start, end] |
| `whatif` | `unit_id`, `as_of`, `lever` | `current_value`, `proposed_value`, `safe_low`, `safe_high`, `unit_of_measure`, `restores_target`, `note`, `run_id` | `as_of` in (start, end] |
| `series_summarised` | `key_id` | (series first written with ten rows per hour or more) | never |
| `series_hourly` | `key_id`, `hour` | `t_first`, `lo`, `hi`, `total`, `n` of the hour's non-NULL values | hours meeting [start, end) of the summarised series, recomputed from the rows |
| `watermarks` | `unit_id` | `last_ts`, `run_id` | moves forward only |
| `store_meta` | `key` | `value` | never |

Keys are natural (no surrogate ids in result tables, except ``series_keys``, which
is never deleted from), so a re-run of a window reproduces the same rows. Masses are kg per day; gap = target - production (positive: shortfall) and equals
the sum of its four parts exactly (checked on write). Every result row carries the
``run_id`` that wrote it, so a number in the report traces to a row and a run.

Why the time series are long
----------------------------
The dashboard asks for one or a few variables of one unit over a time range; a year
of 1-minute results of ~20 variables is ~10 million values per unit. ``series_values``
is long, ``(key_id, ts, value, run_id)``, with primary key ``(key_id, ts)``, where
``key_id`` names one (unit, variable) in the small ``series_keys`` table:

* the query "variable v of unit u from t0 to t1" is one range scan of the primary-key
  index per variable, touching only the rows asked for; on SQLite the table is
  ``WITHOUT ROWID``, so rows are stored in key order and the scan reads contiguous
  pages;
* a wide table (one column per variable) would read every variable's bytes for each
  row fetched, and would need a schema change whenever a unit gains a variable (each
  reaction adds ``k_ref:<reaction>`` columns); a long table needs none;
* the integer ``key_id`` in place of repeated unit and variable strings halves the
  row size (about 20-30 bytes of payload per value);
* replacing a window is one range delete per unit on the same index.

References
----------
.. [1] PostgreSQL Global Development Group (2023). PostgreSQL 15 Documentation: COPY
   (binary format), used by the bulk writer on PostgreSQL.
"""

from .core import SUPPORTED_DIALECTS, Store, fingerprint, open_store
from .schema import ALARM_STATES, RUN_STATES, SCHEMA_VERSION, StoreError
from .records import DAILY_COLUMNS, GAP_PARTS
from .staging import StagedSeries, stage_series
from .writer import RunWriter

__all__ = [
    "ALARM_STATES", "DAILY_COLUMNS", "GAP_PARTS", "RUN_STATES", "SCHEMA_VERSION", "SUPPORTED_DIALECTS",
    "RunWriter", "StagedSeries", "Store", "StoreError", "fingerprint", "open_store", "stage_series",
]
