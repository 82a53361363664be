"""The templates step (a reduce): template lines counted over distinct texts.

Each partition counts, for every line hash, how many of its distinct texts hold the
line (as `BoilerplateCounter.add` does: a text counts a line once); Spark sums the
partitions' counts by line hash (a shuffle keyed by line hash, summed map-side first,
so about 16 bytes per distinct line per partition cross the network); only the lines
that reach the limit — and the user's known lines — come back to the driver, which
makes the `Boilerplate` exactly as `BoilerplateCounter.find` does from the same counts.
The driver's copy is then broadcast to the sketch step, which strips the lines.

Cost: O(lines) per partition (compiled hashing and a sort); the driver holds only the
template lines.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Iterator

import numpy as np
import pyarrow as pa

from ...features.hashing import sort_unique_segments
from ...normalize.boilerplate import Boilerplate
from ...normalize.lines import line_hashes, line_spans
from .columns import packed

__all__ = ["LINE_COUNTS", "count_lines", "boilerplate_of_counts", "known_line_hashes", "find_templates"]

LINE_COUNTS = pa.schema([("line", pa.int64()), ("texts", pa.int64())])


def count_lines(batches: Iterator[pa.RecordBatch]) -> Iterator[pa.RecordBatch]:
    """Map over one partition of distinct texts (column ``canonical``, lines joined by LF):
    each line hash with the number of the partition's texts that hold it."""
    parts = []
    for batch in batches:
        buf, offsets = packed(batch.column("canonical"))
        starts, stops, per_text = line_spans(buf, offsets)
        distinct, _ = sort_unique_segments(line_hashes(buf, starts, stops), per_text)
        parts.append(distinct)
    if not parts:
        return
    values, counts = np.unique(np.concatenate(parts), return_counts=True)
    yield pa.RecordBatch.from_arrays(
        [pa.array(values.view(np.int64)), pa.array(counts.astype(np.int64))], schema=LINE_COUNTS
    )


def known_line_hashes(known: Iterable[str]) -> tuple[list[str], list[int]]:
    """The user's known lines (non-empty) and their line hashes, as `find` hashes them."""
    known = [line for line in known if line]
    if not known:
        return [], []
    buf = np.frombuffer("\n".join(known).encode("utf-8"), dtype=np.uint8)
    starts, stops, _ = line_spans(buf, np.array([0, buf.shape[0]], dtype=np.int64))
    return known, line_hashes(buf, starts, stops).tolist()


def boilerplate_of_counts(
    values: np.ndarray, counts: np.ndarray, n_texts: int, *, share: float, min_texts: int, known=()
) -> Boilerplate:
    """`BoilerplateCounter.find` from line counts already summed: ``values`` (sorted uint64
    line hashes) with the number of texts each is in, out of ``n_texts`` texts.

    ``values`` must hold every line that reaches the limit and every known line that
    appears at all; others may be left out (they change nothing).
    """
    limit = max(min_texts, math.ceil(share * n_texts))
    chosen = counts >= limit
    found = dict(zip(values[chosen].tolist(), counts[chosen].tolist()))
    texts: dict[int, str] = {}
    lines, hashes = known_line_hashes(known)
    for line, h in zip(lines, hashes):
        where = int(np.searchsorted(values, np.uint64(h)))
        seen = where < values.shape[0] and int(values[where]) == h
        found.setdefault(h, int(counts[where]) if seen else 0)
        texts.setdefault(h, line)
    return Boilerplate(found, limit, texts)


def find_templates(distinct_texts, n_texts: int, settings, known=()) -> Boilerplate:
    """The template lines of the distinct texts (DataFrame with ``canonical``).

    A reduce: partitions' line counts summed by line hash in Spark; the lines that reach
    max(min_texts, ceil(share * n_texts)) texts, and the known ones, collected.
    """
    from pyspark.sql import functions as F

    from .columns import ddl

    limit = max(settings.boilerplate_min_texts, math.ceil(settings.boilerplate_share * n_texts))
    _, hashes = known_line_hashes(known)
    signed = [int(np.uint64(h).view(np.int64)) for h in hashes]
    counts = (
        distinct_texts.select("canonical")
        .mapInArrow(count_lines, ddl(LINE_COUNTS))
        .groupBy("line")
        .agg(F.sum("texts").alias("texts"))
    )
    wanted = F.col("texts") >= limit
    if signed:
        wanted = wanted | F.col("line").isin(signed)
    table = counts.where(wanted).toArrow()
    values = np.asarray(table.column("line").to_numpy(), dtype=np.int64).view(np.uint64)
    tally = np.asarray(table.column("texts").to_numpy(), dtype=np.int64)
    order = np.argsort(values, kind="stable")
    return boilerplate_of_counts(
        values[order],
        tally[order],
        n_texts,
        share=settings.boilerplate_share,
        min_texts=settings.boilerplate_min_texts,
        known=known,
    )
