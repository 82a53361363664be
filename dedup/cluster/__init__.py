"""Cluster: components of confirmed pairs, the keeper of each, and proposed actions.

Roles, actions and reasons are data (reason codes with their figures); the words for
them are the report's (`dedup.report.wording`).
"""

from .actions import REASON_CODES, build_clusters
from .components import breadth_first_parents, cluster_members
from .keeper import choose_keeper, keeper_reason, keeper_sort_key

__all__ = [
    "build_clusters",
    "breadth_first_parents",
    "cluster_members",
    "choose_keeper",
    "keeper_sort_key",
    "keeper_reason",
    "REASON_CODES",
]
