"""The local engine's compared sets: shingle sets and TF-IDF rows of the texts compared.

Exact scores need each compared text's sorted unique shingles and its unit TF-IDF row;
only texts with a candidate pair (or otherwise compared) are rebuilt, from the sets the
sketch step kept, from word hashes kept on disk, or from the texts read again.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from ..features import tokenize
from ..features.shingles import features_from_tokens, features_with
from ..normalize.boilerplate import Boilerplate
from ..sketch.tfidf import DocumentFrequency, TfidfModel
from ..workdir import ByteStore
from .sketching import KeptSets, chunk_bounds, template_stripped

__all__ = ["ComparedSets", "compared_sets", "SlotRows"]


class SlotRows:
    """Rows of an array stored in slot order, indexed by distinct-text number."""

    def __init__(self, rows: np.ndarray, slot_of: np.ndarray) -> None:
        self.rows, self.slot_of = rows, slot_of
        self.shape = (slot_of.shape[0], *rows.shape[1:])

    def __getitem__(self, texts):
        return np.asarray(self.rows[self.slot_of[texts]])


@dataclass
class ComparedSets:
    """Shingle sets and TF-IDF rows of the texts that are compared, by local number."""

    local: np.ndarray  # distinct text → local number, -1 when not compared
    shingles: np.ndarray
    shingle_offsets: np.ndarray
    model: TfidfModel

    def of(self, texts: np.ndarray) -> np.ndarray:
        return self.local[texts]


def _chunks(slots: np.ndarray, store: ByteStore):
    for start, stop in chunk_bounds(store.sizes(slots)):
        yield store.gather(slots[start:stop])


def _compared_features(picked, canonicals, boilerplate, settings, word_store):
    """Features of the texts in slots ``picked``, chunk by chunk: from kept word hashes
    when there are some, else from the texts."""
    if word_store is not None:
        for buf, offsets in _chunks(picked, word_store):
            yield features_from_tokens(
                buf.view(np.uint64),
                offsets // 8,
                shingle_size=settings.shingle_size,
                hash_scheme=settings.hash_scheme,
            )
        return
    for buf, offsets in _chunks(picked, canonicals):
        buf, offsets, _, _ = template_stripped(buf, offsets, boilerplate, settings)
        yield features_with(settings, buf, offsets)


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

    With ``kept`` (the sets the sketch step made of every text) they are picked out of
    those; with ``word_store`` (the word hashes `sketch_pass` kept, slot for slot), the
    shingles are made from those hashes; otherwise the texts are read and tokenized again.

    ``in_place=True`` (for callers that reach the sets only through `ComparedSets.of`):
    kept sets are used where they lie, their rows in slot order, and nothing is copied;
    their term counts all become TF-IDF weights (they are used up).
    """
    needed = np.asarray(needed, dtype=np.int64)
    local = np.full(n_texts, -1, dtype=np.int64)
    picked = slots[needed]
    if kept is not None:
        if in_place:
            local[needed] = picked
            shingles, shingle_offsets, model = (
                kept.shingles,
                kept.shingle_offsets,
                frequencies.weigh(kept.counts),
            )
        else:
            # Made for every text while it was sketched: only picked out here.
            local[needed] = np.arange(needed.shape[0])
            shingles, shingle_offsets = tokenize.gather_segments(kept.shingles, kept.shingle_offsets, picked)
            model = frequencies.weigh(kept.counts[picked])
        if progress:
            progress(needed.shape[0])
        return ComparedSets(local, shingles, shingle_offsets, model)
    local[needed] = np.arange(needed.shape[0])
    features = _compared_features(picked, canonicals, boilerplate, settings, word_store)
    shingles, shingle_offsets, model = _filled(
        features, frequencies, int(canonicals.sizes(picked).sum()), needed.shape[0], progress
    )
    return ComparedSets(local, shingles, shingle_offsets, model)


def _filled(features, frequencies: DocumentFrequency, text_bytes: int, n: int, progress):
    """Shingles, their offsets and the TF-IDF model of ``n`` texts, filled chunk by chunk.

    A text of b bytes has at most b + 1 shingles and terms: room for all of them is
    reserved up front (pages never written are never resident) and filled chunk by
    chunk, so no list of parts is joined at the end (which would hold everything twice).
    """
    import scipy.sparse as sp

    room = text_bytes + n + 1
    shingles = np.empty(room, dtype=np.uint64)
    width = frequencies.width  # the vocabulary's size, or the hashed feature space
    indices = np.empty(room, dtype=np.int32 if width <= 2**31 else np.int64)
    data = np.empty(room, dtype=np.float64)
    shingle_offsets = np.zeros(n + 1, dtype=np.int64)
    indptr = np.zeros(n + 1, dtype=np.int64)
    done = used_sh = used_nz = 0
    model = None
    for part in features:
        count = int(part.token_offsets.shape[0] - 1)
        k = int(part.shingles.shape[0])
        shingles[used_sh : used_sh + k] = part.shingles
        shingle_offsets[done + 1 : done + count + 1] = used_sh + part.shingle_offsets[1:]
        model = frequencies.model(part.token_hashes, part.token_offsets)
        rows = model.rows
        indices[used_nz : used_nz + rows.nnz] = rows.indices
        data[used_nz : used_nz + rows.nnz] = rows.data
        indptr[done + 1 : done + count + 1] = used_nz + rows.indptr[1:]
        done, used_sh, used_nz = done + count, used_sh + k, used_nz + rows.nnz
        if progress:
            progress(count)
    if model is None:
        model = frequencies.model(np.zeros(0, np.uint64), np.zeros(1, np.int64))
    matrix = sp.csr_matrix((data[:used_nz], indices[:used_nz], indptr), shape=(n, width))
    model = TfidfModel(
        matrix, model.columns, model.column_idf, model.unseen_idf, model.sublinear_tf, model.vocabulary
    )
    return shingles[:used_sh], shingle_offsets, model
