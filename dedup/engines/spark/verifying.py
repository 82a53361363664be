"""The compared sets (a map), the verify step (a map over pairs) and the sets the driver needs.

Compared sets: the texts that have a candidate pair (or an exact copy) are read again
and made into what exact scores need — sorted unique shingles and the unit TF-IDF row,
weighted with the merged document frequencies (broadcast) — as the local engine does
for the texts it compares (`template_stripped`, `features_with`, `DocumentFrequency.model`).

Verify: candidate pairs are joined with the sets of both their texts (two joins keyed
by text number: each pair row then carries both sets), and each batch of pair rows is
scored by the same kernels as on one machine: `may_reach` rules most pairs out by a
merge that stops early, `score_pairs` scores the rest; only pairs whose deciding score
reaches the threshold come back to the driver.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator
from dataclasses import dataclass

import numpy as np
import pyarrow as pa
import scipy.sparse as sp

from ...candidates import exact_candidate_pairs
from ...features.shingles import features_with
from ...settings import SettingsError
from ...verify import PairScores, deciding_score, may_reach, score_pairs
from ..sketching import template_stripped
from .columns import numbers, packed, packed_values, values_column

__all__ = [
    "SETS",
    "CONFIRMED",
    "PAIRS",
    "compared_sets_partition",
    "verify_partition",
    "DriverSets",
    "driver_sets",
    "driver_search",
    "DRIVER_SEARCH_VALUES",
]

SETS = pa.schema(
    [("t", pa.int64()), ("shingles", pa.binary()), ("columns", pa.binary()), ("weights", pa.binary())]
)
PAIRS = pa.schema([("left", pa.int64()), ("right", pa.int64())])
# Most values (shingles, or TF-IDF entries) the exact search of containment or cosine
# collects to the driver (8 bytes each, 16 for a TF-IDF entry; 4 GiB of shingles here).
DRIVER_SEARCH_VALUES = 500_000_000
CONFIRMED = pa.schema(
    [
        ("left", pa.int64()),
        ("right", pa.int64()),
        ("shared", pa.int64()),
        ("jaccard", pa.float64()),
        ("containment_left_in_right", pa.float64()),
        ("containment_right_in_left", pa.float64()),
        ("cosine", pa.float64()),
        ("decided", pa.float64()),
    ]
)


def compared_sets_partition(settings, boilerplate, frequencies):
    """The compared-sets map for ``mapInArrow`` over distinct texts (``t``, ``canonical``):
    each text's sorted unique shingles and TF-IDF row (``columns`` int64, ``weights``
    float64). ``boilerplate`` and ``frequencies`` are broadcasts (boilerplate may be None).
    Cost: the texts tokenized again, O(bytes + shingles log shingles)."""

    def run(batches: Iterator[pa.RecordBatch]) -> Iterator[pa.RecordBatch]:
        found = boilerplate.value if boilerplate is not None else None
        freq = frequencies.value
        for batch in batches:
            if not batch.num_rows:
                continue
            buf, offsets = packed(batch.column("canonical"))
            buf, offsets, _, _ = template_stripped(buf, offsets, found, settings)
            features = features_with(settings, buf, offsets)
            rows = freq.model(features.token_hashes, features.token_offsets).rows
            arrays = [
                batch.column("t"),
                values_column(features.shingles, features.shingle_offsets),
                values_column(rows.indices.astype(np.int64), rows.indptr),
                values_column(rows.data.astype(np.float64), rows.indptr),
            ]
            yield pa.RecordBatch.from_arrays(arrays, schema=SETS)

    return run


@dataclass
class PackedSets:
    """Shingle sets and TF-IDF rows of some texts, by row number."""

    shingles: np.ndarray
    offsets: np.ndarray
    rows: sp.csr_matrix


def packed_sets(parts: list[tuple], n_features: int) -> PackedSets:
    """Sets given as ``(shingles column, columns column, weights column)`` parts, joined
    in the order given (row numbers count on from part to part)."""
    shingle_parts, offset_parts, index_parts, weight_parts, indptr_parts = [], [], [], [], []
    shingle_base = weight_base = 0
    for shingles_col, columns_col, weights_col in parts:
        if shingles_col is None:  # TF-IDF rows only
            shingles, offsets = np.zeros(0, np.uint64), np.zeros(len(columns_col) + 1, np.int64)
        else:
            shingles, offsets = packed_values(shingles_col, np.uint64)
        indices, indptr = packed_values(columns_col, np.int64)
        weights, _ = packed_values(weights_col, np.float64)
        shingle_parts.append(shingles)
        offset_parts.append(offsets[1:] + shingle_base)
        index_parts.append(indices)
        weight_parts.append(weights)
        indptr_parts.append(indptr[1:] + weight_base)
        shingle_base += int(offsets[-1])
        weight_base += int(indptr[-1])
    offsets = np.concatenate([np.zeros(1, np.int64), *offset_parts])
    indptr = np.concatenate([np.zeros(1, np.int64), *indptr_parts])
    shingles = np.concatenate(shingle_parts) if shingle_parts else np.zeros(0, np.uint64)
    indices = np.concatenate(index_parts) if index_parts else np.zeros(0, np.int64)
    weights = np.concatenate(weight_parts) if weight_parts else np.zeros(0, np.float64)
    width = np.int32 if n_features <= 2**31 else np.int64
    rows = sp.csr_matrix((weights, indices.astype(width), indptr), shape=(offsets.shape[0] - 1, n_features))
    return PackedSets(shingles, offsets, rows)


def verify_partition(settings, n_features: int):
    """The verify map for ``mapInArrow`` over pair rows (``left``, ``right`` and the sets of
    each: ``l_shingles``, ``l_columns``, ``l_weights``, ``r_…``): the confirmed pairs with
    their scores. Cost per batch O(sum of the pairs' set sizes), as on one machine."""

    def run(batches: Iterator[pa.RecordBatch]) -> Iterator[pa.RecordBatch]:
        for batch in batches:
            k = batch.num_rows
            if not k:
                continue
            sets = packed_sets(
                [
                    (batch.column("l_shingles"), batch.column("l_columns"), batch.column("l_weights")),
                    (batch.column("r_shingles"), batch.column("r_columns"), batch.column("r_weights")),
                ],
                n_features,
            )
            ends = np.arange(k, dtype=np.int64)
            reach = may_reach(
                sets.shingles, sets.offsets, ends, ends + k, settings.measure, settings.threshold
            )
            picked = ends[reach]
            scores = score_pairs(sets.shingles, sets.offsets, sets.rows, picked, picked + k)
            decided = deciding_score(scores, settings.measure) if len(scores) else np.zeros(0)
            sure = decided >= settings.threshold
            kept = picked[sure]
            arrays = [
                pa.array(numbers(batch.column("left"))[kept]),
                pa.array(numbers(batch.column("right"))[kept]),
                pa.array(scores.shared[sure].astype(np.int64)),
                pa.array(scores.jaccard[sure]),
                pa.array(scores.containment_left_in_right[sure]),
                pa.array(scores.containment_right_in_left[sure]),
                pa.array(scores.cosine[sure]),
                pa.array(np.asarray(decided[sure], dtype=np.float64)),
            ]
            yield pa.RecordBatch.from_arrays(arrays, schema=CONFIRMED)

    return run


def confirmed_scores(table: pa.Table) -> tuple[PairScores, np.ndarray]:
    """Confirmed pairs collected from the verify map, in (left, right) order as on one
    machine, as `PairScores` and deciding scores."""
    left, right = numbers(table.column("left")), numbers(table.column("right"))
    order = np.lexsort((right, left))
    scores = PairScores(
        left[order],
        right[order],
        numbers(table.column("shared"))[order],
        *(
            numbers(table.column(name), np.float64)[order]
            for name in ("jaccard", "containment_left_in_right", "containment_right_in_left", "cosine")
        ),
    )
    return scores, numbers(table.column("decided"), np.float64)[order]


@dataclass
class DriverSets:
    """The sets of some distinct texts on the driver: ``local[t]`` is text t's row (-1: none)."""

    local: np.ndarray
    sets: PackedSets

    def sizes(self, texts: np.ndarray) -> np.ndarray:
        """Shingles of each text."""
        return np.diff(self.sets.offsets)[self.local[texts]]

    def scorer(self, text_of_doc: np.ndarray) -> Callable[[np.ndarray, np.ndarray], PairScores]:
        """``score_against(members, keepers)`` over kept documents (for `cluster_step`)."""

        def score_against(members: np.ndarray, keepers: np.ndarray) -> PairScores:
            s = self.sets
            return score_pairs(
                s.shingles,
                s.offsets,
                s.rows,
                self.local[text_of_doc[members]],
                self.local[text_of_doc[keepers]],
            )

        return score_against


def driver_sets(table: pa.Table, n_texts: int, n_features: int) -> DriverSets:
    """`DriverSets` from collected rows of `SETS`."""
    local = np.full(n_texts, -1, dtype=np.int64)
    local[numbers(table.column("t"))] = np.arange(table.num_rows)
    parts = (
        [(table.column("shingles"), table.column("columns"), table.column("weights"))]
        if table.num_rows
        else []
    )
    return DriverSets(local, packed_sets(parts, n_features))


def driver_search(sets, n_texts: int, settings, width: int) -> pa.Table:
    """The exact search of containment or cosine (`dedup.candidates.exact_candidate_pairs`)
    on the driver: the sets it needs (shingles, or TF-IDF rows) collected in text order,
    searched as on one machine, the candidate pairs returned as a table of `PAIRS`.

    Raises
    ------
    dedup.SettingsError
        The sets hold more than `DRIVER_SEARCH_VALUES` values (the driver would not hold
        them): the message says how to run the audit instead.
    """
    from pyspark.sql import functions as F

    column = "shingles" if settings.measure == "containment" else "weights"
    size = sets.select(F.sum(F.length(column)).alias("bytes")).collect()[0]["bytes"] or 0
    values = int(size) // 8
    if values > DRIVER_SEARCH_VALUES:
        raise SettingsError(
            f"the exact {settings.measure} search of the Spark engine runs on the driver, and these "
            f"{n_texts:,} texts hold {values:,} {column} values (at most {DRIVER_SEARCH_VALUES:,}): run "
            "this audit with the local engine (--engine local), or give --candidates lsh (then no "
            f"recall can be promised for {settings.measure})"
        )
    wanted = ["t", "shingles"] if settings.measure == "containment" else ["t", "columns", "weights"]
    table = sets.select(*wanted).toArrow()
    table = table.take(pa.array(np.argsort(numbers(table.column("t")), kind="stable")))
    if numbers(table.column("t")).tolist() != list(range(n_texts)):
        raise ValueError("the compared sets do not hold every distinct text once")
    if settings.measure == "containment":
        shingles, offsets = packed_values(table.column("shingles"), np.uint64)
        rows = sp.csr_matrix((n_texts, max(width, 1)))
    else:
        shingles, offsets = np.zeros(0, np.uint64), np.zeros(n_texts + 1, np.int64)
        rows = packed_sets([(None, table.column("columns"), table.column("weights"))], width).rows
    left, right = exact_candidate_pairs(settings.measure, settings.threshold, shingles, offsets, rows)
    return pa.table({"left": left, "right": right}, schema=PAIRS)
