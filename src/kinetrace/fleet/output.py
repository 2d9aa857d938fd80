"""Where a backfill's results go: the results store (its single writer), Parquet, and the chunk cache.

* **Store.** One transaction per unit and chunk (the chunk's time series and its data-quality
  counts) and one per unit (parameters, alarms, daily production, forecast, what-if, watermark),
  each through :meth:`kinetrace.store.Store.write_run`, whose window replaces what an earlier run
  wrote there: a re-run never duplicates rows. The run record's fingerprint is the *run
  fingerprint* (:func:`run_fingerprint`); a complete run with the same fingerprint and window
  marks the work as done, and a re-run skips it.
* **Parquet** (optional): the unit's time series as ``<dir>/unit=<id>/month=<YYYY-MM>/part-0.parquet``
  (hive-style partitions), each file replaced whole, for analysis in notebooks.
* **Chunk cache**: the chunk rows a worker produced (tag values, validity, volume, quality), one Parquet
  pair per unit x chunk under the run fingerprint, written to a temporary name and renamed, so a
  killed run leaves whole files only; a re-run reads them instead of reading the historian again.
"""

from __future__ import annotations

import dataclasses
import os
from pathlib import Path

import pandas as pd

from ..store import fingerprint


def run_fingerprint(config_bytes: bytes, unit: str, *, period, chunk, context, kind: str = "chunks") -> str:
    """Fingerprint of a backfill's work on one unit: configuration, software, period, chunking.

    Parameters
    ----------
    config_bytes : bytes
        The configuration file.
    unit : str
        Unit id.
    period : (Timestamp, Timestamp)
        Backfill period. [UTC]
    chunk, context : str
        Chunk length and context. [pandas time span]
    kind : {"chunks", "unit"}
        Which transactions the fingerprint marks.

    Returns
    -------
    str
        ``"sha256:..."``.
    """
    from .. import __version__

    tail = f"\nbackfill {kind} unit={unit} period={period[0].isoformat()}/{period[1].isoformat()} " \
           f"chunk={chunk} context={context} version={__version__}"
    return fingerprint(bytes(config_bytes) + tail.encode("utf-8"))


def done_windows(store) -> set[tuple[str, pd.Timestamp, pd.Timestamp]]:
    """(fingerprint, window start, window end) of every complete run of the store."""
    runs = store.runs(status="complete")
    if not len(runs):
        return set()
    return {(f, pd.Timestamp(a), pd.Timestamp(b))
            for f, a, b in zip(runs["config_fingerprint"], runs["window_start"], runs["window_end"])}


def stage_chunks(result, chunks) -> dict:
    """Each chunk's slice of a unit's time series staged for the store (runs on the worker).

    Parameters
    ----------
    result : kinetrace.pipeline.daily.UnitResult
    chunks : list of Chunk

    Returns
    -------
    dict
        Chunk index -> :class:`kinetrace.store.StagedSeries` of the rows in ``[start, end)``, as
        :func:`kinetrace.pipeline.daily.write_unit_rows` would write them; the writer only inserts.
    """
    from ..pipeline.daily import _series_for_store
    from ..store import stage_series

    frame, units = _series_for_store(result.series)
    uid = result.model.id
    return {c.index: stage_series(frame.loc[(frame.index >= c.start) & (frame.index < c.end)], units, unit=uid)
            for c in chunks}


def write_unit(store, result, chunks, quality: dict, *, period, chunk_fp: str, unit_fp: str, done: set,
               staged: dict | None = None) -> int:
    """Write one unit's backfill results to the store; returns the number of transactions committed.

    Parameters
    ----------
    store : kinetrace.store.Store
    result : kinetrace.pipeline.daily.UnitResult
        The unit's results over the whole period.
    chunks : list of Chunk
    quality : dict
        Chunk index -> per-tag quality counts of that chunk's read. [-]
    period : (Timestamp, Timestamp)
        The backfill period. [UTC]
    chunk_fp, unit_fp : str
        Run fingerprints of the chunk transactions and of the unit's findings.
    done : set
        :func:`done_windows` of the store; work found there is skipped.
    staged : dict, optional
        :func:`stage_chunks` of the result (computed on the worker): the chunk transactions insert
        these instead of laying the series out here.
    """
    from ..pipeline.daily import write_unit_findings, write_unit_rows

    series = result.series
    n = 0
    for c in chunks:
        if (chunk_fp, c.start, c.end) in done:
            continue
        part = dataclasses.replace(result, series=series.loc[(series.index >= c.start) & (series.index < c.end)],
                                   quality=quality[c.index])
        with store.write_run((c.start, c.end), config_fingerprint=chunk_fp) as run:
            if len(part.series):
                write_unit_rows(run, part, period=(c.start, c.end),
                                staged=None if staged is None else staged[c.index])
        n += 1
    with store.write_run(period, config_fingerprint=unit_fp) as run:
        write_unit_findings(run, result, period)
    return n + 1


def write_parquet(folder, unit: str, series: pd.DataFrame) -> list[Path]:
    """Write a unit's time series as Parquet partitioned by unit and month (UTC); returns the files.

    Parameters
    ----------
    folder : path
        Root of the dataset.
    unit : str
        Unit id (the ``unit=`` partition).
    series : DataFrame
        Time series on a UTC index, columns in SI. [SI]
    """
    from ..pipeline.daily import _series_for_store

    frame, _ = _series_for_store(series)
    frame.index.name = "timestamp"
    month = frame.index.strftime("%Y-%m")
    files = []
    for m in sorted(set(month)):           # one file per month, a handful per year
        path = Path(folder) / f"unit={unit}" / f"month={m}" / "part-0.parquet"
        _atomic_parquet(frame.loc[month == m], path)
        files.append(path)
    return files


def _atomic_parquet(frame: pd.DataFrame, path: Path) -> None:
    _atomic_bytes(frame.to_parquet(), path)


def cache_paths(folder, fp: str, unit: str, chunk) -> tuple[Path, Path]:
    """Paths of a chunk's cached rows and quality counts."""
    base = Path(folder) / fp.replace("sha256:", "")[:16] / _safe(unit)
    return base / f"{chunk.key}.rows.parquet", base / f"{chunk.key}.quality.parquet"


def encode_chunk(payload: dict) -> tuple[bytes, bytes]:
    """A chunk's rows and quality counts as the two Parquet files of the cache (on the worker)."""
    rows = pd.concat([payload["values"], payload["valid"].add_prefix("valid:"),
                      payload["volume"].rename("__volume__")], axis=1)
    rows.columns = [str(c) for c in rows.columns]
    q = payload["quality"].copy()
    q.columns = [str(c) for c in q.columns]
    return rows.to_parquet(), q.to_parquet()


def save_chunk(folder, fp: str, unit: str, chunk, payload: dict) -> None:
    """Cache a chunk's rows (the quality file is written last: its presence marks the pair whole).

    ``payload["cache"]``, where present, holds :func:`encode_chunk` of it, made on the worker."""
    rows_path, q_path = cache_paths(folder, fp, unit, chunk)
    rows_bytes, q_bytes = payload["cache"] if "cache" in payload else encode_chunk(payload)
    _atomic_bytes(rows_bytes, rows_path)
    _atomic_bytes(q_bytes, q_path)


def _atomic_bytes(data: bytes, path: Path) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_name(f".{path.name}.{os.getpid()}.tmp")
    tmp.write_bytes(data)
    os.replace(tmp, path)


def load_chunk(folder, fp: str, unit: str, chunk) -> dict | None:
    """A cached chunk's rows, or None when it is not (wholly) cached."""
    rows_path, q_path = cache_paths(folder, fp, unit, chunk)
    if not (rows_path.exists() and q_path.exists()):
        return None
    rows = pd.read_parquet(rows_path)
    volume = rows.pop("__volume__")
    vcols = [c for c in rows.columns if c.startswith("valid:")]
    valid = rows[vcols].astype(bool)
    valid.columns = [c[len("valid:"):] for c in vcols]
    values = rows.drop(columns=vcols)
    return {"values": values, "valid": valid, "volume": volume.rename(None), "quality": pd.read_parquet(q_path),
            "context_rows": 0}


def _safe(name: str) -> str:
    return "".join(ch if ch.isalnum() or ch in "-_." else "_" for ch in name)
