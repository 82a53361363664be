"""Cluster: components of confirmed pairs, the keeper of each, and proposed actions."""

from .actions import build_clusters
from .components import breadth_first_parents, cluster_members
from .keeper import choose_keeper, keeper_sort_key, policy_reason

__all__ = [
    "build_clusters",
    "breadth_first_parents",
    "cluster_members",
    "choose_keeper",
    "keeper_sort_key",
    "policy_reason",
]
