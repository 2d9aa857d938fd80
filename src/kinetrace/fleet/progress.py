"""Progress of a backfill, per fleet, as plain lines on stderr (terminals, cron logs and CI alike)."""

from __future__ import annotations

import sys
import time


class FleetProgress:
    """Counts of units and chunks done, the chunk rate and the time left, printed at most every ``every`` s.

    Parameters
    ----------
    units, chunks : int
        Units and chunks of the fleet. [-]
    stream : file, optional
        Where the lines go; default ``sys.stderr``.
    every : float
        Shortest time between two lines (the last line is always printed). [s]
    clock : callable
        Wall clock. [s]
    """

    def __init__(self, units: int, chunks: int, *, stream=None, every: float = 2.0, clock=time.monotonic):
        self.units, self.chunks = units, chunks
        self.units_done = self.units_failed = self.chunks_done = self.chunks_skipped = 0
        self.stream = sys.stderr if stream is None else stream
        self.every, self.clock = every, clock
        self.t0 = clock()
        self._last = -float("inf")
        self._text = ""

    def chunk(self, *, skipped: bool = False) -> None:
        """One chunk done (``skipped``: found done by an earlier run of the same fingerprint)."""
        self.chunks_done += 1
        self.chunks_skipped += int(skipped)
        self.show()

    def unit(self, *, failed: bool = False) -> None:
        """One unit finished (or failed)."""
        self.units_done += 1
        self.units_failed += int(failed)
        self.show(force=self.units_done == self.units)

    def line(self) -> str:
        """The progress line.

        >>> t = iter([0.0, 10.0])
        >>> p = FleetProgress(2, 4, clock=lambda: next(t))
        >>> p.chunks_done = 2
        >>> p.line()
        'fleet: units 0/2 done, chunks 2/4 (0 found done), 0.2 chunks/s, about 10 s left'
        """
        elapsed = max(self.clock() - self.t0, 1e-9)
        worked = self.chunks_done - self.chunks_skipped
        rate = worked / elapsed
        left = self.chunks - self.chunks_done
        if left:
            eta = f"about {left / rate:.0f} s left" if rate > 0 else "time left unknown"
        else:
            eta = "done" if self.units_done == self.units else "finishing the units"
        failed = f", {self.units_failed} failed" if self.units_failed else ""
        return (f"fleet: units {self.units_done}/{self.units} done{failed}, chunks {self.chunks_done}/{self.chunks} "
                f"({self.chunks_skipped} found done), {rate:.1f} chunks/s, {eta}")

    def show(self, force: bool = False) -> None:
        now = self.clock()
        if force or now - self._last >= self.every:
            text = self.line()
            if text != self._text:          # the same line twice says nothing new
                print(text, file=self.stream, flush=True)
            self._last, self._text = now, text
