"""The audit's passes over a corpus of any size, in bounded memory.

1. `read_pass` streams the documents once: each is normalized and hashed, its record
   kept, its original text and (for a new distinct text) its canonical text appended to
   stores in the work folder; boilerplate lines are counted by hash chunk by chunk.
2. `sketch_pass` reads the distinct texts back in chunks (in id order): boilerplate is
   stripped, shingles hashed and MinHashed, band keys and document frequencies kept,
   signatures spilled. No shingle set is kept: MinHash does not need one.
3. `compared_sets` rebuilds shingle sets and TF-IDF rows only for the texts that have a
   candidate pair (or are otherwise compared): exact scores need nothing else.

Without boilerplate to strip, the texts stored are already the texts to shingle, so pass
2 runs inside pass 1: a `ChunkSketcher` in a thread of its own sketches each chunk as it
is stored, while this thread reads on (the compiled kernels release the interpreter
lock). For a modest corpus it also keeps every text's shingle set and term counts, and
pass 3 only picks the compared ones out.

Where compiled kernels may run in two threads at once, normalizing a batch is split too:
its compiled pass runs in a thread of its own while this thread reads the next batch,
and this thread then keeps the batch's records (one batch behind the reading).

So memory holds the per-document records, 8 bytes per band per text and one chunk at a
time, never the corpus.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from dataclasses import dataclass
from typing import NamedTuple

import numpy as np

from .candidates.lsh import band_keys
from .features import tokenize
from .features.hashing import sort_unique_segments
from .features.shingles import features_from_tokens, features_with, pack_bytes
from .normalize import content_hash
from .normalize.boilerplate import Boilerplate, BoilerplateCounter
from .normalize.canonical_bytes import CanonicalJob
from .progress import Progress
from .sketch import signatures_with
from .sketch.tfidf import DocumentFrequency, TfidfModel
from .workdir import ByteStore

__all__ = [
    "ReadResult",
    "read_pass",
    "ChunkSketcher",
    "sketch_pass",
    "SketchResult",
    "compared_sets",
    "ComparedSets",
    "kernels_thread_safe",
]

# Documents (or characters of text) normalized together.
BATCH_DOCUMENTS = 1024
BATCH_CHARACTERS = 8 * 2**20
# Texts (or bytes of text) gathered before a chunk is processed.
CHUNK_TEXTS = 8192
CHUNK_BYTES = 32 * 2**20
# Smaller chunks when the read pass hands them to a sketching thread as it goes.
OVERLAP_CHUNK_TEXTS = 1024
OVERLAP_CHUNK_BYTES = 4 * 2**20


def kernels_thread_safe() -> bool:
    """Whether compiled parallel kernels may run in two threads at once.

    numba's ``omp`` and ``tbb`` threading layers allow it; its fallback ``workqueue`` (used
    where neither OpenMP nor TBB is installed) ends the process when two threads launch
    kernels together. The layer is chosen at the first launch, so one empty kernel runs.
    """
    import numba

    tokenize.has_words(np.zeros(0, np.uint8), np.zeros(1, np.int64), tokenize.word_table())
    return numba.threading_layer() != "workqueue"


class _Background:
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
        from concurrent.futures import ThreadPoolExecutor

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


def _date_of(value: object) -> float | None:
    from datetime import datetime, timezone

    if isinstance(value, (int, float)) and not isinstance(value, bool):
        return float(value)
    if isinstance(value, str) and value.strip():
        try:
            parsed = datetime.fromisoformat(value.strip().replace("Z", "+00:00"))
        except ValueError:
            return None
        if parsed.tzinfo is None:
            parsed = parsed.replace(tzinfo=timezone.utc)
        return parsed.timestamp()
    return None


def prepare_documents(documents: list, parallel: bool = False, lines: bool = True) -> None:
    """Normalize documents in place: ``doc.prepared`` becomes (original UTF-8 bytes,
    canonical form, characters of the canonical text, content hash) and ``doc.text`` is
    emptied (the bytes carry it). The canonical form is the canonical lines joined by LF
    with ``lines`` (boilerplate is found by line), else the canonical text (joined by
    spaces). Runs where the documents are read — in worker processes when there are
    workers — so the text crosses between processes once.
    """
    PreparedBatch(documents, lines).finish(parallel=parallel)


class PreparedBatch:
    """`prepare_documents` in two steps: `compiled` (the kernel's pass, which needs no
    interpreter lock, so it may run in another thread while this one reads on) and
    `finish` (the few texts only Python can normalize, the content hashes, then each
    document's ``prepared``)."""

    def __init__(self, documents: list, lines: bool) -> None:
        self.documents, self.lines = documents, lines
        self.originals = [
            doc.text.encode("utf-8", "surrogatepass") if doc.utf8 is None else doc.utf8 for doc in documents
        ]
        self.job = CanonicalJob([doc.text for doc in documents], self.originals, b"\n" if lines else b" ")

    def compiled(self, parallel: bool = True, spare: np.ndarray | None = None) -> tuple:
        """The kernel's pass over the batch (see `CanonicalJob.run`)."""
        return self.job.run(parallel, spare)

    def finish(self, ran: tuple | None = None, parallel: bool = True) -> None:
        """Fill in ``doc.prepared`` from what `compiled` returned (run here when not given)."""
        lines = self.lines
        out, starts, lengths, chars_of, fixed = self.job.finish(
            ran if ran is not None else self.compiled(parallel), parallel
        )
        ends = (starts + lengths).tolist()
        for k, (doc, original, a, b, characters) in enumerate(
            zip(self.documents, self.originals, starts.tolist(), ends, chars_of)
        ):
            stored = fixed[k] if k in fixed else out[a:b].tobytes()
            # The content hash is taken over the canonical text: the lines joined by spaces.
            doc.prepared = (
                original,
                stored,
                characters,
                content_hash(stored.replace(b"\n", b" ") if lines else stored),
            )
            doc.text, doc.utf8 = "", None


class _Normalizer:
    """Normalizes the read pass's batches; threaded, one batch behind: the compiled part of
    a batch runs in a thread of its own while the caller reads the next batch, and `push`
    hands back the batch before, prepared."""

    def __init__(self, lines: bool, threaded: bool) -> None:
        from concurrent.futures import ThreadPoolExecutor

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
    while this thread reads the next batch (then keeps its records).

    With a ``sketcher``, each chunk of distinct texts is sketched as soon as it is stored,
    in a thread of its own (the compiled kernels release the interpreter lock, so they
    run while this thread reads and normalizes the next documents); chunks are then
    smaller, so that the first is handed over early.
    """
    use_lines = settings.boilerplate
    chunk_texts, chunk_bytes = (
        (OVERLAP_CHUNK_TEXTS, OVERLAP_CHUNK_BYTES) if sketcher else (CHUNK_TEXTS, CHUNK_BYTES)
    )
    background = _Background(sketcher.compute, sketcher.commit) if sketcher is not None else None
    with_dates = settings.keeper_policy in ("newest", "oldest")
    counter = BoilerplateCounter() if use_lines else None
    table = tokenize.word_table()
    records: list[dict] = []
    slots: dict[str, int] = {}
    wordless: set[str] = set()
    pending: list[tuple[str, bytes]] = []
    pending_bytes = 0

    def flush() -> None:
        nonlocal pending_bytes
        if not pending:
            return
        buf, offsets = pack_bytes([stored for _, stored in pending])
        has_words = tokenize.has_words(buf, offsets, table)
        keep = []
        for (h, stored), ok in zip(pending, has_words.tolist()):
            if ok:
                slots[h] = len(canonicals) + len(keep)
                keep.append(stored)
            else:
                wordless.add(h)
        if len(keep) == len(pending):  # all of them: the packed buffer as it is
            canonicals.extend_packed(buf, offsets)
            kept = (buf, offsets)
        else:
            canonicals.extend(keep)
            kept = tokenize.gather_segments(buf, offsets, np.flatnonzero(has_words)) if keep else None
        if background is not None and kept is not None:
            background.submit(*kept)
        if counter is not None and kept is not None:
            counter.add(*kept)
        pending.clear()
        pending_bytes = 0

    seen: set[str] = set()
    batch: list = []
    batch_bytes = 0

    def record_batch(batch: list) -> None:
        nonlocal pending_bytes
        originals.extend([doc.prepared[0] for doc in batch])
        for doc in batch:
            original, stored, characters, digest = doc.prepared
            doc.prepared = None
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
            if with_dates:
                value = doc.metadata.get(settings.date_field) if settings.date_field else doc.mtime
                record["date"] = _date_of(value)
            records.append(record)
            if stored and digest not in seen:
                seen.add(digest)
                pending.append((digest, stored))
                pending_bytes += len(stored)
                if len(pending) >= chunk_texts or pending_bytes >= chunk_bytes:
                    flush()
        progress.advance(len(batch))

    normalizer = _Normalizer(use_lines, threaded)

    def normalize_batch() -> None:
        nonlocal batch, batch_bytes
        done = normalizer.push(batch)
        if done is not None:
            record_batch(done)
        batch = []
        batch_bytes = 0

    read_seconds = 0.0
    iterator = iter(documents_in)
    try:
        while True:
            start = time.perf_counter()
            doc = next(iterator, None)
            read_seconds += time.perf_counter() - start
            if doc is None:
                break
            batch.append(doc)
            batch_bytes += len(doc.text) if doc.prepared is None else len(doc.prepared[0])
            if len(batch) >= BATCH_DOCUMENTS or batch_bytes >= BATCH_CHARACTERS:
                normalize_batch()
        if batch:
            normalize_batch()
        done = normalizer.push(None)
        if done is not None:
            record_batch(done)
        flush()
    except BaseException:
        normalizer.close()
        if background is not None:
            background.abandon()
        raise
    normalizer.close()
    if background is not None:
        background.close()
    order = sorted(range(len(records)), key=lambda i: records[i]["id"])
    return ReadResult(
        documents=[records[i] for i in order],
        original_slot=order,
        canonical_slot=slots,
        wordless=wordless,
        counter=counter,
        read_seconds=read_seconds,
    )


@dataclass
class SketchResult:
    """What the sketch pass leaves for candidate generation and scoring."""

    frequencies: DocumentFrequency
    keys: np.ndarray | None
    signature_file: str | None
    texts_affected: int = 0
    texts_compared_whole: int = 0
    sets: KeptSets | None = None


@dataclass
class KeptSets:
    """Sorted unique shingles and term counts of every distinct text, in slot order."""

    shingles: np.ndarray
    shingle_offsets: np.ndarray
    counts: object  # scipy.sparse CSR, one row per slot


def _chunks(slots: np.ndarray, store: ByteStore):
    """Consecutive runs of slots of at most `CHUNK_TEXTS` texts and `CHUNK_BYTES` bytes
    (or one text, when a single text is larger)."""
    ends = np.cumsum(store.sizes(slots))
    start = 0
    n = slots.shape[0]
    while start < n:
        before = ends[start - 1] if start else 0
        stop = int(np.searchsorted(ends, before + CHUNK_BYTES, side="right"))
        stop = min(max(stop, start + 1), start + CHUNK_TEXTS, n)
        yield start, stop, store.gather(slots[start:stop])
        start = stop


def _feature_texts(buf, offsets, boilerplate: Boilerplate | None, settings):
    if boilerplate is None:
        return buf, offsets, None, None
    return boilerplate.strip(buf, offsets, settings.boilerplate_max_text_share)


def _runs(n: int, store: ByteStore):
    """Consecutive slot ranges ``(start, stop)`` of at most `CHUNK_TEXTS` texts and
    `CHUNK_BYTES` bytes (or one text, when a single text is larger)."""
    ends = np.cumsum(store.sizes(np.arange(n)))
    start = 0
    while start < n:
        before = ends[start - 1] if start else 0
        stop = int(np.searchsorted(ends, before + CHUNK_BYTES, side="right"))
        stop = min(max(stop, start + 1), start + CHUNK_TEXTS, n)
        yield start, stop
        start = stop


class SlotRows:
    """Rows of an array stored in slot order, indexed by distinct-text number."""

    def __init__(self, rows: np.ndarray, slot_of: np.ndarray) -> None:
        self.rows, self.slot_of = rows, slot_of
        self.shape = (slot_of.shape[0], *rows.shape[1:])

    def __getitem__(self, texts):
        return np.asarray(self.rows[self.slot_of[texts]])


class _Sketched(NamedTuple):
    """What `ChunkSketcher.compute` makes of a chunk, for `ChunkSketcher.commit`."""

    text_bytes: int
    features: object
    counts: object  # term counts (scipy.sparse CSR) when sets are kept, else None
    values: np.ndarray | None  # MinHash signatures
    keys: np.ndarray | None  # band keys
    shingles: np.ndarray | None  # sorted unique shingles when sets are kept
    shingle_offsets: np.ndarray | None


class ChunkSketcher:
    """Sketches distinct texts handed over chunk after chunk in store (slot) order: their
    document frequencies, with ``lsh=(bands, rows)`` their MinHash signatures (spilled to
    ``signature_path`` in slot order) and band keys, with ``word_store`` their word hashes.

    `sketch_pass` feeds it after the read pass; `read_pass` feeds it each chunk as it is
    stored when the stored texts are already the texts to shingle (no boilerplate to
    strip), from a thread of its own, so the compiled work overlaps the reading. With
    ``sets_text_limit`` it also keeps every text's sorted shingle set and term counts
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
        """Sketch the next texts, ``buf[offsets[k]:offsets[k + 1]]``; ``release`` is called
        once the bytes have been read (a mapped view's pages can go)."""
        self.commit(self.compute(buf, offsets, release))

    def compute(
        self, buf: np.ndarray, offsets: np.ndarray, release: Callable[[], None] | None = None
    ) -> _Sketched:
        """The sketches of the next texts, not yet added: this changes nothing of the
        sketcher, so two chunks may be computed at once (in two threads); `commit` adds
        them, chunk after chunk in order."""
        features = features_with(self.settings, buf, offsets, distinct=False)
        if release is not None:
            release()
        sets = self._sets is not None  # once given up, never taken again
        counts = self.frequencies.counts(features.token_hashes, features.token_offsets) if sets else None
        values = keys = None
        if self.lsh:
            values = signatures_with(self.settings, features).values
            keys = band_keys(values, self.lsh[0], self.lsh[1])
        shingles = shingle_offsets = None
        if sets:
            # The shingles are sorted in place: MinHash has had them.
            shingles, shingle_offsets = sort_unique_segments(features.shingles, features.shingle_offsets)
        return _Sketched(
            int(offsets[-1] - offsets[0]), features, counts, values, keys, shingles, shingle_offsets
        )

    def commit(self, part: _Sketched) -> None:
        """Add the sketches of the next texts (`compute` made them)."""
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
        self.shingles = _Growing(np.uint64)
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


class _Growing:
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
    With ``word_store``, each text's word hashes (after boilerplate is stripped) are
    appended to it in slot order, so `compared_sets` need not read the texts again.
    """
    n = int(slots.shape[0])
    sketcher = ChunkSketcher(settings, lsh=lsh, signature_path=signature_path, word_store=word_store)
    affected = whole = 0
    try:
        for start, stop in _runs(n, canonicals):
            buf, offsets = canonicals.view(start, stop)
            buf, offsets, discounted, protected = _feature_texts(buf, offsets, boilerplate, settings)
            if discounted is not None:
                affected += int(discounted.sum())
                whole += int(protected.sum())
            sketcher.add(buf, offsets, release=canonicals.release)
            del buf
            progress.advance(stop - start)
    finally:
        sketcher.close()
    return sketcher.finish(text_order(slots), affected, whole)


def _compared_features(picked, canonicals, boilerplate, settings, word_store):
    """Features of the texts in slots ``picked``, chunk by chunk: from kept word hashes
    when there are some, else from the texts."""
    if word_store is not None:
        for _, _, (buf, offsets) in _chunks(picked, word_store):
            yield features_from_tokens(
                buf.view(np.uint64),
                offsets // 8,
                shingle_size=settings.shingle_size,
                hash_scheme=settings.hash_scheme,
            )
        return
    for _, _, (buf, offsets) in _chunks(picked, canonicals):
        buf, offsets, _, _ = _feature_texts(buf, offsets, boilerplate, settings)
        yield features_with(settings, buf, offsets)


@dataclass
class ComparedSets:
    """Shingle sets and TF-IDF rows of the texts that are compared, by local number."""

    local: np.ndarray  # distinct text → local number, -1 when not compared
    shingles: np.ndarray
    shingle_offsets: np.ndarray
    model: TfidfModel

    def of(self, texts: np.ndarray) -> np.ndarray:
        return self.local[texts]


def compared_sets(
    needed: np.ndarray,
    n_texts: int,
    slots: np.ndarray,
    canonicals: ByteStore,
    boilerplate: Boilerplate | None,
    frequencies: DocumentFrequency,
    settings,
    progress: Callable[[int], None] | None = None,
    word_store: ByteStore | None = None,
    kept: KeptSets | None = None,
    in_place: bool = False,
) -> ComparedSets:
    """Sorted unique shingles and unit TF-IDF rows of the distinct texts ``needed`` (sorted).

    With ``kept`` (the sets the sketch pass made of every text) they are picked out of
    those; with ``word_store`` (the word hashes `sketch_pass` kept, slot for slot), the
    shingles are made from those hashes; otherwise the texts are read and tokenized again.

    ``in_place=True`` (for callers that reach the sets only through `ComparedSets.of`):
    kept sets are used where they lie, their rows in slot order, and nothing is copied;
    their term counts all become TF-IDF weights (they are used up).
    """
    import scipy.sparse as sp

    needed = np.asarray(needed, dtype=np.int64)
    local = np.full(n_texts, -1, dtype=np.int64)
    picked = slots[needed]
    if kept is not None and in_place:
        local[needed] = picked
        model = frequencies.weigh(kept.counts)
        if progress:
            progress(needed.shape[0])
        return ComparedSets(local, kept.shingles, kept.shingle_offsets, model)
    local[needed] = np.arange(needed.shape[0])
    if kept is not None:
        # Made for every text while it was sketched: only picked out here.
        shingles, shingle_offsets = tokenize.gather_segments(kept.shingles, kept.shingle_offsets, picked)
        model = frequencies.weigh(kept.counts[picked])
        if progress:
            progress(needed.shape[0])
        return ComparedSets(local, shingles, shingle_offsets, model)
    # A text of b bytes has at most b + 1 shingles and terms: room for all of them is
    # reserved up front (pages never written are never resident) and filled chunk by
    # chunk, so no list of parts is joined at the end (which would hold everything twice).
    room = int(canonicals.sizes(picked).sum()) + needed.shape[0] + 1
    shingles = np.empty(room, dtype=np.uint64)
    indices = np.empty(room, dtype=np.int32 if frequencies.n_features <= 2**31 else np.int64)
    data = np.empty(room, dtype=np.float64)
    shingle_offsets = np.zeros(needed.shape[0] + 1, dtype=np.int64)
    indptr = np.zeros(needed.shape[0] + 1, dtype=np.int64)
    done = used_sh = used_nz = 0
    model = None
    for features in _compared_features(picked, canonicals, boilerplate, settings, word_store):
        n = int(features.token_offsets.shape[0] - 1)
        k = int(features.shingles.shape[0])
        shingles[used_sh : used_sh + k] = features.shingles
        shingle_offsets[done + 1 : done + n + 1] = used_sh + features.shingle_offsets[1:]
        model = frequencies.model(features.token_hashes, features.token_offsets)
        rows = model.rows
        indices[used_nz : used_nz + rows.nnz] = rows.indices
        data[used_nz : used_nz + rows.nnz] = rows.data
        indptr[done + 1 : done + n + 1] = used_nz + rows.indptr[1:]
        done, used_sh, used_nz = done + n, used_sh + k, used_nz + rows.nnz
        if progress:
            progress(n)
    if model is None:
        model = frequencies.model(np.zeros(0, np.uint64), np.zeros(1, np.int64))
    matrix = sp.csr_matrix(
        (data[:used_nz], indices[:used_nz], indptr), shape=(needed.shape[0], frequencies.n_features)
    )
    model = TfidfModel(matrix, model.columns, model.column_idf, model.unseen_idf, model.sublinear_tf)
    return ComparedSets(local, shingles[:used_sh], shingle_offsets, model)
