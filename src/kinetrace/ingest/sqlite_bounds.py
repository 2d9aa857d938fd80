"""The rowid range a SQLite read of one unit and window must cover (for the range-wise bulk read).

A window over an ISO-text time column also reads the rows whose stamp is missing or of another
shape (they are parsed and placed afterwards), so the range holds the rowids of the window's rows
(an index range search per tag of ``(tag, timestamp)``) and of those odd rows. Finding the odd rows
takes a scan of every index entry of the tags, the whole history: done once per state of the
file and remembered, so a backfill that reads a year in monthly chunks scans it once, not twelve
times. The state is the database file's and its write-ahead log's size and modification time: a
file written since is scanned again.
"""

from __future__ import annotations

import os
from collections import OrderedDict

#: Remembered odd-row bounds: (file state, table, tags, condition) -> (min rowid, max rowid).
_ODD: OrderedDict = OrderedDict()
_ODD_KEEP = 64


def file_state(database: str) -> tuple | None:
    """(path, size, mtime) of a database file and of its ``-wal`` file; None for no plain file."""
    if not database or database == ":memory:":
        return None
    try:
        st = os.stat(database)
    except OSError:
        return None
    try:
        wal = os.stat(database + "-wal")
        wal_state = (wal.st_size, wal.st_mtime_ns)
    except OSError:
        wal_state = None
    return (os.path.realpath(database), st.st_size, st.st_mtime_ns, wal_state)


def _merge(pairs) -> tuple:
    lo = [p[0] for p in pairs if p is not None and p[0] is not None]
    hi = [p[1] for p in pairs if p is not None and p[1] is not None]
    return (min(lo) if lo else None, max(hi) if hi else None)


def rowid_bounds(raw, binary, *, tbl: str, tags: list, tag_col: str, window: list[str], window_args: list,
                 odd: str | None, database: str) -> tuple:
    """``(min rowid, max rowid)`` of the rows a read must see, ``(None, None)`` if none.

    Parameters
    ----------
    raw : sqlite3.Connection
    binary : kinetrace.ingest.sqlite_arrow.ReaderPool or None
        Run the per-tag-group searches side by side on its connections when it has several.
    tbl : str
        Quoted table name.
    tags : list of str
    tag_col : str
        Quoted tag column.
    window : list of str
        SQL conditions of the time window (``?`` placeholders), empty for an open window.
    window_args : list
        Their arguments.
    odd : str or None
        SQL condition of the rows read whatever their stamp (missing or odd-shaped), or None.
    database : str
        Path of the database file (the key of the remembered odd-row bounds).
    """
    def where(group, extra):
        return " AND ".join([f"{tag_col} IN ({','.join('?' * len(group))})"] + extra)

    def search(extra, extra_args):
        threads = binary.threads if binary is not None else 1
        if threads > 1 and len(tags) > 1:
            queries = [(f"SELECT min(rowid), max(rowid) FROM {tbl} WHERE {where(g, extra)}", list(g) + extra_args)
                       for g in (tags[i::threads] for i in range(threads))]
            try:
                return binary.bounds(queries)
            except Exception:  # noqa: BLE001 - any driver problem: the one query below on this connection
                pass
        return raw.execute(f"SELECT min(rowid), max(rowid) FROM {tbl} WHERE {where(tags, extra)}",
                           list(tags) + extra_args).fetchone()

    found = [search(window, window_args)]
    if odd is not None:
        state = file_state(database)
        key = None if state is None else (state, tbl, tag_col, tuple(tags), odd)
        if key is not None and key in _ODD:
            _ODD.move_to_end(key)
            found.append(_ODD[key])
        else:
            b = tuple(search([odd], []))
            found.append(b)
            if key is not None:
                _ODD[key] = b
                while len(_ODD) > _ODD_KEEP:
                    _ODD.popitem(last=False)
    return _merge(found)
