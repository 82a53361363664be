"""Clusters, keepers and the chaining guard."""

from __future__ import annotations

import networkx as nx
import numpy as np

from dedup.cluster import choose_keeper, cluster_members


def test_components_equal_networkx_connected_components():
    """Reference: networkx.connected_components on the same edges."""
    rng = np.random.default_rng(11)
    n = 400
    left = rng.integers(0, n, 300)
    right = rng.integers(0, n, 300)
    keep = left != right
    left, right = np.minimum(left, right)[keep], np.maximum(left, right)[keep]
    ours = [tuple(m.tolist()) for m in cluster_members(n, left, right)]
    graph = nx.Graph()
    graph.add_nodes_from(range(n))
    graph.add_edges_from(zip(left.tolist(), right.tolist()))
    expected = {tuple(sorted(c)) for c in nx.connected_components(graph) if len(c) > 1}
    # Members in increasing order, components by their smallest member (disjoint tuples
    # sort by their first element).
    assert ours == sorted(expected)


def test_components_of_a_graph_without_edges():
    no_edges = np.zeros(0, np.int64)
    assert cluster_members(5, no_edges, no_edges) == []
    assert cluster_members(0, no_edges, no_edges) == []


def test_keeper_policies_and_preferred_globs():
    ids = ["archive/2021/a.md", "current/a.md", "drafts/deep/folder/a-longer-name.md"]
    lengths = [500, 400, 900]
    dates = [1000.0, 3000.0, 2000.0]
    members = [0, 1, 2]
    assert choose_keeper(members, ids, lengths, dates, "longest") == 2
    assert choose_keeper(members, ids, lengths, dates, "newest") == 1
    assert choose_keeper(members, ids, lengths, dates, "oldest") == 0
    assert choose_keeper(members, ids, lengths, dates, "shortest-path") == 1
    assert choose_keeper(members, ids, lengths, dates, "longest", ["current/**", "archive/**"]) == 1
    assert choose_keeper(members, ids, lengths, dates, "longest", ["nothing/**", "archive/*"]) == 0
    # Ties are broken by id, whatever the member order.
    assert choose_keeper([2, 1, 0], ["b", "a", "c"], [5, 5, 5], [None] * 3, "longest") == 1
    # Missing dates never win.
    assert choose_keeper([0, 1], ["a", "b"], [1, 1], [None, 5.0], "newest") == 1
