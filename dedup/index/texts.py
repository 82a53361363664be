"""The stored texts of an index: written as a run reads them, sketched with the plan's sketch step.

A run meets each new distinct text (no stored text has its content hash) as a canonical
form from the audit's normalize step (`dedup.normalize.batch`: canonical lines joined by
LF). `NewTexts` writes those with words at once, unsketched: a row in ``texts``, the
text's distinct line hashes (``text_lines``, its part of the template counter) and its
canonical form, compressed (``canonicals``). Once the run knows the template lines of the
whole indexed corpus (`dedup.index.templates`), `sketch_texts` reads the texts back
chunk by chunk, leaves their template lines out as an audit does
(`Boilerplate.strip`), and applies the plan's sketch step (`dedup.plan.sketch_batch`:
features, MinHash signatures, term counts, sorted shingle sets) — so what is stored is
what an audit compares.

A stored text whose template lines changed is given a new id (`renumber`) and sketched
with the new ones; its old postings are dead entries from then on (as for a text that
is gone) and go at the next merge.

Cost: O(bytes) to hash lines and compress (zlib, fastest level: about half the size of
the text) as texts are read; O(bytes) to decompress and sketch them; one row per text
in each table.
"""

from __future__ import annotations

import zlib
from collections.abc import Iterator

import numpy as np
import scipy.sparse as sp

from ..features import tokenize
from ..features.shingles import pack_bytes
from ..normalize import content_hash
from ..normalize.boilerplate import Boilerplate
from ..plan import Plan, sketch_batch
from ..progress import Progress
from ..settings import AuditSettings
from ..sketch.tfidf import DocumentFrequency
from .blobs import BlobError, pack_array
from .postings import write_segment
from .templates import CorpusLines, LineCounter, line_sets

__all__ = [
    "NewTexts",
    "text_sequence",
    "delete_unused_texts",
    "renumber",
    "stripped_otherwise",
    "sketch_texts",
]

# New texts (or bytes of them) gathered before they are written; texts read back and
# sketched together: large enough for the compiled kernels to pay off, small enough that
# a chunk's features stay in a few hundred megabytes.
CHUNK_TEXTS = 4096
CHUNK_BYTES = 32 * 2**20
# zlib's fastest level: the canonical forms are read back only when sketched again.
COMPRESSION_LEVEL = 1
# Ids per ``IN (...)`` query, below SQLite's smallest limit on bound values.
_IDS_PER_QUERY = 500


def text_sequence(connection) -> int:
    """The largest text id ever given (0 for none): later texts have larger ids."""
    row = connection.execute("SELECT seq FROM sqlite_sequence WHERE name = 'texts'").fetchone()
    return int(row[0]) if row else 0


class NewTexts:
    """The new distinct texts of a run, written unsketched as they are offered (see the
    module notes); ``counter`` counts their lines for the template step."""

    def __init__(self, connection, run: int, stored: set[str]) -> None:
        self.connection, self.run = connection, run
        self.known = stored  # content hashes stored or met in this run: offered once
        self.counter = LineCounter()
        self.written = 0
        self._pending: list[tuple[str, bytes, int]] = []
        self._pending_bytes = 0
        self._table = tokenize.word_table()

    def offer(self, digest: str, canonical: bytes, characters: int) -> None:
        """Take a text met in the reading (its canonical lines joined by LF)."""
        if not canonical or digest in self.known:
            return
        self.known.add(digest)
        self._pending.append((digest, canonical, characters))
        self._pending_bytes += len(canonical)
        if len(self._pending) >= CHUNK_TEXTS or self._pending_bytes >= CHUNK_BYTES:
            self.flush()

    def flush(self) -> None:
        """Write the texts offered so far that have words (an audit compares no other)."""
        if not self._pending:
            return
        buf, offsets = pack_bytes([canonical for _, canonical, _ in self._pending])
        keep = np.flatnonzero(tokenize.has_words(buf, offsets, self._table))
        if keep.size:
            buf, offsets = tokenize.gather_segments(buf, offsets, keep)
            values, value_offsets = line_sets(buf, offsets)
            self.counter.add_sets(values, keep.size)
            self._write([self._pending[k] for k in keep.tolist()], values, value_offsets)
        self._pending.clear()
        self._pending_bytes = 0

    def _write(self, texts: list[tuple[str, bytes, int]], values: np.ndarray, offsets: np.ndarray) -> None:
        db = self.connection
        for k, (digest, canonical, characters) in enumerate(texts):
            cursor = db.execute(
                "INSERT INTO texts (content_hash, characters, words, terms, shingle_count, sketched_hash, run) "
                "VALUES (?, ?, 0, 0, 0, '', ?)",
                (digest, characters, self.run),
            )
            text_id = cursor.lastrowid
            lines = values[offsets[k] : offsets[k + 1]]
            db.execute(
                "INSERT INTO text_lines (text_id, lines) VALUES (?, ?)", (text_id, pack_array(lines, "<u8"))
            )
            db.execute(
                "INSERT INTO canonicals (text_id, form) VALUES (?, ?)",
                (text_id, zlib.compress(canonical, COMPRESSION_LEVEL)),
            )
        self.written += len(texts)


def _delete(connection, text_ids: list[int]) -> None:
    rows = [(t,) for t in text_ids]
    for table in ("sketches", "text_lines", "canonicals", "texts"):
        connection.executemany(f"DELETE FROM {table} WHERE text_id = ?", rows)


def delete_unused_texts(connection, candidates: set[str]) -> int:
    """Delete the texts among ``candidates`` (content hashes) that no present document has;
    O(candidates) lookups."""
    unused = []
    for digest in sorted(candidates):
        still = connection.execute(
            "SELECT 1 FROM documents WHERE content_hash = ? AND status = 'present' LIMIT 1", (digest,)
        ).fetchone()
        if still is None:
            row = connection.execute("SELECT text_id FROM texts WHERE content_hash = ?", (digest,)).fetchone()
            if row is not None:
                unused.append(int(row[0]))
    _delete(connection, unused)
    return len(unused)


def renumber(connection, text_ids: list[int], run: int) -> int:
    """Give stored texts new ids (larger than any), unsketched, so this run sketches them
    again; their line sets and canonical forms move with them. Returns how many."""
    for old in text_ids:
        digest, characters = connection.execute(
            "SELECT content_hash, characters FROM texts WHERE text_id = ?", (old,)
        ).fetchone()
        connection.execute("DELETE FROM sketches WHERE text_id = ?", (old,))
        connection.execute("DELETE FROM texts WHERE text_id = ?", (old,))
        new = connection.execute(
            "INSERT INTO texts (content_hash, characters, words, terms, shingle_count, sketched_hash, run) "
            "VALUES (?, ?, 0, 0, 0, '', ?)",
            (digest, characters, run),
        ).lastrowid
        for table in ("text_lines", "canonicals"):
            connection.execute(f"UPDATE {table} SET text_id = ? WHERE text_id = ?", (new, old))
    return len(text_ids)


def _decompressed(text_id: int, form: bytes | None) -> bytes:
    """A stored canonical form; `BlobError` (a damaged index) when it is missing or damaged."""
    if form is None:
        raise BlobError(f"the canonical form of text {text_id} is missing")
    try:
        return zlib.decompress(form)
    except zlib.error as err:
        raise BlobError(f"the canonical form of text {text_id} does not decompress ({err})") from None


def _canonical_chunks(connection, text_ids: list[int]) -> Iterator[tuple[list[int], np.ndarray, np.ndarray]]:
    """The canonical forms of ``text_ids`` (in that order), packed, chunk by chunk."""
    ids: list[int] = []
    forms: list[bytes] = []
    size = 0
    for start in range(0, len(text_ids), _IDS_PER_QUERY):
        some = text_ids[start : start + _IDS_PER_QUERY]
        marks = ", ".join("?" * len(some))
        found = dict(
            connection.execute(f"SELECT text_id, form FROM canonicals WHERE text_id IN ({marks})", some)
        )
        for text_id in some:
            forms.append(_decompressed(text_id, found.get(text_id)))
            ids.append(text_id)
            size += len(forms[-1])
            if len(ids) >= CHUNK_TEXTS or size >= CHUNK_BYTES:
                yield ids, *pack_bytes(forms)
                ids, forms, size = [], [], 0
    if ids:
        yield ids, *pack_bytes(forms)


def _stripped(buf, offsets, boilerplate: Boilerplate, max_text_share: float):
    # An empty Boilerplate still turns the line breaks into spaces: the canonical text.
    out, out_offsets, _, _ = boilerplate.strip(buf, offsets, max_text_share)
    return out, out_offsets


def stripped_otherwise(
    connection, corpus: CorpusLines, lines: np.ndarray, boilerplate: Boilerplate, max_text_share: float
) -> list[int]:
    """Ids of the stored texts holding any of ``lines`` whose text, stripped of
    ``boilerplate``, is not what was sketched. O(bytes of the texts holding them)."""
    touched = corpus.touching(lines).tolist()
    sketched = {}
    for start in range(0, len(touched), _IDS_PER_QUERY):
        some = touched[start : start + _IDS_PER_QUERY]
        marks = ", ".join("?" * len(some))
        sketched.update(
            connection.execute(f"SELECT text_id, sketched_hash FROM texts WHERE text_id IN ({marks})", some)
        )
    changed = []
    for ids, buf, offsets in _canonical_chunks(connection, touched):
        out, out_offsets = _stripped(buf, offsets, boilerplate, max_text_share)
        for k, text_id in enumerate(ids):
            if content_hash(out[out_offsets[k] : out_offsets[k + 1]]) != sketched[text_id]:
                changed.append(text_id)
    return changed


class _Writer:
    """Sketches of chunks of texts written to ``texts`` and ``sketches``; their term
    counts kept for the run's postings segment."""

    def __init__(self, connection, settings: AuditSettings) -> None:
        self.connection, self.settings = connection, settings
        self.lsh = Plan.of(settings).lsh
        self.frequencies = DocumentFrequency(settings.tfidf_features, settings.sublinear_tf)
        self.ids: list[np.ndarray] = []
        self.counts: list[sp.csr_matrix] = []

    def add(self, ids: list[int], buf: np.ndarray, offsets: np.ndarray) -> None:
        hashes = [content_hash(buf[offsets[k] : offsets[k + 1]]) for k in range(len(ids))]
        part = sketch_batch(
            self.settings, buf, offsets, lsh=self.lsh, frequencies=self.frequencies, keep_sets=True
        )
        words = np.diff(part.features.token_offsets).tolist()
        terms = np.diff(part.counts.indptr).tolist()
        bounds = part.shingle_offsets.tolist()
        for k, text_id in enumerate(ids):
            shingles = part.shingles[bounds[k] : bounds[k + 1]]
            self.connection.execute(
                "UPDATE texts SET words = ?, terms = ?, shingle_count = ?, sketched_hash = ? WHERE text_id = ?",
                (words[k], terms[k], bounds[k + 1] - bounds[k], hashes[k], text_id),
            )
            self.connection.execute(
                "INSERT INTO sketches (text_id, signature, shingles) VALUES (?, ?, ?)",
                (text_id, pack_array(part.values[k], "<u4"), pack_array(shingles, "<u8")),
            )
        self.ids.append(np.asarray(ids, dtype=np.int64))
        self.counts.append(part.counts)

    def write_postings(self, run: int) -> None:
        if self.ids:
            write_segment(
                self.connection, run, np.concatenate(self.ids), sp.vstack(self.counts, format="csr")
            )


def sketch_texts(
    connection,
    settings: AuditSettings,
    boilerplate: Boilerplate,
    *,
    after: int,
    run: int,
    progress: Progress,
) -> int:
    """Sketch every text with an id above ``after`` (those this run wrote or renumbered),
    its template lines left out, and write the run's postings segment. Returns how many.

    Cost O(bytes of those texts): decompressing, stripping, the sketch step.
    """
    rows = connection.execute("SELECT text_id FROM texts WHERE text_id > ? ORDER BY text_id", (after,))
    ids = [row[0] for row in rows]
    progress.start("sketching", len(ids))
    writer = _Writer(connection, settings)
    for chunk_ids, buf, offsets in _canonical_chunks(connection, ids):
        writer.add(chunk_ids, *_stripped(buf, offsets, boilerplate, settings.boilerplate_max_text_share))
        progress.advance(len(chunk_ids))
    writer.write_postings(run)
    progress.done(f"{len(ids):,} texts")
    return len(ids)
