"""Binary reads of SQLite rowid ranges as Arrow columns (ADBC SQLite driver).

SQLite hands REAL values over as doubles and text as UTF-8, with no text round trip
for the numbers. The driver infers each column's type from the rows of a batch, so every
range is read as exactly one batch; a range whose columns do not come back with the types
the ingest expects (a text in the value column, a number in the time column, ...) is
refused here and the caller reads it by its text path, which flags such readings one by
one. Nothing is lost either way: a range is either taken whole from here or not at all.

:class:`ReaderPool` reads several ranges at once, one connection per thread (the driver
releases the GIL while SQLite steps through the rows), and hands them back in rowid order,
so the collector sees exactly what one sequential read gives.
"""

from __future__ import annotations

from collections import deque
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path
from queue import SimpleQueue

import adbc_driver_sqlite.dbapi as _adbc
import pyarrow as pa
import pyarrow.compute as pc

#: The ADBC option that sets the rows per batch (and so the rows its type inference sees).
_BATCH_ROWS = "adbc.sqlite.query.batch_rows"


class RangeReader:
    """Read rowid ranges of one SQLite database file through ADBC, read-only.

    Parameters
    ----------
    path : str or Path
        The database file.
    rows_per_range : int
        Most rows one range can hold (its rowid span); the batch size is set to it so
        that a range comes back as one batch.
    """

    def __init__(self, path, rows_per_range: int):
        uri = Path(path).resolve().as_uri() + "?mode=ro"
        self._conn = _adbc.connect(uri)
        self._rows = int(rows_per_range)

    @staticmethod
    def available(database: str | None) -> bool:
        """Whether the database is a file (not in memory), which this reader can open."""
        return bool(database) and database != ":memory:" and Path(database).is_file()

    def read(self, sql: str, args: list, names: list[str], text_names: list[str]) -> dict | None:
        """Columns of one range keyed by ``names``, or None where a column's type is not the
        expected one (numbers for the value column, text for ``text_names``) or the driver
        fails; empty strings become nulls, as on the text path."""
        try:
            cur = self._conn.cursor()
            try:
                cur.adbc_statement.set_options(**{_BATCH_ROWS: str(self._rows + 1)})
                cur.execute(sql, args)
                table = cur.fetch_arrow_table()
            finally:
                cur.close()
        except Exception:  # noqa: BLE001 - any driver problem: the caller's text path reads the range
            return None
        out = {}
        for name, col in zip(names, table.columns):
            col = col.combine_chunks() if isinstance(col, pa.ChunkedArray) else col
            t = col.type
            if name in text_names:
                if pa.types.is_null(t):
                    col = pa.nulls(len(col), pa.string())
                elif not pa.types.is_string(t):
                    return None
                elif pc.any(pc.equal(col, "")).as_py():
                    col = pc.if_else(pc.equal(col, ""), pa.scalar(None, pa.string()), col)
            elif pa.types.is_null(t) or pa.types.is_integer(t):
                col = pc.cast(col, pa.float64())
            elif not pa.types.is_floating(t):
                return None
            out[name] = col
        return out

    def close(self) -> None:
        self._conn.close()


class ReaderPool:
    """Several :class:`RangeReader` of one file, each used by one thread at a time.

    Parameters
    ----------
    path : str or Path
        The database file.
    rows_per_range : int
        As for :class:`RangeReader`.
    threads : int
        Connections (and threads) reading at once; at most ``2 * threads`` ranges are read
        ahead of the consumer, which bounds the memory held. [-]
    """

    def __init__(self, path, rows_per_range: int, threads: int):
        self.threads = max(1, int(threads))
        self._free: SimpleQueue = SimpleQueue()
        self._all = []
        try:
            for _ in range(self.threads):
                r = RangeReader(path, rows_per_range)
                self._all.append(r)
                self._free.put(r)
        except Exception:
            self.close()
            raise
        self._pool = ThreadPoolExecutor(self.threads, thread_name_prefix="kinetrace-sqlite") \
            if self.threads > 1 else None

    def _with_reader(self, fn, *args):
        r = self._free.get()
        try:
            return fn(r, *args)
        finally:
            self._free.put(r)

    def bounds(self, queries: list[tuple[str, list]]) -> tuple:
        """``(min, max)`` over the one-row results ``(min, max)`` of the ``(sql, args)`` queries
        (run side by side), ignoring NULLs; ``(None, None)`` if all are NULL."""
        def one(r, sql, args):
            cur = r._conn.cursor()
            try:
                cur.execute(sql, args)
                return cur.fetchone()
            finally:
                cur.close()
        rows = list(self._pool.map(lambda q: self._with_reader(one, *q), queries)) if self._pool \
            else [self._with_reader(one, *q) for q in queries]
        lo = [r[0] for r in rows if r[0] is not None]
        hi = [r[1] for r in rows if r[1] is not None]
        return (min(lo) if lo else None, max(hi) if hi else None)

    def read_all(self, sql: str, arg_lists, names: list[str], text_names: list[str]):
        """Yield ``(args, columns or None)`` for each argument list, in the given order (see
        :meth:`RangeReader.read`), with up to ``2 * threads`` ranges read ahead."""
        def task(args):
            return self._with_reader(lambda r: r.read(sql, args, names, text_names))
        if self._pool is None:
            for args in arg_lists:
                yield args, task(args)
            return
        ahead = deque()
        it = iter(arg_lists)
        for args in it:
            ahead.append((args, self._pool.submit(task, args)))
            if len(ahead) >= 2 * self.threads:
                break
        while ahead:
            args, fut = ahead.popleft()
            nxt = next(it, None)
            if nxt is not None:
                ahead.append((nxt, self._pool.submit(task, nxt)))
            yield args, fut.result()

    def close(self) -> None:
        if getattr(self, "_pool", None) is not None:
            self._pool.shutdown(wait=True, cancel_futures=True)
        for r in self._all:
            r.close()
