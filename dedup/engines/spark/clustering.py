"""The cluster step for the Spark engine: on the driver, or by components found in Spark.

Up to `DRIVER_COMPONENT_EDGES` confirmed edges (near pairs plus exact copies), the
shared driver step runs as on one machine (`cluster_step`: scipy's connected components,
keepers, members scored against them). Beyond, the components are found in Spark
(large-star / small-star, `dedup.engines.spark.components`) and the clusters are made
a batch of whole components at a time by the same step (`cluster_step` over the near
pairs and exact groups of those components only: its graph, adjacency and scores stay
the size of a batch), then numbered over all batches (`number_clusters`, as
`build_clusters` numbers them). Both ways give the same records.

The driver holds every confirmed pair either way: the audit's records list them all.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable, Sequence

import numpy as np

from ...cluster.actions import number_clusters
from ...verify import PairScores
from ..driver import DistinctTexts, Verified, cluster_step, exact_edges_of
from .components import component_labels_of_arrays

__all__ = ["DRIVER_COMPONENT_EDGES", "spark_cluster_step", "component_batches"]

# Up to this many confirmed edges the components are found on the driver (scipy, about
# 40 bytes an edge); beyond, in Spark.
DRIVER_COMPONENT_EDGES = 5_000_000


def component_batches(labels: np.ndarray, left: np.ndarray, most: int) -> list[np.ndarray]:
    """Edge numbers grouped into batches of whole components, about ``most`` edges each
    (a component larger than that is a batch of its own)."""
    edge_label = labels[left]
    order = np.argsort(edge_label, kind="stable")
    sorted_labels = edge_label[order]
    starts = np.flatnonzero(np.concatenate(([True], sorted_labels[1:] != sorted_labels[:-1])))
    batches, begin = [], 0
    for start in [*starts.tolist()[1:], order.shape[0]]:
        if start - begin >= most:
            batches.append(order[begin:start])
            begin = start
    if begin < order.shape[0]:
        batches.append(order[begin:])
    return batches


def _batched_clusters(
    spark, texts: DistinctTexts, verified: Verified, score_against, settings, ledger_ids, most
):
    """`cluster_step` a batch of whole components at a time (components found in Spark):
    each batch is the step over its own near pairs and exact groups; the clusters are
    then numbered over all batches."""
    first_doc = texts.first_doc
    near_left, near_right = first_doc[verified.confirmed.left], first_doc[verified.confirmed.right]
    exact_left, exact_right = exact_edges_of(texts.groups, {})
    all_left = np.concatenate([near_left, np.asarray(exact_left, np.int64)])
    all_right = np.concatenate([near_right, np.asarray(exact_right, np.int64)])
    labels = component_labels_of_arrays(spark, len(texts.kept), all_left, all_right)
    group_firsts = np.asarray([g[0] for g in texts.groups], np.int64)
    clusters: list[dict] = []
    roles: dict[int, dict] = {}
    for batch in component_batches(labels, all_left, most):
        chosen = np.unique(labels[all_left[batch]])
        near = np.isin(labels[near_left], chosen)
        exact = np.isin(labels[group_firsts], chosen) if group_firsts.shape[0] else np.zeros(0, bool)
        part_texts = dataclasses.replace(
            texts, groups=[g for g, keep in zip(texts.groups, exact.tolist()) if keep]
        )
        part = verified.select(near)
        made, made_roles, _ = cluster_step(part_texts, part, score_against, settings, ledger_ids)
        clusters.extend(made)
        roles.update(made_roles)
    return number_clusters(clusters), roles, list(zip(exact_left, exact_right))


def spark_cluster_step(
    spark,
    texts: DistinctTexts,
    verified: Verified,
    score_against: Callable[[np.ndarray, np.ndarray], PairScores],
    settings,
    ledger_ids: Sequence[str | None] = (),
    driver_edges: int = DRIVER_COMPONENT_EDGES,
) -> tuple[list[dict], dict[int, dict], list[tuple[int, int]]]:
    """`cluster_step`'s result: on the driver up to ``driver_edges`` confirmed edges,
    else with the components found in Spark (see the module notes)."""
    edges = len(verified.confirmed) + sum(len(g) - 1 for g in texts.groups)
    if edges <= driver_edges:
        return cluster_step(texts, verified, score_against, settings, ledger_ids)
    most = max(driver_edges, 1)
    return _batched_clusters(spark, texts, verified, score_against, settings, ledger_ids, most)
