"""Growing 1-D arrays, each in its own anonymous memory map, for the per-tag reading buffers.

A source is read batch by batch, and each tag's readings grow with every batch. Kept as
lists of small numpy chunks, the buffers of all tags interleave on the C heap, and when
one tag's chunks are freed the allocator keeps the holes: the process does not shrink
while the aligned frame is built. A buffer here is one private map per array instead,
grown by doubling (in place, without copying, where the system can; pages not yet
written cost no memory), and handed back to the system whole as soon as its last view is
dropped.
"""

from __future__ import annotations

import mmap

import numpy as np

#: Elements reserved at first; the buffer doubles whenever it is full.
INITIAL_CAPACITY = 1 << 16
_FLAGS = {"flags": mmap.MAP_PRIVATE} if hasattr(mmap, "MAP_PRIVATE") else {}


class GrowingArray:
    """A 1-D array of one dtype that grows by appending chunks.

    The map is enlarged in place (``mremap``: no copy) where the system allows it,
    else copied to a map twice as large.

    >>> g = GrowingArray(np.float64, capacity=2)
    >>> for chunk in ([1.0, 2.0], [3.0], [4.0, 5.0]):
    ...     g.append(np.array(chunk))
    >>> len(g), g.take().tolist(), len(g)
    (5, [1.0, 2.0, 3.0, 4.0, 5.0], 0)
    """

    __slots__ = ("dtype", "n", "_map")

    def __init__(self, dtype, capacity: int = INITIAL_CAPACITY):
        self.dtype = np.dtype(dtype)
        self.n = 0
        self._map = _new_map(capacity * self.dtype.itemsize)

    def __len__(self) -> int:
        return self.n

    def append(self, chunk: np.ndarray) -> None:
        """Append a chunk (cast to the array's dtype)."""
        k = len(chunk)
        size = self.dtype.itemsize
        if (self.n + k) * size > len(self._map):
            nbytes = max(2 * len(self._map), (self.n + k) * size)
            try:
                self._map.resize(nbytes)
            except (BufferError, OSError, SystemError, ValueError, TypeError):
                # a view is still out, or no resizing here: copy into a new map
                new = _new_map(nbytes)
                np.frombuffer(new, self.dtype, count=self.n)[:] = np.frombuffer(self._map, self.dtype, count=self.n)
                self._map = new            # the old map goes back to the system once its views are gone
        np.frombuffer(self._map, self.dtype, count=k, offset=self.n * size)[:] = chunk
        self.n += k

    def view(self) -> np.ndarray:
        """The elements appended so far (a view; the next append may not see it)."""
        return np.frombuffer(self._map, self.dtype, count=self.n)

    def take(self) -> np.ndarray:
        """Hand over the elements appended so far and empty this array.

        The result is a view of the map, which is freed when the result is dropped.
        """
        out = self.view()
        self._map = _new_map(self.dtype.itemsize)
        self.n = 0
        return out


def _new_map(nbytes: int) -> mmap.mmap:
    return mmap.mmap(-1, max(nbytes, 1), **_FLAGS)
