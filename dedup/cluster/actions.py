"""From components to clusters with a keeper, roles and a proposed action per member.

Chaining guard: a component can join A and C through B even when A and C are not alike.
So every member is scored against the cluster's keeper directly, and a member whose
score to the keeper is below the threshold is marked ``linked-through`` (naming the
member it hangs on), never ``duplicate`` of the keeper.

Roles and proposed actions (the tool changes nothing; these are proposals):
    keeper          keep
    exact-copy      retire in favour of the keeper
    duplicate       retire in favour of the keeper, if at least ``retire_coverage`` of its
                    shingles are in the keeper; otherwise review (it has text the keeper lacks).
                    `dedup.cluster.loss.settle_actions` then looks at its words: one with
                    passages the keeper lacks becomes merge-then-retire or review
    linked-through  review

Every member says why as data, not words: ``reason_code`` and ``reason_figures`` (the
report turns them into sentences, see `dedup.report.wording`). Codes and their figures:
    most-text, newest, oldest, shortest-path, first-seen
                    keeper chosen by the policy: what it looked at, and ``tie_break`` and
                    ``tied`` when members were equal on it (see `keeper.explain_keeper`)
    preferred-path  keeper matching a preferred path: ``glob``, ``then`` (the policy's code),
                    ``matching``, and the policy's figures when several members match
    exact-copy      ``keeper``
    covered         duplicate with enough of its text in the keeper: ``keeper``,
                    ``measure``, the four scores to the keeper, ``retire_coverage``
    not-covered     duplicate with too little of its text in the keeper: as ``covered``
    linked-through  ``keeper``, ``linked_through`` (the member it resembles),
                    ``link_score`` (that pair's deciding score, or None), ``measure``
                    and the four scores to the keeper
    unique-text, mostly-unique
                    given by `dedup.cluster.loss.settle_actions` (see there)

Each cluster counts ``retire_documents`` and ``retire_bytes`` (members proposed for
plain retirement) and ``merge_documents`` and ``merge_bytes`` (members proposed for
retirement once their own text is merged into the keeper).
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np

from ..settings import AuditSettings
from ..verify.scores import PairScores, deciding_score
from .components import breadth_first_parents, cluster_members
from .keeper import KEEPER_REASON_CODES, choose_keeper, explain_keeper

__all__ = [
    "ClusterInputs",
    "build_clusters",
    "number_clusters",
    "count_retired",
    "REASON_CODES",
    "ACTIONS",
    "RETIRING_ACTIONS",
]

# Every reason code a clustered document can get.
REASON_CODES = (
    *KEEPER_REASON_CODES,
    "exact-copy",
    "covered",
    "not-covered",
    "linked-through",
    "unique-text",
    "mostly-unique",
)
# Every proposed action, for every document (clustered or not).
ACTIONS = ("keep", "retire", "merge-then-retire", "review")
# Actions that end with the document retired once a person has carried them out.
RETIRING_ACTIONS = ("retire", "merge-then-retire")
_EXACT_SIMILARITY = {"jaccard": 1.0, "containment_in_keeper": 1.0, "keeper_containment": 1.0, "cosine": 1.0}


@dataclass(frozen=True)
class ClusterInputs:
    """What clustering needs to know about the (non-empty) documents."""

    ids: Sequence[str]
    lengths: Sequence[int]  # characters of canonical text
    sizes: Sequence[int]  # bytes of the original text
    dates: Sequence[float | None]
    representative: np.ndarray  # document -> document holding the same text first
    # Input position of each document (`keeper.input_positions`): needed by first-seen only.
    order: Sequence[int | None] | None = None


@dataclass(frozen=True)
class _KeeperScores:
    """Exact scores of the members whose text differs from their keeper's."""

    scores: PairScores
    decided: np.ndarray  # deciding score of each scored member
    row_of: dict[int, int]  # member -> its row in ``scores``


def _member(
    doc_id: str,
    role: str,
    similarity: dict[str, float] | None,
    decided: float | None,
    linked: str | None,
    action: str,
    favour: str | None,
    code: str,
    figures: dict,
) -> dict:
    """One member record; its key order is the order of the JSON output. O(1)."""
    return {
        "document_id": doc_id,
        "role": role,
        "similarity_to_keeper": similarity,
        "deciding_score": decided,
        "linked_through": linked,
        "action": action,
        "in_favour_of": favour,
        "reason_code": code,
        "reason_figures": figures,
    }


def _adjacency(edge_left: np.ndarray, edge_right: np.ndarray) -> dict[int, list[int]]:
    """Neighbours of every document on a confirmed pair; O(edges)."""
    adjacency: dict[int, list[int]] = {}
    for a, b in zip(edge_left.tolist(), edge_right.tolist()):
        adjacency.setdefault(a, []).append(b)
        adjacency.setdefault(b, []).append(a)
    return adjacency


def _score_against_keepers(
    groups: list[np.ndarray],
    keepers: list[int],
    representative: np.ndarray,
    score_against: Callable[[np.ndarray, np.ndarray], PairScores],
    measure: str,
) -> _KeeperScores:
    """Score every member whose text differs from its keeper's, all in one batch."""
    member_list, keeper_list = [], []
    for g, k in zip(groups, keepers):
        for m in g.tolist():
            if representative[m] != representative[k]:
                member_list.append(m)
                keeper_list.append(k)
    scores = score_against(np.asarray(member_list, np.int64), np.asarray(keeper_list, np.int64))
    decided = deciding_score(scores, measure) if len(scores) else np.zeros(0)
    return _KeeperScores(scores, decided, {m: i for i, m in enumerate(member_list)})


def _scored_member(
    m: int,
    k: int,
    inputs: ClusterInputs,
    scored: _KeeperScores,
    parents: dict[int, int],
    edge_score: dict[tuple[int, int], float],
    settings: AuditSettings,
) -> dict:
    """The record of a member whose text differs from the keeper's: duplicate or linked-through."""
    i = scored.row_of[m]
    keeper_id = inputs.ids[k]
    similarity = {
        "jaccard": float(scored.scores.jaccard[i]),
        "containment_in_keeper": float(scored.scores.containment_left_in_right[i]),
        "keeper_containment": float(scored.scores.containment_right_in_left[i]),
        "cosine": float(scored.scores.cosine[i]),
    }
    decided = float(scored.decided[i])
    figures = {"keeper": keeper_id, "measure": settings.measure, **similarity}
    doc_id = inputs.ids[m]
    if decided >= settings.threshold:
        figures["retire_coverage"] = settings.retire_coverage
        covered = similarity["containment_in_keeper"] >= settings.retire_coverage
        action, favour, code = (
            ("retire", keeper_id, "covered") if covered else ("review", None, "not-covered")
        )
        return _member(doc_id, "duplicate", similarity, decided, None, action, favour, code, figures)
    parent = parents.get(m, k)
    linked = inputs.ids[parent]
    link = {"linked_through": linked, "link_score": edge_score.get((min(m, parent), max(m, parent)))}
    figures = {"keeper": keeper_id, **link, "measure": settings.measure, **similarity}
    role = "linked-through"
    return _member(doc_id, role, similarity, decided, linked, "review", None, role, figures)


def _cluster_record(
    g: np.ndarray,
    k: int,
    inputs: ClusterInputs,
    scored: _KeeperScores,
    adjacency: dict[int, list[int]],
    edge_score: dict[tuple[int, int], float],
    settings: AuditSettings,
) -> dict:
    """One cluster (without its id) with the record of each of its members, in index order."""
    parents = breadth_first_parents(k, adjacency)
    keeper_id = inputs.ids[k]
    rep = inputs.representative
    members, kinds = [], set()
    for m in g.tolist():
        if m == k:
            code, figures = _keeper_reason(g, k, inputs, settings)
            entry = _member(keeper_id, "keeper", None, None, None, "keep", None, code, figures)
        elif rep[m] == rep[k]:
            kinds.add("exact")
            copy, figures = "exact-copy", {"keeper": keeper_id}
            similarity = dict(_EXACT_SIMILARITY)
            entry = _member(inputs.ids[m], copy, similarity, 1.0, None, "retire", keeper_id, copy, figures)
        else:
            kinds.add("near")
            entry = _scored_member(m, k, inputs, scored, parents, edge_score, settings)
        members.append(entry)
    sims = [e["deciding_score"] for e in members if e["deciding_score"] is not None]
    cluster = {
        "keeper": keeper_id,
        "size": int(g.shape[0]),
        "kind": "mixed" if len(kinds) > 1 else (kinds.pop() if kinds else "exact"),
        "retire_documents": 0,
        "retire_bytes": 0,
        "merge_documents": 0,
        "merge_bytes": 0,
        "lowest_similarity_to_keeper": float(min(sims)) if sims else 1.0,
        "members": members,
    }
    return count_retired(cluster, [inputs.sizes[m] for m in g.tolist()])


def _keeper_reason(g: np.ndarray, k: int, inputs: ClusterInputs, settings: AuditSettings) -> tuple[str, dict]:
    """`keeper.explain_keeper` for the cluster ``g`` with keeper ``k``; O(members)."""
    return explain_keeper(
        g.tolist(),
        k,
        inputs.ids,
        inputs.lengths,
        inputs.dates,
        settings.keeper_policy,
        settings.prefer,
        inputs.order,
        settings.date_field,
    )


def count_retired(cluster: dict, sizes: Sequence[int]) -> dict:
    """Set a cluster's ``retire_documents``/``retire_bytes`` (action ``retire``) and
    ``merge_documents``/``merge_bytes`` (``merge-then-retire``) from its members' actions,
    in place; ``sizes[i]`` is the bytes of ``members[i]``. Returns it; O(members).
    """
    for action, prefix in (("retire", "retire"), ("merge-then-retire", "merge")):
        chosen = [b for e, b in zip(cluster["members"], sizes) if e["action"] == action]
        cluster[f"{prefix}_documents"] = len(chosen)
        cluster[f"{prefix}_bytes"] = int(sum(chosen))
    return cluster


def number_clusters(clusters: list[dict]) -> list[dict]:
    """Clusters largest first (then most bytes to retire, plainly or after a merge, then
    keeper id), numbered C00001...

    Each member gets its ``cluster_id``; ``id`` comes first in each cluster for readers of
    the JSON. Clusters numbered before are numbered again (after actions changed): the
    result depends on the clusters' figures only. O(c log c) for c clusters.
    """

    def key(c: dict) -> tuple:
        return (-c["size"], -(c["retire_bytes"] + c.get("merge_bytes", 0)), c["keeper"])

    order = sorted(range(len(clusters)), key=lambda i: key(clusters[i]))
    numbered = []
    for number, i in enumerate(order, 1):
        cluster_id = f"C{number:05d}"
        for member in clusters[i]["members"]:
            member["cluster_id"] = cluster_id
        numbered.append({"id": cluster_id, **{key: v for key, v in clusters[i].items() if key != "id"}})
    return numbered


def build_clusters(
    inputs: ClusterInputs,
    edge_left: np.ndarray,
    edge_right: np.ndarray,
    edge_score: dict[tuple[int, int], float],
    score_against: Callable[[np.ndarray, np.ndarray], PairScores],
    settings: AuditSettings,
) -> tuple[list[dict], dict[int, dict]]:
    """Clusters (largest first) and, per clustered document, its role and action.

    Parameters
    ----------
    edge_left, edge_right : ndarray
        Confirmed pairs between documents (exact copies and near-duplicates).
    edge_score : dict
        Deciding score of each confirmed pair, keyed ``(min, max)``.
    score_against : callable
        ``score_against(members, keepers)`` returns exact `PairScores` for document
        pairs with different texts.

    Returns
    -------
    clusters : list of dict
        Each with its ``members``: the same dicts as the values of ``roles``.
    roles : dict
        Document index -> member record, with ``reason_code`` and ``reason_figures``
        (see the module docstring) where the report's ``reason`` sentence goes.

    Notes
    -----
    O(n + m) for the components, plus one batched scoring of members against keepers.
    """
    groups = cluster_members(len(inputs.ids), edge_left, edge_right)
    adjacency = _adjacency(edge_left, edge_right)
    keepers = [
        choose_keeper(
            g.tolist(),
            inputs.ids,
            inputs.lengths,
            inputs.dates,
            settings.keeper_policy,
            settings.prefer,
            inputs.order,
        )
        for g in groups
    ]
    scored = _score_against_keepers(groups, keepers, inputs.representative, score_against, settings.measure)
    clusters = [
        _cluster_record(g, k, inputs, scored, adjacency, edge_score, settings)
        for g, k in zip(groups, keepers)
    ]
    roles = {m: entry for g, c in zip(groups, clusters) for m, entry in zip(g.tolist(), c["members"])}
    return number_clusters(clusters), roles
