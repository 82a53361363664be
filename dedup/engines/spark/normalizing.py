"""The normalize step (a map) and the exact step (on the driver).

Normalize: each partition's documents, a record batch at a time, go through the same
compiled pass as on one machine (`dedup.normalize.batch.PreparedBatch`): canonical
form, characters, content hash, and whether the text has a word. The output keeps the
document's read position (``file_no``, ``entry_no``: the order the local engine reads
in), its original text (for the evidence of clustered documents) and its canonical
form (lines joined by LF when template lines are to be found).

Exact: the driver takes the small columns of every document (no text), and makes of
them the records, the empty documents and the distinct texts with the shared driver
steps (`mark_empty`, `DistinctTexts`). The canonical form of a distinct text is the one
of its first document *in read order*, as on one machine (two documents with the same
content hash may break their lines differently).
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass

import numpy as np
import pyarrow as pa

from ...features import tokenize
from ...features.shingles import pack_bytes
from ...ingest import LedgerEntry
from ...normalize.batch import PreparedBatch
from ..driver import DistinctTexts, mark_empty
from .columns import numbers

__all__ = [
    "DOCUMENTS",
    "NORMALIZED",
    "normalized_batch",
    "normalize_partition",
    "ledger_batch",
    "ExactStep",
    "exact_step",
]

# Documents as read: read position, id, original text and what the records keep of them.
DOCUMENTS = pa.schema(
    [
        ("file_no", pa.int64()),
        ("entry_no", pa.int64()),
        ("id", pa.string()),
        ("text", pa.string()),
        ("source", pa.string()),
        ("format", pa.string()),
        ("title", pa.string()),
        ("date", pa.float64()),
    ]
)
# What the normalize map leaves: a document (kind 0) or, when files are read in the map
# step, a ledger entry (kind 1), with the same read position.
_LEDGER_FIELDS = [
    ("input", pa.string()),
    ("status", pa.string()),
    ("reason", pa.string()),
    ("entry_format", pa.string()),
    ("size", pa.int64()),
    ("encoding", pa.string()),
    ("record", pa.string()),
    ("document_id", pa.string()),
]
NORMALIZED = pa.schema(
    [
        ("kind", pa.int32()),
        *DOCUMENTS,
        ("bytes", pa.int64()),
        ("characters", pa.int64()),
        ("content_hash", pa.string()),
        ("has_words", pa.bool_()),
        ("canonical", pa.binary()),
        *_LEDGER_FIELDS,
    ]
)
# The columns of a document the driver takes (no text).
RECORD_COLUMNS = [
    "file_no",
    "entry_no",
    "id",
    "source",
    "format",
    "title",
    "date",
    "bytes",
    "characters",
    "content_hash",
    "has_words",
]


class _Text:
    """What `PreparedBatch` reads and writes of a document."""

    __slots__ = ("text", "utf8", "prepared")

    def __init__(self, text: str) -> None:
        self.text, self.utf8, self.prepared = text, None, None


def normalized_batch(
    documents: pa.RecordBatch | pa.Table, lines: bool, keep_text: bool = True
) -> pa.RecordBatch:
    """The normalize step over one batch of `DOCUMENTS` (a map: no state, any batch).

    ``keep_text``: the original text goes on with the document (else it is left out, to
    be read again from where it came from). Cost: one compiled pass over the batch's bytes
    (`PreparedBatch`), plus the texts only Python can normalize; the texts are turned
    into Python strings once.
    """
    texts = [_Text(text or "") for text in documents.column("text").to_pylist()]
    PreparedBatch(texts, lines).finish(parallel=False)
    stored = [doc.prepared[1] for doc in texts]
    buf, offsets = pack_bytes(stored)
    words = tokenize.has_words(buf, offsets, tokenize.word_table())
    n = len(texts)
    columns = {name: documents.column(name) for name in DOCUMENTS.names}
    if not keep_text:
        columns["text"] = pa.nulls(n, pa.string())
    added = {
        "kind": pa.array(np.zeros(n, np.int32)),
        "bytes": pa.array(np.asarray([len(doc.prepared[0]) for doc in texts], np.int64)),
        "characters": pa.array(np.asarray([doc.prepared[2] for doc in texts], np.int64)),
        "content_hash": pa.array([doc.prepared[3] for doc in texts], pa.string()),
        "has_words": pa.array(words.astype(bool)),
        "canonical": pa.array(stored, pa.binary()),
    }
    nulls = {name: pa.nulls(n, kind) for name, kind in _LEDGER_FIELDS}
    return pa.RecordBatch.from_arrays(
        [columns.get(name, added.get(name, nulls.get(name))) for name in NORMALIZED.names], schema=NORMALIZED
    )


def normalize_partition(lines: bool, keep_text: bool = True):
    """The normalize map for ``mapInArrow``: batches of `DOCUMENTS` → batches of `NORMALIZED`
    (without the original texts unless ``keep_text``)."""

    def run(batches: Iterator[pa.RecordBatch]) -> Iterator[pa.RecordBatch]:
        for batch in batches:
            if batch.num_rows:
                yield normalized_batch(batch, lines, keep_text)

    return run


def ledger_batch(positions: list[tuple[int, int]], entries: list[LedgerEntry]) -> pa.RecordBatch:
    """Ledger entries (kind 1 rows of `NORMALIZED`) at their read positions."""
    n = len(entries)
    values = {
        "kind": pa.array(np.ones(n, np.int32)),
        "file_no": pa.array([p[0] for p in positions], pa.int64()),
        "entry_no": pa.array([p[1] for p in positions], pa.int64()),
        "input": pa.array([e.input for e in entries], pa.string()),
        "status": pa.array([e.status for e in entries], pa.string()),
        "reason": pa.array([e.reason for e in entries], pa.string()),
        "entry_format": pa.array([e.format for e in entries], pa.string()),
        "size": pa.array([e.size for e in entries], pa.int64()),
        "encoding": pa.array([e.encoding for e in entries], pa.string()),
        "record": pa.array([e.record for e in entries], pa.string()),
        "document_id": pa.array([e.document_id for e in entries], pa.string()),
    }
    arrays = [values.get(name, pa.nulls(n, NORMALIZED.field(name).type)) for name in NORMALIZED.names]
    return pa.RecordBatch.from_arrays(arrays, schema=NORMALIZED)


@dataclass
class ExactStep:
    """What the exact step leaves.

    Attributes
    ----------
    documents : list of dict
        The records of every document, in id order (as the local engine makes them).
    texts : DistinctTexts
        Documents with words and their distinct texts; ``texts.slots[t] == t``.
    position : ndarray
        ``(file_no, entry_no)`` of each record, shape ``(n_documents, 2)``.
    first_read : ndarray
        ``(file_no, entry_no, t)``: the document whose canonical form is text ``t``'s.
    """

    documents: list[dict]
    texts: DistinctTexts
    position: np.ndarray
    first_read: np.ndarray


def _records(rows: pa.Table, with_date: bool) -> tuple[list[dict], np.ndarray]:
    """Document records in id order, and their read positions."""
    columns = {name: rows.column(name).to_pylist() for name in RECORD_COLUMNS}
    order = sorted(range(rows.num_rows), key=columns["id"].__getitem__)
    documents = []
    for i in order:
        record = {
            "id": columns["id"][i],
            "source": columns["source"][i],
            "format": columns["format"][i],
            "title": columns["title"][i],
            "bytes": columns["bytes"][i],
            "characters": columns["characters"][i],
            "content_hash": columns["content_hash"][i],
            "status": "read",
        }
        if with_date:
            record["date"] = columns["date"][i]
        documents.append(record)
    files, entries = numbers(rows.column("file_no"))[order], numbers(rows.column("entry_no"))[order]
    return documents, np.stack([files, entries], axis=1) if order else np.zeros((0, 2), np.int64)


def exact_step(rows: pa.Table, ledger: list[LedgerEntry], with_date: bool) -> ExactStep:
    """The exact step on the driver, from the `RECORD_COLUMNS` of every document read.

    Empty documents are marked (records and ``ledger``), documents with words grouped by
    content hash (`DistinctTexts`), and each distinct text given the read position of its
    first document in read order. Cost: O(n log n) for the sort by id; the driver holds
    one record per document, as on one machine.
    """
    documents, position = _records(rows, with_date)
    words = dict(zip(rows.column("content_hash").to_pylist(), rows.column("has_words").to_pylist()))
    wordless = {
        rec["content_hash"] for rec in documents if rec["characters"] and not words[rec["content_hash"]]
    }
    row_of = {rec["id"]: i for i, rec in enumerate(documents)}
    kept = mark_empty(documents, wordless, ledger)
    number: dict[str, int] = {}
    for rec in kept:
        number.setdefault(rec["content_hash"], len(number))
    texts = DistinctTexts.of(kept, number)
    first = np.full((texts.n, 2), np.iinfo(np.int64).max, dtype=np.int64)
    for rec in kept:
        t, here = number[rec["content_hash"]], position[row_of[rec["id"]]]
        if (here[0], here[1]) < (first[t, 0], first[t, 1]):
            first[t] = here
    first_read = np.column_stack([first, np.arange(texts.n, dtype=np.int64)])
    return ExactStep(documents, texts, position, first_read)
