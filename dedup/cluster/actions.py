"""From components to clusters with a keeper, roles and a proposed action per member.

Chaining guard: a component can join A and C through B even when A and C are not alike.
So every member is scored against the cluster's keeper directly, and a member whose
score to the keeper is below the threshold is marked ``linked-through`` (naming the
member it hangs on), never ``duplicate`` of the keeper.

Roles and proposed actions (the tool changes nothing; these are proposals):
    keeper          keep
    exact-copy      retire in favour of the keeper
    duplicate       retire in favour of the keeper, if at least ``retire_coverage`` of its
                    shingles are in the keeper; otherwise review (it has text the keeper lacks)
    linked-through  review

Every member says why as data, not words: ``reason_code`` and ``reason_figures`` (the
report turns them into sentences, see `dedup.report.wording`). Codes and their figures:
    most-text, newest, oldest, shortest-path
                    keeper chosen by the policy alone; no figures
    preferred-path  keeper matching a preferred path: ``glob``, ``then`` (the policy's code)
    exact-copy      ``keeper``
    covered         duplicate with enough of its text in the keeper: ``keeper``,
                    ``measure``, the four scores to the keeper, ``retire_coverage``
    not-covered     duplicate with too little of its text in the keeper: as ``covered``
    linked-through  ``keeper``, ``linked_through`` (the member it resembles),
                    ``link_score`` (that pair's deciding score, or None), ``measure``
                    and the four scores to the keeper
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np

from ..settings import AuditSettings
from ..verify.scores import PairScores, deciding_score
from .components import breadth_first_parents, cluster_members
from .keeper import KEEPER_REASON_CODES, choose_keeper, keeper_reason

__all__ = ["ClusterInputs", "build_clusters", "REASON_CODES"]

# Every reason code a clustered document can get.
REASON_CODES = (*KEEPER_REASON_CODES, "exact-copy", "covered", "not-covered", "linked-through")
_EXACT_SIMILARITY = {"jaccard": 1.0, "containment_in_keeper": 1.0, "keeper_containment": 1.0, "cosine": 1.0}


@dataclass(frozen=True)
class ClusterInputs:
    """What clustering needs to know about the (non-empty) documents."""

    ids: Sequence[str]
    lengths: Sequence[int]  # characters of canonical text
    sizes: Sequence[int]  # bytes of the original text
    dates: Sequence[float | None]
    representative: np.ndarray  # document -> document holding the same text first


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
            code, figures = keeper_reason(keeper_id, settings.keeper_policy, settings.prefer)
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
    retired = [m for m, e in zip(g.tolist(), members) if e["action"] == "retire"]
    sims = [e["deciding_score"] for e in members if e["deciding_score"] is not None]
    return {
        "keeper": keeper_id,
        "size": int(g.shape[0]),
        "kind": "mixed" if len(kinds) > 1 else (kinds.pop() if kinds else "exact"),
        "retire_documents": len(retired),
        "retire_bytes": int(sum(inputs.sizes[m] for m in retired)),
        "lowest_similarity_to_keeper": float(min(sims)) if sims else 1.0,
        "members": members,
    }


def _numbered(clusters: list[dict]) -> list[dict]:
    """Clusters largest first (then most bytes to retire, then keeper id), numbered C00001...

    Each member gets its ``cluster_id``; ``id`` comes first in each cluster for readers of
    the JSON.
    """
    order = sorted(
        range(len(clusters)),
        key=lambda i: (-clusters[i]["size"], -clusters[i]["retire_bytes"], clusters[i]["keeper"]),
    )
    numbered = []
    for number, i in enumerate(order, 1):
        cluster_id = f"C{number:05d}"
        for member in clusters[i]["members"]:
            member["cluster_id"] = cluster_id
        numbered.append({"id": cluster_id, **clusters[i]})
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
            g.tolist(), inputs.ids, inputs.lengths, inputs.dates, settings.keeper_policy, settings.prefer
        )
        for g in groups
    ]
    scored = _score_against_keepers(groups, keepers, inputs.representative, score_against, settings.measure)
    clusters = [
        _cluster_record(g, k, inputs, scored, adjacency, edge_score, settings)
        for g, k in zip(groups, keepers)
    ]
    roles = {m: entry for g, c in zip(groups, clusters) for m, entry in zip(g.tolist(), c["members"])}
    return _numbered(clusters), roles
