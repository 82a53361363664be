"""Cluster: components of confirmed pairs, the keeper of each, and proposed actions.

Roles, actions and reasons are data (reason codes with their figures); the words for
them are the report's (`dedup.report.wording`). `build_clusters` proposes from shingle
scores; `align_members` and `settle_actions` (`dedup.cluster.loss`) then make sure no
member proposed for retirement holds text its keeper lacks.
"""

from .actions import ACTIONS, REASON_CODES, build_clusters, count_retired, number_clusters
from .components import breadth_first_parents, cluster_members
from .keeper import (
    choose_keeper,
    explain_keeper,
    input_positions,
    keeper_reason,
    keeper_sort_key,
    unmatched_prefer,
)
from .loss import MERGE_MAX_SHARE, MemberWords, Settled, align_members, settle_actions, unique_runs

__all__ = [
    "build_clusters",
    "breadth_first_parents",
    "cluster_members",
    "choose_keeper",
    "keeper_sort_key",
    "keeper_reason",
    "explain_keeper",
    "input_positions",
    "unmatched_prefer",
    "count_retired",
    "number_clusters",
    "align_members",
    "settle_actions",
    "unique_runs",
    "MemberWords",
    "Settled",
    "MERGE_MAX_SHARE",
    "REASON_CODES",
    "ACTIONS",
]
