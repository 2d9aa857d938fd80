"""Growing 1-D arrays, each in its own anonymous memory map, for the per-tag reading buffers.

A source is read batch by batch, and each tag's readings grow with every batch.
Kept as lists of small numpy chunks, the buffers of all tags interleave on the C
heap, and when one tag's chunks are freed the allocator keeps the holes: the
process does not shrink while the aligned frame is built. A buffer here is one
private map per array instead, grown by doubling (pages not yet written cost no
memory), and handed back to the system whole as soon as its last view is dropped.
"""

from __future__ import annotations

import mmap

import numpy as np

#: Elements reserved at first; the buffer doubles whenever it is full.
INITIAL_CAPACITY = 1 << 16
_FLAGS = {"flags": mmap.MAP_PRIVATE} if hasattr(mmap, "MAP_PRIVATE") else {}


def mapped_empty(n: int, dtype) -> np.ndarray:
    """An uninitialised writable array of ``n`` elements in its own anonymous map.

    The map lives as long as the array (or a view of it) does.

    >>> a = mapped_empty(3, np.int32); a[:] = 7; a.tolist()
    [7, 7, 7]
    """
    dtype = np.dtype(dtype)
    mm = mmap.mmap(-1, max(n * dtype.itemsize, 1), **_FLAGS)
    return np.frombuffer(mm, dtype=dtype, count=n)


class GrowingArray:
    """A 1-D array of one dtype that grows by appending chunks.

    >>> g = GrowingArray(np.float64, capacity=2)
    >>> for chunk in ([1.0, 2.0], [3.0], [4.0, 5.0]):
    ...     g.append(np.array(chunk))
    >>> len(g), g.take().tolist(), len(g)
    (5, [1.0, 2.0, 3.0, 4.0, 5.0], 0)
    """

    __slots__ = ("dtype", "n", "_data")

    def __init__(self, dtype, capacity: int = INITIAL_CAPACITY):
        self.dtype = np.dtype(dtype)
        self.n = 0
        self._data = mapped_empty(capacity, self.dtype)

    def __len__(self) -> int:
        return self.n

    def append(self, chunk: np.ndarray) -> None:
        """Append a chunk (cast to the array's dtype)."""
        k = len(chunk)
        if self.n + k > len(self._data):
            new = mapped_empty(max(2 * len(self._data), self.n + k), self.dtype)
            new[: self.n] = self._data[: self.n]
            self._data = new           # the old map goes back to the system here
        self._data[self.n: self.n + k] = chunk
        self.n += k

    def view(self) -> np.ndarray:
        """The elements appended so far (a view; valid until the next append)."""
        return self._data[: self.n]

    def take(self) -> np.ndarray:
        """Hand over the elements appended so far and empty this array.

        The result is a view of the map, which is freed when the result is dropped.
        """
        out = self._data[: self.n]
        self._data = mapped_empty(0, self.dtype)
        self.n = 0
        return out
