"""Clusters as connected components of the graph of confirmed pairs.

Documents are nodes, confirmed pairs (exact copies and near-duplicates) are edges.
Components come from ``scipy.sparse.csgraph.connected_components``: O(n + m).
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components

__all__ = ["cluster_members", "breadth_first_parents"]


def cluster_members(n_docs: int, left: np.ndarray, right: np.ndarray) -> list[np.ndarray]:
    """Members (sorted document indices) of every component with two or more documents.

    Components are ordered by their smallest member, so the result depends only on the
    edges, not on their order.

    >>> [m.tolist() for m in cluster_members(5, np.array([0, 3]), np.array([1, 4]))]
    [[0, 1], [3, 4]]
    """
    if n_docs == 0:
        return []
    graph = sp.coo_matrix((np.ones(left.shape[0], dtype=np.int8), (left, right)), shape=(n_docs, n_docs))
    _, labels = connected_components(graph.tocsr(), directed=False)
    # Most documents are alone in their component: only the others are grouped.
    members = np.flatnonzero(np.bincount(labels)[labels] > 1)
    if members.shape[0] == 0:
        return []
    # A stable sort by component keeps each component's members in increasing order.
    order = members[np.argsort(labels[members], kind="stable")]
    sorted_labels = labels[order]
    boundaries = np.flatnonzero(sorted_labels[1:] != sorted_labels[:-1]) + 1
    groups = np.split(order, boundaries)
    groups.sort(key=lambda g: int(g[0]))
    return groups


def breadth_first_parents(root: int, adjacency: dict[int, list[int]]) -> dict[int, int]:
    """Parent of every node reachable from ``root`` on a shortest path (root → itself).

    Neighbours are visited in increasing index order, so ties break the same way on
    every run. O(nodes + edges) of the component.
    """
    parents = {root: root}
    frontier = [root]
    while frontier:
        nxt = []
        for node in frontier:
            for neighbour in sorted(adjacency.get(node, ())):
                if neighbour not in parents:
                    parents[neighbour] = node
                    nxt.append(neighbour)
        frontier = nxt
    return parents
