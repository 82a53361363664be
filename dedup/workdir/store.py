"""An append-only store of byte strings in one file, read back by slot number.

Writes go through an ordinary buffered file (the page cache holds them, not the
process); reads map the file and copy the wanted slots into one packed buffer. After
each read the mapping's pages are released, so reading a store of several gigabytes
never grows the resident memory of the process beyond the slots just read.
"""

from __future__ import annotations

import contextlib
import mmap
import os
from array import array

import numpy as np

from ..features.tokenize import gather_segments

__all__ = ["ByteStore"]


class ByteStore:
    """Byte strings appended one after another to ``path``; slot ``k`` is the k-th one.

    Examples
    --------
    >>> import tempfile, os
    >>> store = ByteStore(os.path.join(tempfile.mkdtemp(), "texts.bin"))
    >>> store.append(b"alpha"), store.append(b"beta")
    (0, 1)
    >>> buf, offsets = store.gather([1, 0])
    >>> bytes(buf).decode(), offsets.tolist()
    ('betaalpha', [0, 4, 9])
    >>> store.close()
    """

    def __init__(self, path: str) -> None:
        self.path = path
        self._file = open(path, "wb")  # noqa: SIM115 - kept open while the audit appends
        self._starts = array("q", [0])
        self._map: mmap.mmap | None = None
        self._view: np.ndarray | None = None
        self._reader: int | None = None

    def __len__(self) -> int:
        return len(self._starts) - 1

    @property
    def size(self) -> int:
        """Bytes stored."""
        return self._starts[-1]

    def offsets(self) -> np.ndarray:
        """Start of every slot and the end of the last (``len(self) + 1`` values)."""
        return np.frombuffer(self._starts, dtype=np.int64).copy()

    def sizes(self, slots) -> np.ndarray:
        """Length in bytes of each given slot."""
        starts = np.frombuffer(self._starts, dtype=np.int64)
        slots = np.asarray(slots, dtype=np.int64)
        return starts[slots + 1] - starts[slots]

    def append(self, data: bytes) -> int:
        """Store ``data``; returns its slot."""
        if self._map is not None:
            raise RuntimeError("the store has been read from; it takes no more writes")
        self._file.write(data)
        self._starts.append(self._starts[-1] + len(data))
        return len(self._starts) - 2

    def extend(self, items: list[bytes]) -> int:
        """Store several byte strings with one write; returns the slot of the first."""
        if self._map is not None:
            raise RuntimeError("the store has been read from; it takes no more writes")
        first = len(self._starts) - 1
        self._file.write(b"".join(items))
        end = self._starts[-1]
        for item in items:
            end += len(item)
            self._starts.append(end)
        return first

    def extend_packed(self, buf: np.ndarray, offsets: np.ndarray) -> int:
        """Store the segments ``buf[offsets[k]:offsets[k + 1]]`` (any dtype: their bytes)
        with one write; returns the slot of the first."""
        if self._map is not None:
            raise RuntimeError("the store has been read from; it takes no more writes")
        first = len(self._starts) - 1
        a, b = int(offsets[0]), int(offsets[-1])
        self._file.write(memoryview(np.ascontiguousarray(buf[a:b])).cast("B"))
        width = buf.dtype.itemsize
        ends = self._starts[-1] + (np.asarray(offsets[1:], dtype=np.int64) - a) * width
        self._starts.frombytes(ends.astype(np.int64).tobytes())
        return first

    def _open_view(self) -> np.ndarray:
        if self._view is None:
            self._file.close()
            if self.size == 0:
                self._view = np.zeros(0, np.uint8)
            else:
                with open(self.path, "rb") as handle:
                    self._map = mmap.mmap(handle.fileno(), 0, access=mmap.ACCESS_READ)
                self._view = np.frombuffer(self._map, dtype=np.uint8)
        return self._view

    def gather(self, slots) -> tuple[np.ndarray, np.ndarray]:
        """The given slots, in that order, packed into one buffer with offsets (n + 1)."""
        view = self._open_view()
        starts = np.frombuffer(self._starts, dtype=np.int64)
        buf, offsets = gather_segments(view, starts, np.asarray(slots, dtype=np.int64))
        self.release()
        return buf, offsets

    def view(self, start: int, stop: int) -> tuple[np.ndarray, np.ndarray]:
        """Slots ``start:stop`` as a read-only view of the file (no copy) with offsets from 0.

        Call `release` when done with the view, so its pages leave the process.
        """
        view = self._open_view()
        starts = np.frombuffer(self._starts, dtype=np.int64)
        a, b = int(starts[start]), int(starts[stop])
        return view[a:b], starts[start : stop + 1] - a

    def get(self, slot: int) -> bytes:
        """One stored byte string (read from the file, not the map: scattered reads of a
        large store would otherwise leave their pages resident)."""
        self._open_view()
        if self._reader is None:
            self._reader = os.open(self.path, os.O_RDONLY)
        start = self._starts[slot]
        return os.pread(self._reader, self._starts[slot + 1] - start, start)

    def release(self) -> None:
        """Give the mapped pages back to the system (they stay in the page cache)."""
        if self._map is not None and hasattr(self._map, "madvise"):
            self._map.madvise(mmap.MADV_DONTNEED)

    def close(self) -> None:
        self._view = None
        if self._reader is not None:
            os.close(self._reader)
            self._reader = None
        if self._map is not None:
            # A caller may still hold a view of the map; it is then freed with that view.
            with contextlib.suppress(BufferError):
                self._map.close()
            self._map = None
        if not self._file.closed:
            self._file.close()

    def remove(self) -> None:
        self.close()
        with contextlib.suppress(FileNotFoundError):
            os.remove(self.path)
