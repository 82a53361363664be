"""The local engine's threads: work that overlaps the reading.

The compiled kernels release the interpreter lock, so a kernel's pass over one batch
can run in a thread of its own while the calling thread reads the next batch.
`Background` runs a map step's chunks in order in one thread; `Normalizer` runs the
normalize step one batch behind the reading.
"""

from __future__ import annotations

from collections.abc import Callable
from concurrent.futures import ThreadPoolExecutor

import numpy as np

from ..features import tokenize
from ..normalize.batch import PreparedBatch

__all__ = ["Background", "Normalizer", "kernels_thread_safe"]


def kernels_thread_safe() -> bool:
    """Whether compiled parallel kernels may run in two threads at once.

    numba's ``omp`` and ``tbb`` threading layers allow it; its fallback ``workqueue`` (used
    where neither OpenMP nor TBB is installed) ends the process when two threads launch
    kernels together. The layer is chosen at the first launch, so one empty kernel runs.
    """
    import numba

    tokenize.has_words(np.zeros(0, np.uint8), np.zeros(1, np.int64), tokenize.word_table())
    return numba.threading_layer() != "workqueue"


class Background:
    """Runs ``commit(compute(*args))`` for each submitted chunk, in order, in one thread of
    its own; at most `AHEAD` chunks wait, so memory stays bounded. `close` waits for the
    rest and raises what the work raised.

    ``compute`` must touch no shared state (it may run in either thread, two chunks at
    once); ``commit`` takes its results in submission order. At `close`, the caller
    computes chunks from the back of the queue while the thread works from the front,
    so the last chunks of a pass are not left to one thread.
    """

    AHEAD = 3

    def __init__(self, compute: Callable, commit: Callable) -> None:
        self.compute, self.commit = compute, commit
        self._pool = ThreadPoolExecutor(max_workers=1, thread_name_prefix="dedup-sketch")
        self._pending: list = []  # (future, args) in submission order

    def _work(self, *args) -> None:
        self.commit(self.compute(*args))

    def submit(self, *args) -> None:
        while len(self._pending) >= self.AHEAD:
            self._pending.pop(0)[0].result()
        self._pending.append((self._pool.submit(self._work, *args), args))

    def close(self) -> None:
        """Finish every chunk (those not begun here); raise what the work raised."""
        try:
            # The thread takes the chunks from the front, this one from the back, until
            # they meet; the chunks taken here come last and are committed after the others.
            taken = []
            while self._pending and self._pending[-1][0].cancel():
                taken.append(self.compute(*self._pending.pop()[1]))
            for future, _ in self._pending:
                future.result()
            for part in reversed(taken):
                self.commit(part)
        finally:
            self.abandon()

    def abandon(self) -> None:
        """Drop the chunks not begun, wait for the one at work, raise nothing (the caller
        is already failing)."""
        self._pending.clear()
        self._pool.shutdown(wait=True, cancel_futures=True)


class Normalizer:
    """Normalizes the read pass's batches; threaded, one batch behind: the compiled part of
    a batch runs in a thread of its own while the caller reads the next batch, and `push`
    hands back the batch before, prepared."""

    def __init__(self, lines: bool, threaded: bool) -> None:
        self.lines = lines
        self._pool = (
            ThreadPoolExecutor(max_workers=1, thread_name_prefix="dedup-normalize") if threaded else None
        )
        self._waiting: tuple | None = None  # (batch, prepared batch or None, future or None)
        # Two batches are under way at once; each writes its canonical texts into one of
        # two arrays kept for the pass, in turn. Fresh arrays would take fresh pages: the
        # heap, with two batches' arrays alive at once, does not hand the same ones back.
        self._spares: list[np.ndarray] = [np.zeros(0, np.uint8), np.zeros(0, np.uint8)]
        self._turn = 0

    def push(self, batch: list | None) -> list | None:
        """Start on ``batch`` (None: no more); the batch pushed before it, prepared, or None."""
        started = None
        if batch is not None:
            todo = [doc for doc in batch if doc.prepared is None]
            work = PreparedBatch(todo, self.lines) if todo else None
            if self._pool is None:
                if work is not None:
                    work.finish()
                return batch
            future = None
            if work is not None:
                future = self._pool.submit(work.compiled, True, self._spare(work.job.room_bytes))
            started = (batch, work, future)
        done, self._waiting = self._waiting, started
        if done is None:
            return None
        batch, work, future = done
        if work is not None:
            work.finish(future.result())
        return batch

    def _spare(self, need: int) -> np.ndarray:
        # The other array than the batch under way uses, of at least ``need`` bytes.
        self._turn ^= 1
        if self._spares[self._turn].shape[0] < need:
            self._spares[self._turn] = np.empty(need + need // 4, dtype=np.uint8)
        return self._spares[self._turn]

    def close(self) -> None:
        """Wait for the thread (if any) and end it; a batch not taken back is dropped."""
        self._waiting = None
        if self._pool is not None:
            self._pool.shutdown(wait=True, cancel_futures=True)
