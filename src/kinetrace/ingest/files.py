"""Input files as the readers may open them: regular files only, lines and decompression bounded.

No input may exhaust memory or hang the check. A named pipe blocks its reader until
a writer comes (perhaps never), and a device such as ``/dev/zero`` never ends, so
only regular files are opened (:func:`refuse_special_file`, which looks with
``stat`` and never opens). A line is read at most ``source.max_line_bytes`` at a
time (:func:`read_line`, :func:`long_line_spans`): a longer one is skipped in
bounded pieces and counted as a bad line, never held whole. A gzip file may
expand to at most ``source.max_decompressed_bytes`` (:class:`BoundedReader`).
"""

from __future__ import annotations

import os
import stat
from pathlib import Path

import numpy as np

from ..errors import IngestError, Problem

_KINDS = ((stat.S_ISFIFO, "a named pipe (FIFO)"), (stat.S_ISCHR, "a character device"),
          (stat.S_ISBLK, "a block device"), (stat.S_ISSOCK, "a socket"), (stat.S_ISDIR, "a folder"))


def special_file_kind(path) -> str | None:
    """What a path is when it is not a regular file (following links), else None.

    >>> special_file_kind("/dev/null")
    'a character device'
    """
    mode = os.stat(path).st_mode
    if stat.S_ISREG(mode):
        return None
    return next((text for test, text in _KINDS if test(mode)), "not a regular file")


def refuse_special_file(path) -> None:
    """Raise an :class:`IngestError` naming ``path`` unless it is a regular file (after links).

    Raises
    ------
    IngestError
        The path is a named pipe, a device, a socket or a folder.
    """
    kind = special_file_kind(path)
    if kind is not None:
        raise IngestError(str(path), [Problem("(file)", (
            f"{path} is {kind}, not a regular file; only regular files are read (a pipe or a device "
            "may block or never end): export the readings to a file and set source.path to it"))])


class BoundedReader:
    """A binary file object that refuses to hand over more than ``limit`` bytes in total.

    Wraps a decompressing reader (gzip), so that a small file that expands without end
    (a 'zip bomb', or a corrupt stream) stops with a message instead of filling memory or
    running for hours.

    Parameters
    ----------
    f : file object
        Binary reader with ``read(n)`` and ``readline(n)``.
    limit : int
        Most bytes handed over. [bytes]
    name : str
        File name for the message.
    """

    def __init__(self, f, limit: int, name: str):
        self._f, self.limit, self.name, self.total = f, int(limit), name, 0

    def _count(self, data: bytes) -> bytes:
        self.total += len(data)
        if self.total > self.limit:
            raise IngestError(self.name, [Problem("(file)", (
                f"decompresses to more than source.max_decompressed_bytes ({self.limit} bytes); "
                "if the export really is that large, raise the limit or split it into smaller files"))])
        return data

    def read(self, n: int) -> bytes:
        return self._count(self._f.read(n))

    def readline(self, n: int) -> bytes:
        return self._count(self._f.readline(n))

    def close(self) -> None:
        self._f.close()

    def __enter__(self):
        return self

    def __exit__(self, *exc) -> None:
        self.close()


#: A line that is too long is replaced by this single-field line before parsing: it is then a
#: bad line of one field, counted with its line number and never parsed.
LONG_LINE = b"\x00\x01\x00"   # control bytes only: never a delimiter, a quote or a blank
#: Size of the pieces a too-long line is skipped in. [bytes]
_DRAIN = 1 << 20


def drain_line(f) -> None:
    """Skip the rest of the current line in bounded pieces (through its line break, or to the end)."""
    while True:
        piece = f.readline(_DRAIN)
        if not piece or piece.endswith(b"\n"):
            return


def read_line(f, max_bytes: int) -> tuple[bytes, bool]:
    """Read one line of at most ``max_bytes`` bytes (not counting its line break).

    Returns
    -------
    (bytes, bool)
        The line (with its line break, if any) and False; or ``b""`` and True when the
        line was longer (it has been skipped, never held whole; if its first 4 KiB hold a
        carriage return, those 4 KiB instead of ``b""``, so the caller can name bare-CR line ends).
    """
    piece = f.readline(max_bytes + 1)
    if piece.endswith(b"\n") or len(piece) <= max_bytes:
        return piece, False
    drain_line(f)
    return piece[:4096] if b"\r" in piece[:4096] else b"", True


def complete_block(f, buf: bytes, max_bytes: int) -> bytes:
    """Complete a block that ends inside a line, reading at most ``max_bytes`` more; a last line
    that is longer than ``max_bytes`` is replaced by :data:`LONG_LINE` (and skipped in the file)."""
    if not buf or buf.endswith(b"\n"):
        return buf
    start = buf.rfind(b"\n") + 1
    have = len(buf) - start
    if have <= max_bytes:
        tail, too_long = read_line(f, max_bytes - have)
        if not too_long:
            return buf + tail
    else:
        drain_line(f)
    return buf[:start] + LONG_LINE + b"\n"


def long_line_spans(buf: bytes, max_bytes: int) -> list[tuple[int, int]]:
    """(start, end) byte offsets of the lines of ``buf`` longer than ``max_bytes`` (end at the line break).

    Cheap when there are none: a line longer than ``max_bytes`` holds a whole aligned window of
    ``max_bytes // 2`` bytes without a line break, so only a block with such a window is scanned.

    >>> long_line_spans(b"a,1\\n" + b"x" * 40 + b"\\nb,2\\n", 16)
    [(4, 44)]
    >>> long_line_spans(b"a,1\\nb,2\\n", 16)
    []
    """
    if len(buf) <= max_bytes:
        return []
    half = max(1, max_bytes // 2)
    if all(buf.find(b"\n", k, k + half) >= 0 for k in range(0, len(buf) - half + 1, half)):
        return []
    nl = np.flatnonzero(np.frombuffer(buf, dtype=np.uint8) == 10)
    starts = np.r_[0, nl + 1]
    ends = np.r_[nl, len(buf)]
    long = np.flatnonzero(ends - starts > max_bytes)
    return [(int(starts[k]), int(ends[k])) for k in long]


def replace_long_lines(buf: bytes, max_bytes: int) -> bytes:
    """``buf`` with each line longer than ``max_bytes`` replaced by :data:`LONG_LINE` (same line count)."""
    spans = long_line_spans(buf, max_bytes)
    if not spans:
        return buf
    parts, pos = [], 0
    for a, b in spans:
        parts += [buf[pos:a], LONG_LINE]
        pos = b
    parts.append(buf[pos:])
    return b"".join(parts)


def open_regular(path: Path):
    """Open a regular file for binary reading (refusing pipes and devices before opening)."""
    refuse_special_file(path)
    return open(path, "rb")
