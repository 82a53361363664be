"""The local engine's read pass: documents streamed once, normalized, recorded, stored.

Each document is normalized (the plan's normalize step, a batch at a time) and its
record kept; its original text and, for a new distinct text, its canonical text are
appended to stores in the work folder. Template lines are counted chunk by chunk of
distinct texts (a reduce). With a sketcher, each chunk of distinct texts is sketched in
a thread of its own as soon as it is stored, while this thread reads on.
"""

from __future__ import annotations

import time
from dataclasses import dataclass

import numpy as np

from ..features import tokenize
from ..features.shingles import pack_bytes
from ..ingest.dates import date_value
from ..normalize.boilerplate import BoilerplateCounter
from ..progress import Progress
from ..workdir import ByteStore
from .sketching import ChunkSketcher
from .threads import Background, Normalizer

__all__ = ["ReadResult", "read_pass"]

# Documents (or characters of text) normalized together.
BATCH_DOCUMENTS = 1024
BATCH_CHARACTERS = 8 * 2**20
# Distinct texts (or bytes of them) gathered before a chunk is stored and counted.
CHUNK_TEXTS = 8192
CHUNK_BYTES = 32 * 2**20
# Smaller chunks when the read pass hands them to a sketching thread as it goes.
OVERLAP_CHUNK_TEXTS = 1024
OVERLAP_CHUNK_BYTES = 4 * 2**20


@dataclass
class ReadResult:
    """What the read pass leaves: records in id order and where their texts are stored.

    Attributes
    ----------
    documents : list of dict
        One record per document, sorted by id.
    original_slot : list of int
        For each record, its slot in the originals store.
    canonical_slot : dict
        Content hash → slot of the canonical text in the canonical store (texts with words).
    wordless : set of str
        Content hashes of texts that have characters but no word.
    counter : BoilerplateCounter or None
    read_seconds : float
        Time spent inside the readers (the rest of the pass is normalizing).
    """

    documents: list[dict]
    original_slot: list[int]
    canonical_slot: dict[str, int]
    wordless: set[str]
    counter: BoilerplateCounter | None
    read_seconds: float


class _DistinctTexts:
    """Distinct canonical texts gathered into chunks: stored, their template lines counted
    and handed to the sketcher chunk by chunk."""

    def __init__(self, canonicals: ByteStore, counter, background, chunk_texts: int, chunk_bytes: int):
        self.canonicals, self.counter, self.background = canonicals, counter, background
        self.chunk_texts, self.chunk_bytes = chunk_texts, chunk_bytes
        self.slots: dict[str, int] = {}
        self.wordless: set[str] = set()
        self.seen: set[str] = set()
        self._pending: list[tuple[str, bytes]] = []
        self._pending_bytes = 0
        self._table = tokenize.word_table()

    def offer(self, digest: str, stored: bytes) -> None:
        """Take a canonical text (once per content hash)."""
        if not stored or digest in self.seen:
            return
        self.seen.add(digest)
        self._pending.append((digest, stored))
        self._pending_bytes += len(stored)
        if len(self._pending) >= self.chunk_texts or self._pending_bytes >= self.chunk_bytes:
            self.flush()

    def flush(self) -> None:
        """Store the texts gathered (those with words), count and hand them on."""
        if not self._pending:
            return
        buf, offsets = pack_bytes([stored for _, stored in self._pending])
        has_words = tokenize.has_words(buf, offsets, self._table)
        keep = []
        for (digest, stored), ok in zip(self._pending, has_words.tolist()):
            if ok:
                self.slots[digest] = len(self.canonicals) + len(keep)
                keep.append(stored)
            else:
                self.wordless.add(digest)
        if len(keep) == len(self._pending):  # all of them: the packed buffer as it is
            self.canonicals.extend_packed(buf, offsets)
            kept = (buf, offsets)
        else:
            self.canonicals.extend(keep)
            kept = tokenize.gather_segments(buf, offsets, np.flatnonzero(has_words)) if keep else None
        if self.background is not None and kept is not None:
            self.background.submit(*kept)
        if self.counter is not None and kept is not None:
            self.counter.add(*kept)
        self._pending.clear()
        self._pending_bytes = 0


def _record(doc, original: bytes, characters: int, digest: str, date_of) -> dict:
    record = {
        "id": doc.id,
        "source": doc.source,
        "format": doc.format,
        "title": doc.title,
        "bytes": len(original),
        "characters": characters,
        "content_hash": digest,
        "status": "read",
    }
    if date_of is not None:
        record["date"] = date_value(date_of(doc))
    return record


def _date_getter(settings):
    """How a document's date is read, or None when the keeper policy needs no date."""
    if settings.keeper_policy not in ("newest", "oldest"):
        return None
    if settings.date_field:
        return lambda doc: doc.metadata.get(settings.date_field)
    return lambda doc: doc.mtime


class _ReadPass:
    """One read pass (see `read_pass`): batches normalized, recorded and stored in order."""

    def __init__(self, settings, originals: ByteStore, distinct: _DistinctTexts, progress: Progress):
        self.originals, self.distinct, self.progress = originals, distinct, progress
        self.date_of = _date_getter(settings)
        self.records: list[dict] = []

    def record_batch(self, batch: list) -> None:
        """Keep the records of a normalized batch and store its texts."""
        self.originals.extend([doc.prepared[0] for doc in batch])
        for doc in batch:
            original, stored, characters, digest = doc.prepared
            doc.prepared = None
            self.records.append(_record(doc, original, characters, digest, self.date_of))
            self.distinct.offer(digest, stored)
        self.progress.advance(len(batch))

    def run(self, documents_in, normalizer: Normalizer) -> float:
        """Read every document; the seconds spent inside the readers."""
        read_seconds = 0.0
        batch: list = []
        batch_bytes = 0
        iterator = iter(documents_in)
        while True:
            start = time.perf_counter()
            doc = next(iterator, None)
            read_seconds += time.perf_counter() - start
            if doc is not None:
                batch.append(doc)
                batch_bytes += len(doc.text) if doc.prepared is None else len(doc.prepared[0])
            full = len(batch) >= BATCH_DOCUMENTS or batch_bytes >= BATCH_CHARACTERS
            if batch and (full or doc is None):
                self._push(normalizer, batch)
                batch, batch_bytes = [], 0
            if doc is None:
                break
        self._push(normalizer, None)
        self.distinct.flush()
        return read_seconds

    def _push(self, normalizer: Normalizer, batch: list | None) -> None:
        done = normalizer.push(batch)
        if done is not None:
            self.record_batch(done)


def read_pass(
    documents_in,
    settings,
    originals: ByteStore,
    canonicals: ByteStore,
    progress: Progress,
    sketcher: ChunkSketcher | None = None,
    threaded: bool = False,
) -> ReadResult:
    """Stream the documents once (see the module notes).

    ``threaded``: the compiled part of normalizing a batch runs in a thread of its own
    while this thread reads the next batch (then keeps its records). With a
    ``sketcher``, each chunk of distinct texts is sketched as soon as it is stored, in a
    thread of its own; chunks are then smaller, so that the first is handed over early.
    """
    chunk = (OVERLAP_CHUNK_TEXTS, OVERLAP_CHUNK_BYTES) if sketcher else (CHUNK_TEXTS, CHUNK_BYTES)
    background = Background(sketcher.compute, sketcher.commit) if sketcher is not None else None
    counter = BoilerplateCounter() if settings.boilerplate else None
    distinct = _DistinctTexts(canonicals, counter, background, *chunk)
    passing = _ReadPass(settings, originals, distinct, progress)
    normalizer = Normalizer(settings.boilerplate, threaded)
    try:
        read_seconds = passing.run(documents_in, normalizer)
    except BaseException:
        normalizer.close()
        if background is not None:
            background.abandon()
        raise
    normalizer.close()
    if background is not None:
        background.close()
    records = passing.records
    order = sorted(range(len(records)), key=lambda i: records[i]["id"])
    return ReadResult(
        documents=[records[i] for i in order],
        original_slot=order,
        canonical_slot=distinct.slots,
        wordless=distinct.wordless,
        counter=counter,
        read_seconds=read_seconds,
    )
