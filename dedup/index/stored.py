"""The texts an index holds, read back: for checks that compare new texts with an indexed corpus.

The index keeps each distinct text once, in its canonical form (the audit's normalize
step: lower case, markup removed, one line per line; see `dedup.index.texts`), and the
documents that have it. `stored_texts` streams them, one distinct text at a time, so a
check can use a whole indexed corpus as its reference material without reading its files
again.

Cost: one query for the present documents (ids and content hashes, held in memory), then
the compressed forms read and decompressed in chunks of `CHUNK_TEXTS`.
"""

from __future__ import annotations

from collections.abc import Iterator
from typing import NamedTuple

from .store import Index
from .texts import _decompressed

__all__ = ["StoredText", "stored_texts", "CHUNK_TEXTS"]

CHUNK_TEXTS = 500


class StoredText(NamedTuple):
    """One distinct indexed text: the documents that have it (sorted), its hash and form."""

    doc_ids: list[str]
    content_hash: str
    text: str


def _present(db) -> dict[str, list[str]]:
    """Content hash → ids of the present documents with that text (texts with words only)."""
    holders: dict[str, list[str]] = {}
    rows = db.execute(
        "SELECT d.content_hash, d.doc_id FROM documents d JOIN texts t ON t.content_hash = d.content_hash "
        "WHERE d.status = 'present' ORDER BY d.doc_id"
    )
    for digest, doc_id in rows:
        holders.setdefault(digest, []).append(doc_id)
    return holders


def stored_texts(index: Index) -> Iterator[StoredText]:
    """Every distinct text of the present documents, in the order of their first document id.

    Raises `dedup.index.IndexFileError` where the index cannot be read, and
    `dedup.index.blobs.BlobError` for a text whose stored form is damaged.
    """
    with index.reading() as db:
        holders = _present(db)
        order = sorted(holders, key=lambda digest: holders[digest][0])
        for start in range(0, len(order), CHUNK_TEXTS):
            chunk = order[start : start + CHUNK_TEXTS]
            marks = ", ".join("?" * len(chunk))
            found = {
                digest: (text_id, form)
                for digest, text_id, form in db.execute(
                    "SELECT t.content_hash, t.text_id, c.form FROM texts t "
                    f"LEFT JOIN canonicals c ON c.text_id = t.text_id WHERE t.content_hash IN ({marks})",
                    chunk,
                )
            }
            for digest in chunk:
                text_id, form = found[digest]
                text = _decompressed(text_id, form).decode("utf-8", "surrogatepass")
                yield StoredText(holders[digest], digest, text)
