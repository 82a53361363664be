"""The local engine's sketch step: distinct texts sketched chunk after chunk, in store order.

`ChunkSketcher` applies the plan's map function (`dedup.plan.sketch_batch`) to each chunk
and merges the results in order (the reduce): document frequencies counted, signatures
spilled to the work folder, band keys kept. `sketch_pass` feeds it from the store after
the read pass; the read pass feeds it while reading when there are no template lines to
strip first. So memory holds 8 bytes per band per text and one chunk, never the corpus.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from ..normalize.boilerplate import Boilerplate
from ..plan import SketchedBatch, sketch_batch
from ..progress import Progress
from ..sketch.tfidf import DocumentFrequency
from ..workdir import ByteStore

__all__ = ["ChunkSketcher", "SketchResult", "KeptSets", "sketch_pass", "text_order", "template_stripped"]

# Texts (or bytes of text) gathered before a chunk is processed.
CHUNK_TEXTS = 8192
CHUNK_BYTES = 32 * 2**20


@dataclass
class KeptSets:
    """Sorted unique shingles and term counts of every distinct text, in slot order."""

    shingles: np.ndarray
    shingle_offsets: np.ndarray
    counts: object  # scipy.sparse CSR, one row per slot


@dataclass
class SketchResult:
    """What the sketch step leaves for candidate generation and scoring."""

    frequencies: DocumentFrequency
    keys: np.ndarray | None
    signature_file: str | None
    texts_affected: int = 0
    texts_compared_whole: int = 0
    sets: KeptSets | None = None
    words: ByteStore | None = None  # each text's word hashes, when the pass kept them


def template_stripped(buf, offsets, boilerplate: Boilerplate | None, settings):
    """The texts with their template lines left out (as they are without templates), and
    which texts lost some and which were kept whole (None, None without templates)."""
    if boilerplate is None:
        return buf, offsets, None, None
    return boilerplate.strip(buf, offsets, settings.boilerplate_max_text_share)


class ChunkSketcher:
    """Sketches distinct texts handed over chunk after chunk in store (slot) order: their
    document frequencies, with ``lsh=(bands, rows)`` their MinHash signatures (spilled to
    ``signature_path`` in slot order) and band keys, with ``word_store`` their word hashes.
    With ``sets_text_limit`` it also keeps every text's sorted shingle set and term counts
    while the texts total at most that many bytes (and gives them up beyond).
    """

    def __init__(
        self,
        settings,
        *,
        lsh: tuple[int, int] | None,
        signature_path: str,
        word_store: ByteStore | None = None,
        sets_text_limit: int | None = None,
    ) -> None:
        self.settings, self.lsh = settings, lsh
        self.frequencies = DocumentFrequency(settings.tfidf_features, settings.sublinear_tf)
        self.signature_path = signature_path if lsh else None
        self.word_store = word_store
        self.sets_text_limit = sets_text_limit
        self._sets: _KeptParts | None = _KeptParts() if sets_text_limit is not None else None
        self.texts = self.text_bytes = 0
        self._out = open(signature_path, "wb") if lsh else None  # noqa: SIM115 - closed by `finish`
        self._keys: list[np.ndarray] = []

    def add(self, buf: np.ndarray, offsets: np.ndarray, release: Callable[[], None] | None = None) -> None:
        """Sketch the next texts, ``buf[offsets[k]:offsets[k + 1]]``."""
        self.commit(self.compute(buf, offsets, release))

    def compute(
        self, buf: np.ndarray, offsets: np.ndarray, release: Callable[[], None] | None = None
    ) -> SketchedBatch:
        """The sketches of the next texts, not yet added: this changes nothing of the
        sketcher, so two chunks may be computed at once (in two threads)."""
        return sketch_batch(
            self.settings,
            buf,
            offsets,
            lsh=self.lsh,
            frequencies=self.frequencies,
            keep_sets=self._sets is not None,  # once given up, never taken again
            release=release,
        )

    def commit(self, part: SketchedBatch) -> None:
        """Add the sketches of the next texts (`compute` made them), in order."""
        self.text_bytes += part.text_bytes
        if self._sets is not None and self.text_bytes > self.sets_text_limit:
            self._sets = None
        features = part.features
        counts = part.counts if self._sets is not None else None
        self.frequencies.add(features.token_hashes, features.token_offsets, counts)
        if self.word_store is not None:
            self.word_store.extend_packed(features.token_hashes, features.token_offsets)
        if self.lsh:
            self._keys.append(part.keys)
            self._out.write(part.values.tobytes())
        if self._sets is not None:
            self._sets.add(part.shingles, part.shingle_offsets, counts)
        self.texts += int(features.token_offsets.shape[0] - 1)

    def finish(self, text_of_slot: np.ndarray, affected: int = 0, whole: int = 0) -> SketchResult:
        """The result, band keys in text order (``text_of_slot[s]`` is the text of slot s)."""
        keys = None
        if self.lsh:
            self._out.close()
            keys = np.empty((self.texts, self.lsh[0]), dtype=np.uint64)
            start = 0
            for part in self._keys:
                keys[text_of_slot[start : start + part.shape[0]]] = part
                start += part.shape[0]
            self._keys.clear()
        sets = None
        if self._sets is not None:
            sets = self._sets.joined(self.frequencies.n_features)
            self._sets = None
        return SketchResult(self.frequencies, keys, self.signature_path, affected, whole, sets)

    def close(self) -> None:
        """Close the signature file (after an error; `finish` closes it otherwise)."""
        if self._out is not None and not self._out.closed:
            self._out.close()


class _KeptParts:
    """The shingle sets and term counts of the chunks sketched so far: the shingles laid
    end to end as they come (no joining of parts at the end), the rest per chunk."""

    def __init__(self) -> None:
        self.shingles = Growing(np.uint64)
        self.sizes: list[np.ndarray] = []
        self.counts: list = []

    def add(self, shingles: np.ndarray, shingle_offsets: np.ndarray, counts) -> None:
        self.shingles.append(shingles)
        self.sizes.append(np.diff(shingle_offsets))
        self.counts.append(counts)

    def joined(self, n_features: int) -> KeptSets:
        import scipy.sparse as sp

        if not self.sizes:
            return KeptSets(
                np.zeros(0, np.uint64),
                np.zeros(1, np.int64),
                sp.csr_matrix((0, n_features), dtype=np.float64),
            )
        lengths = np.concatenate(self.sizes)
        offsets = np.zeros(lengths.shape[0] + 1, dtype=np.int64)
        np.cumsum(lengths, out=offsets[1:])
        return KeptSets(self.shingles.array(), offsets, sp.vstack(self.counts, format="csr"))


class Growing:
    """A one-dimensional array appended to in place; its room doubles when full, so each
    value is copied about once more in all (in the thread that appends)."""

    def __init__(self, dtype) -> None:
        self._room = np.empty(0, dtype=dtype)
        self._used = 0

    def append(self, values: np.ndarray) -> None:
        need = self._used + values.shape[0]
        if need > self._room.shape[0]:
            room = np.empty(max(need, 2 * self._room.shape[0], 1 << 16), dtype=self._room.dtype)
            room[: self._used] = self._room[: self._used]
            self._room = room
        self._room[self._used : need] = values
        self._used = need

    def array(self) -> np.ndarray:
        """The values appended so far (a view)."""
        return self._room[: self._used]


def text_order(slots: np.ndarray) -> np.ndarray:
    """``text_of_slot``: the inverse of ``slots`` (the slot of each distinct text)."""
    text_of_slot = np.empty(slots.shape[0], dtype=np.int64)
    text_of_slot[slots] = np.arange(slots.shape[0])
    return text_of_slot


def chunk_bounds(sizes: np.ndarray):
    """Consecutive ranges ``(start, stop)`` of at most `CHUNK_TEXTS` texts and `CHUNK_BYTES`
    bytes (or one text, when a single text is larger), for texts of ``sizes`` bytes."""
    ends = np.cumsum(sizes)
    start = 0
    n = int(sizes.shape[0])
    while start < n:
        before = ends[start - 1] if start else 0
        stop = int(np.searchsorted(ends, before + CHUNK_BYTES, side="right"))
        stop = min(max(stop, start + 1), start + CHUNK_TEXTS, n)
        yield start, stop
        start = stop


def sketch_pass(
    slots: np.ndarray,
    canonicals: ByteStore,
    boilerplate: Boilerplate | None,
    settings,
    *,
    lsh: tuple[int, int] | None,
    signature_path: str,
    progress: Progress,
    word_store: ByteStore | None = None,
) -> SketchResult:
    """Document frequencies of every distinct text, and with ``lsh=(bands, rows)`` their
    band keys (kept) and MinHash signatures (spilled to ``signature_path`` in slot order).

    ``slots[t]`` is the store slot of distinct text ``t``; every slot is one distinct
    text, so the store is read front to back, one chunk at a time, without a copy.
    With ``word_store``, each text's word hashes (after template lines are left out) are
    appended to it in slot order, so `compared_sets` need not read the texts again.
    """
    n = int(slots.shape[0])
    sketcher = ChunkSketcher(settings, lsh=lsh, signature_path=signature_path, word_store=word_store)
    affected = whole = 0
    try:
        for start, stop in chunk_bounds(canonicals.sizes(np.arange(n))):
            buf, offsets = canonicals.view(start, stop)
            buf, offsets, discounted, protected = template_stripped(buf, offsets, boilerplate, settings)
            if discounted is not None:
                affected += int(discounted.sum())
                whole += int(protected.sum())
            sketcher.add(buf, offsets, release=canonicals.release)
            del buf
            progress.advance(stop - start)
    finally:
        sketcher.close()
    return sketcher.finish(text_order(slots), affected, whole)
