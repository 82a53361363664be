"""Connected components of a large graph in DataFrame operations: large-star / small-star.

Kiveris, Lattanzi, Mirrokni, Rastogi, Vassilvitskii (2014), "Connected Components in
MapReduce and Beyond" (ACM SoCC). Edges ``(u, v)`` are rewritten round after round:

- **large-star**: every node ``u`` links each neighbour ``v > u`` to ``m(u)``, the
  smallest of ``u`` and its neighbours;
- **small-star**: every node ``u`` links itself and each neighbour ``v < u`` to the
  smallest of them.

Both keep the components and only lower labels; when a round changes nothing, every
component is a star around its smallest node, so each node's label is its neighbour
(or itself, for the centre). O(log² n) rounds at worst (O(log n) observed); each round
is two groupings and two joins keyed by node (shuffles of the edges). Lineage is cut
after every round (``localCheckpoint``), so the plans stay small.

A node without edges is a component of its own: it never appears, and callers give it
its own label.
"""

from __future__ import annotations

import numpy as np
import pyarrow as pa

from .columns import ddl

__all__ = ["component_labels", "component_labels_of_arrays", "MAX_ROUNDS"]

# A round that changes nothing ends the loop long before this; beyond it something is wrong.
MAX_ROUNDS = 200
EDGES = pa.schema([("u", pa.int64()), ("v", pa.int64())])


def _large_star(edges):
    from pyspark.sql import functions as F

    both = edges.unionByName(edges.select(F.col("v").alias("u"), F.col("u").alias("v")))
    smallest = both.groupBy("u").agg(F.least(F.min("v"), F.col("u")).alias("m"))
    return (
        both.join(smallest, "u")
        .where(F.col("v") > F.col("u"))
        .select(F.col("v").alias("u"), F.col("m").alias("v"))
        .distinct()
    )


def _small_star(edges):
    from pyspark.sql import functions as F

    down = edges.select(F.greatest("u", "v").alias("u"), F.least("u", "v").alias("v")).where("u != v")
    smallest = down.groupBy("u").agg(F.min("v").alias("m"))
    linked = down.join(smallest, "u").where(F.col("v") != F.col("m")).select(F.col("v").alias("u"), "m")
    centre = smallest.select("u", "m")
    return linked.unionByName(centre).withColumnRenamed("m", "v").distinct()


def component_labels(edges, max_rounds: int = MAX_ROUNDS):
    """``(node, label)`` for every node on an edge: the smallest node of its component.

    ``edges`` is a DataFrame of ``(u, v)`` longs (either direction, repeats and loops
    allowed).
    """
    from pyspark.sql import functions as F

    current = edges.select(F.least("u", "v").alias("u"), F.greatest("u", "v").alias("v")).where("u != v")
    current = current.distinct().localCheckpoint()
    for _ in range(max_rounds):
        following = _small_star(_large_star(current)).localCheckpoint()
        if following.exceptAll(current).isEmpty() and current.exceptAll(following).isEmpty():
            break
        current = following
    else:
        raise RuntimeError(f"connected components did not settle in {max_rounds} rounds")
    # A star: each edge joins a node (u) to its component's smallest node (v).
    labelled = current.select(F.col("u").alias("node"), F.col("v").alias("label"))
    centres = current.select(F.col("v").alias("node"), F.col("v").alias("label"))
    return labelled.unionByName(centres).distinct()


def component_labels_of_arrays(spark, n: int, left: np.ndarray, right: np.ndarray) -> np.ndarray:
    """Labels of nodes ``0 … n - 1`` joined by edges ``(left[i], right[i])``, found in Spark:
    the smallest node of each component (a node on no edge is its own label)."""
    labels = np.arange(n, dtype=np.int64)
    if left.shape[0] == 0:
        return labels
    table = pa.table({"u": np.asarray(left, np.int64), "v": np.asarray(right, np.int64)}, schema=EDGES)
    found = component_labels(spark.createDataFrame(table, schema=ddl(EDGES))).toArrow()
    labels[np.asarray(found.column("node").to_numpy(), np.int64)] = found.column("label").to_numpy()
    return labels
