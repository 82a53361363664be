"""The sketch step (a map) and the frequencies step (a reduce).

Sketch: each partition's distinct texts, a batch at a time, have their template lines
left out (`template_stripped`, with the broadcast `Boilerplate`) and go through the
plan's map function (`dedup.plan.sketch_batch`): features, and for LSH the MinHash
signature and band keys of every text. Band keys travel as ``array<long>`` (the bits
of the uint64 keys); signatures as big-endian bytes, so that Spark's byte order on
binary values is the order of the signatures (the order oversize buckets need).

Frequencies: each partition counts its texts' document frequencies in a
`DocumentFrequency` of its own (as the local engine's sketcher does chunk by chunk),
and leaves it — with its template counts and the template lines' texts it met — as one
summary row; the summaries are merged pairwise on the executors (``treeReduce`` of
`DocumentFrequency.merge`), and the merged one reaches the driver. A dense count is
8 bytes per hashed column (8 MiB at 2^20 columns), compressed on the wire.

One map pass leaves both kinds of rows (``kind`` 0: a text; 1: a partition summary),
persisted, so the texts are tokenized once.
"""

from __future__ import annotations

import pickle
import zlib
from collections.abc import Iterator
from dataclasses import dataclass, field

import numpy as np
import pyarrow as pa

from ...normalize.boilerplate import Boilerplate
from ...plan import sketch_batch
from ...sketch.tfidf import DocumentFrequency
from ..sketching import template_stripped
from .columns import big_endian_rows, long_lists, numbers, packed

__all__ = ["SKETCHED", "PartitionSummary", "sketch_partition", "merged_summaries"]

SKETCHED = pa.schema(
    [
        ("kind", pa.int32()),
        ("t", pa.int64()),
        ("keys", pa.list_(pa.int64())),
        ("signature", pa.binary()),
        ("summary", pa.binary()),
    ]
)


@dataclass
class PartitionSummary:
    """What one partition's sketching counted: merged two by two into the corpus's."""

    frequencies: DocumentFrequency
    texts_affected: int = 0
    texts_compared_whole: int = 0
    line_texts: dict[int, str] = field(default_factory=dict)

    def merge(self, other: PartitionSummary) -> PartitionSummary:
        """Add ``other`` (another partition's texts); returns self."""
        self.frequencies.merge(other.frequencies)
        self.texts_affected += other.texts_affected
        self.texts_compared_whole += other.texts_compared_whole
        for h, text in other.line_texts.items():
            self.line_texts.setdefault(h, text)
        return self

    def dumps(self) -> bytes:
        """Pickled and compressed (a dense count of mostly zeros shrinks a hundredfold)."""
        return zlib.compress(pickle.dumps(self, protocol=pickle.HIGHEST_PROTOCOL), 1)

    @staticmethod
    def loads(data: bytes) -> PartitionSummary:
        """The summary `dumps` made."""
        return pickle.loads(zlib.decompress(data))


def _text_rows(t: np.ndarray, part) -> pa.RecordBatch:
    n = t.shape[0]
    keys = long_lists(part.keys) if part.keys is not None else pa.nulls(n, pa.list_(pa.int64()))
    signature = big_endian_rows(part.values) if part.values is not None else pa.nulls(n, pa.binary())
    arrays = [pa.array(np.zeros(n, np.int32)), pa.array(t), keys, signature, pa.nulls(n, pa.binary())]
    return pa.RecordBatch.from_arrays(arrays, schema=SKETCHED)


def _summary_row(summary: PartitionSummary) -> pa.RecordBatch:
    arrays = [
        pa.array([1], pa.int32()),
        pa.nulls(1, pa.int64()),
        pa.nulls(1, pa.list_(pa.int64())),
        pa.nulls(1, pa.binary()),
        pa.array([summary.dumps()], pa.binary()),
    ]
    return pa.RecordBatch.from_arrays(arrays, schema=SKETCHED)


def sketch_partition(settings, lsh: tuple[int, int] | None, boilerplate):
    """The sketch map for ``mapInArrow`` over distinct texts (``t``, ``canonical``).

    ``boilerplate`` is a broadcast `Boilerplate` (or None). Each partition strips with a
    copy of its own (the copy records the texts of the template lines it meets).
    """

    def run(batches: Iterator[pa.RecordBatch]) -> Iterator[pa.RecordBatch]:
        found = boilerplate.value if boilerplate is not None else None
        mine = Boilerplate(found.counts, found.limit, {}) if found is not None else None
        summary = PartitionSummary(DocumentFrequency(settings.tfidf_features, settings.sublinear_tf))
        for batch in batches:
            if not batch.num_rows:
                continue
            buf, offsets = packed(batch.column("canonical"))
            buf, offsets, discounted, protected = template_stripped(buf, offsets, mine, settings)
            if discounted is not None:
                summary.texts_affected += int(discounted.sum())
                summary.texts_compared_whole += int(protected.sum())
            part = sketch_batch(
                settings, buf, offsets, lsh=lsh, frequencies=summary.frequencies, keep_sets=False
            )
            summary.frequencies.add(part.features.token_hashes, part.features.token_offsets)
            yield _text_rows(numbers(batch.column("t")), part)
        if mine is not None:
            summary.line_texts = mine.texts
        yield _summary_row(summary)

    return run


def _loaded(row) -> PartitionSummary:
    return PartitionSummary.loads(row[0])


def _merged(a: PartitionSummary, b: PartitionSummary) -> PartitionSummary:
    return a.merge(b)


def merged_summaries(sketched, settings) -> PartitionSummary:
    """The partitions' summaries of a sketched DataFrame merged (the frequencies reduce).

    A tree of merges on the executors (depth 2), then the last on the driver: every
    partition's document frequencies are added up, whatever the partitioning.
    """
    rows = sketched.where("kind = 1").select("summary").rdd
    if rows.isEmpty():
        return PartitionSummary(DocumentFrequency(settings.tfidf_features, settings.sublinear_tf))
    return rows.map(_loaded).treeReduce(_merged, depth=2)
