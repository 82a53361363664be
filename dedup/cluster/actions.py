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
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np

from ..settings import AuditSettings
from ..verify.scores import PairScores, deciding_score
from .components import breadth_first_parents, cluster_members
from .keeper import choose_keeper, policy_reason

__all__ = ["ClusterInputs", "build_clusters"]


@dataclass(frozen=True)
class ClusterInputs:
    """What clustering needs to know about the (non-empty) documents."""

    ids: Sequence[str]
    lengths: Sequence[int]  # characters of canonical text
    sizes: Sequence[int]  # bytes of the original text
    dates: Sequence[float | None]
    representative: np.ndarray  # document -> document holding the same text first


def _fmt(x: float) -> str:
    return f"{x:.2f}"


def _score_words(measure: str, jac: float, c_in: float, c_out: float, cos: float) -> str:
    return f"Jaccard {_fmt(jac)}, containment {_fmt(c_in)} / {_fmt(c_out)}, cosine {_fmt(cos)} (deciding: {measure})"


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

    Notes
    -----
    O(n + m) for the components, plus one batched scoring of members against keepers.
    """
    groups = cluster_members(len(inputs.ids), edge_left, edge_right)
    adjacency: dict[int, list[int]] = {}
    for a, b in zip(edge_left.tolist(), edge_right.tolist()):
        adjacency.setdefault(a, []).append(b)
        adjacency.setdefault(b, []).append(a)

    keepers = [
        choose_keeper(
            g.tolist(), inputs.ids, inputs.lengths, inputs.dates, settings.keeper_policy, settings.prefer
        )
        for g in groups
    ]
    # Score every member whose text differs from its keeper's, all in one batch.
    rep = inputs.representative
    member_list, keeper_list = [], []
    for g, k in zip(groups, keepers):
        for m in g.tolist():
            if rep[m] != rep[k]:
                member_list.append(m)
                keeper_list.append(k)
    scores = score_against(np.asarray(member_list, np.int64), np.asarray(keeper_list, np.int64))
    decided = deciding_score(scores, settings.measure) if len(scores) else np.zeros(0)
    score_of = {m: i for i, m in enumerate(member_list)}

    clusters: list[dict] = []
    roles: dict[int, dict] = {}
    for g, k in zip(groups, keepers):
        parents = breadth_first_parents(k, adjacency)
        keeper_id = inputs.ids[k]
        members = []
        kinds = set()
        for m in g.tolist():
            if m == k:
                entry = {
                    "document_id": keeper_id,
                    "role": "keeper",
                    "similarity_to_keeper": None,
                    "deciding_score": None,
                    "linked_through": None,
                    "action": "keep",
                    "in_favour_of": None,
                    "reason": f"keeper: {policy_reason(keeper_id, settings.keeper_policy, settings.prefer)}",
                }
            elif rep[m] == rep[k]:
                kinds.add("exact")
                entry = {
                    "document_id": inputs.ids[m],
                    "role": "exact-copy",
                    "similarity_to_keeper": {
                        "jaccard": 1.0,
                        "containment_in_keeper": 1.0,
                        "keeper_containment": 1.0,
                        "cosine": 1.0,
                    },
                    "deciding_score": 1.0,
                    "linked_through": None,
                    "action": "retire",
                    "in_favour_of": keeper_id,
                    "reason": f"exact copy of {keeper_id} (same text after normalization)",
                }
            else:
                i = score_of[m]
                jac = float(scores.jaccard[i])
                c_in = float(scores.containment_left_in_right[i])
                c_out = float(scores.containment_right_in_left[i])
                cos = float(scores.cosine[i])
                words = _score_words(settings.measure, jac, c_in, c_out, cos)
                similarity = {
                    "jaccard": jac,
                    "containment_in_keeper": c_in,
                    "keeper_containment": c_out,
                    "cosine": cos,
                }
                if float(decided[i]) >= settings.threshold:
                    kinds.add("near")
                    if c_in >= settings.retire_coverage:
                        action, favour = "retire", keeper_id
                        reason = f"near-duplicate of {keeper_id}: {words}"
                    else:
                        action, favour = "review", None
                        reason = (
                            f"similar to {keeper_id} ({words}), but only {c_in:.0%} of its text is in the keeper: "
                            "merge what is missing before retiring it"
                        )
                    role, linked = "duplicate", None
                else:
                    kinds.add("near")
                    parent = parents.get(m, k)
                    linked = inputs.ids[parent]
                    via = edge_score.get((min(m, parent), max(m, parent)))
                    via_words = f" ({settings.measure} {_fmt(via)})" if via is not None else ""
                    role, action, favour = "linked-through", "review", None
                    reason = (
                        f"in this cluster because it resembles {linked}{via_words}, "
                        f"not the keeper {keeper_id} ({words}); decide separately"
                    )
                entry = {
                    "document_id": inputs.ids[m],
                    "role": role,
                    "similarity_to_keeper": similarity,
                    "deciding_score": float(decided[i]),
                    "linked_through": linked,
                    "action": action,
                    "in_favour_of": favour,
                    "reason": reason,
                }
            members.append(entry)
            roles[m] = entry
        retired_bytes = sum(inputs.sizes[m] for m in g.tolist() if roles[m]["action"] == "retire")
        retired_docs = sum(1 for m in g.tolist() if roles[m]["action"] == "retire")
        sims = [e["deciding_score"] for e in members if e["deciding_score"] is not None]
        clusters.append(
            {
                "keeper": keeper_id,
                "size": int(g.shape[0]),
                "kind": "mixed" if len(kinds) > 1 else (kinds.pop() if kinds else "exact"),
                "retire_documents": retired_docs,
                "retire_bytes": int(retired_bytes),
                "lowest_similarity_to_keeper": float(min(sims)) if sims else 1.0,
                "members": members,
            }
        )
    order = sorted(
        range(len(clusters)),
        key=lambda i: (-clusters[i]["size"], -clusters[i]["retire_bytes"], clusters[i]["keeper"]),
    )
    clusters = [clusters[i] for i in order]
    for number, cluster in enumerate(clusters, 1):
        cluster_id = f"C{number:05d}"
        cluster["id"] = cluster_id
        for member in cluster["members"]:
            member["cluster_id"] = cluster_id
    # Put "id" first for readers of the JSON.
    clusters = [{"id": c.pop("id"), **c} for c in clusters]
    return clusters, roles
