"""The records of ``audit.json`` and the CSV exports, made from the stages' arrays.

Everything here turns data into the output's records and wording; nothing decides.
Cost: O(documents + pairs + clusters).
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from ..candidates import EXACT_SEARCHES
from ..verify import PairScores

__all__ = [
    "near_pair_records",
    "exact_pair_record",
    "exact_group_records",
    "action_records",
    "warning_records",
    "candidates_block",
    "boilerplate_block",
    "summary_block",
    "passage_records",
    "PASSAGE_COLUMNS",
    "COLLISION_WARNING_SHARE",
]

# A hashed feature space where more than this share of terms collide gets a warning.
COLLISION_WARNING_SHARE = 0.05


def near_pair_records(
    ids: Sequence[str], scores: PairScores, decided: np.ndarray, whole: np.ndarray | None = None
) -> list[dict]:
    """One record per confirmed near pair (``scores.left/right`` index ``ids``); a pair
    confirmed only as whole texts (``whole``) says no template lines were left out."""
    pairs = [
        {
            "left": ids[int(scores.left[i])],
            "right": ids[int(scores.right[i])],
            "kind": "near",
            "deciding_score": float(decided[i]),
            "jaccard": float(scores.jaccard[i]),
            "containment_left_in_right": float(scores.containment_left_in_right[i]),
            "containment_right_in_left": float(scores.containment_right_in_left[i]),
            "cosine": float(scores.cosine[i]),
            "shared_shingles": int(scores.shared[i]),
        }
        for i in range(len(scores))
    ]
    if whole is not None:
        for i in np.flatnonzero(whole).tolist():
            pairs[i]["templates_left_out"] = "none"
    return pairs


def exact_pair_record(left: str, right: str, shingles: int) -> dict:
    """The record of two documents with the same canonical text (``shingles`` each)."""
    return {
        "left": left,
        "right": right,
        "kind": "exact",
        "deciding_score": 1.0,
        "jaccard": 1.0,
        "containment_left_in_right": 1.0,
        "containment_right_in_left": 1.0,
        "cosine": 1.0,
        "shared_shingles": shingles,
    }


def exact_group_records(groups: list[list[int]], ids: Sequence[str], hashes: Sequence[str]) -> list[dict]:
    return [{"content_hash": hashes[g[0]], "size": len(g), "members": [ids[m] for m in g]} for g in groups]


def _action(doc_id: str, action: str, favour: str | None, cluster: str | None, reason: str) -> dict:
    return {
        "document_id": doc_id,
        "action": action,
        "in_favour_of": favour,
        "cluster_id": cluster,
        "reason": reason,
    }


def action_records(documents: list[dict], kept_index: dict[str, int], roles: dict[int, dict]) -> list[dict]:
    """One proposed action per document, in id order: its role in a cluster, else keep
    (or review, for a document without text)."""
    actions = []
    for rec in documents:
        i = kept_index.get(rec["id"])
        if rec["status"] == "empty":
            actions.append(_action(rec["id"], "review", None, None, "document has no text"))
        elif i in roles:
            role = roles[i]
            actions.append(
                _action(rec["id"], role["action"], role["in_favour_of"], role["cluster_id"], role["reason"])
            )
        else:
            actions.append(_action(rec["id"], "keep", None, None, "no duplicate found at the threshold"))
    return actions


def warning_records(oversize: list[dict], text_ids: Sequence[str], tfidf: dict, settings) -> list[dict]:
    """Warnings: band buckets too large to pair in full, a crowded TF-IDF space."""
    warnings = []
    for bucket in oversize:
        members = [text_ids[m] for m in bucket["members"][:5].tolist()]
        warnings.append(
            {
                "kind": "oversize-bucket",
                "message": (
                    f"{bucket['size']} documents share a band bucket in {len(bucket['bands'])} band(s), "
                    f"probably shared boilerplate; only neighbouring members were compared"
                ),
                "size": int(bucket["size"]),
                "bands": [int(b) for b in bucket["bands"]],
                "sample": members,
            }
        )
    if tfidf["expected_colliding_share"] > COLLISION_WARNING_SHARE:
        warnings.append(
            {
                "kind": "tfidf-collisions",
                "message": (
                    f"{tfidf['expected_colliding_share']:.1%} of the {tfidf['vocabulary_size']:,} terms are "
                    f"expected to share a TF-IDF column; give --tfidf-features 0 (one column per term, the "
                    f"audit's default) or more than {settings.audit_tfidf_features:,}"
                ),
            }
        )
    return warnings


def candidates_block(
    method: str, n_texts: int, plan, recall: dict, candidate_pairs: int, oversize: int
) -> dict:
    """How candidates were found, and the recall to expect for the audit's measure.

    Jaccard keeps its record as it always was (the LSH probabilities are its recall).
    For containment and cosine the reason names the search, and
    ``expected_recall["value"]`` says what holds for that measure: 1.0 for the exact
    search; None (no promise) for LSH, which catches pairs by Jaccard only — the
    probabilities are then given for what they are, Jaccard levels.
    """
    measure = plan.settings.measure
    block = {
        "method": method,
        "reason": _candidates_reason(method, n_texts, plan),
        "lsh_threshold": plan.settings.effective_candidate_threshold,
        "bands": plan.bands,
        "rows": plan.rows,
        "expected_recall": recall,
        "candidate_pairs": candidate_pairs,
        "oversize_buckets": oversize,
    }
    if measure == "jaccard":
        if method == "exhaustive":
            block["expected_recall"]["note"] = (
                "exhaustive comparison: recall is 1.0; the probabilities are what LSH would give at this size"
            )
        return block
    if method == "exhaustive":
        recall = {"value": 1.0, **recall}
        recall["note"] = (
            f"exact search for {measure}: every pair at or above the threshold is a candidate, recall is "
            f"1.0; the probabilities are what LSH would catch at these Jaccard levels, for comparison only"
        )
    else:
        recall = {"value": None, **recall}
        recall["note"] = (
            f"no recall can be promised for {measure}: LSH catches a pair by its Jaccard, and a pair whose "
            f"{measure} reaches the threshold may have a much lower Jaccard; the probabilities hold for pairs "
            f"at these Jaccard levels only (--candidates auto searches {measure} exactly)"
        )
    block["expected_recall"] = recall
    return block


def _candidates_reason(method: str, n_texts: int, plan) -> str:
    measure, threshold = plan.settings.measure, plan.settings.threshold
    lsh = f"{n_texts} distinct texts: MinHash LSH with {plan.bands} bands x {plan.rows} rows"
    if measure == "jaccard":
        if method == "exhaustive":
            return f"{n_texts} distinct texts: every pair sharing a shingle is compared exactly (no pair is missed)"
        return lsh
    if method == "exhaustive":
        return (
            f"{n_texts} distinct texts: every pair whose {measure} reaches {threshold} is found exactly "
            f"({EXACT_SEARCHES[measure]}; no pair is missed)"
        )
    return f"{lsh}, tuned for Jaccard {plan.settings.effective_candidate_threshold} (no recall bound for {measure})"


def boilerplate_block(settings, boilerplate, affected: int, whole: int) -> dict:
    return {
        "enabled": settings.boilerplate,
        "limit_texts": boilerplate.limit if boilerplate is not None else None,
        "lines": len(boilerplate) if boilerplate is not None else 0,
        "texts_affected": affected,
        "texts_compared_whole": whole,
        "top": boilerplate.top(100) if boilerplate is not None else [],
    }


def summary_block(
    ledger_counts: dict,
    documents: list[dict],
    kept: int,
    n_texts: int,
    groups: list[list[int]],
    counts: dict,
    clusters: list[dict],
    roles: dict[int, dict],
    actions: list[dict],
) -> dict:
    """The audit's figures in one block (``counts``: candidate_pairs, confirmed_pairs, near_pairs)."""
    return {
        "inputs": ledger_counts,
        "documents": len(documents),
        "documents_with_text": kept,
        "distinct_texts": n_texts,
        "exact_groups": len(groups),
        "documents_in_exact_groups": sum(len(g) for g in groups),
        "candidate_pairs": counts["candidate_pairs"],
        "confirmed_pairs": counts["confirmed_pairs"],
        "near_pairs": counts["near_pairs"],
        "clusters": len(clusters),
        "documents_in_clusters": sum(c["size"] for c in clusters),
        "linked_through": sum(1 for r in roles.values() if r["role"] == "linked-through"),
        "retire_documents": sum(1 for a in actions if a["action"] == "retire"),
        "retire_bytes": sum(c["retire_bytes"] for c in clusters),
        "merge_documents": sum(1 for a in actions if a["action"] == "merge-then-retire"),
        "merge_bytes": sum(c.get("merge_bytes", 0) for c in clusters),
        "review_documents": sum(1 for a in actions if a["action"] == "review"),
    }


PASSAGE_COLUMNS = [
    "left",
    "right",
    "left_start",
    "left_end",
    "right_start",
    "right_end",
    "words",
    "right_words",
    "similarity",
    "moved",
]


def passage_records(left_ids: Sequence[str], right_ids: Sequence[str], alignment) -> list[dict]:
    """One record per shared passage of the pairs ``(left_ids[p], right_ids[p])``, sorted by
    (left, right, left_start). Offsets are characters of the texts as read, 0-based, end
    exclusive; ``words`` counts the left side's words, ``right_words`` the right's."""
    columns = [
        alignment.pair.tolist(),
        alignment.left_start.tolist(),
        alignment.left_end.tolist(),
        alignment.right_start.tolist(),
        alignment.right_end.tolist(),
        alignment.left_words.tolist(),
        alignment.right_words.tolist(),
        alignment.similarity.tolist(),
        alignment.moved.tolist(),
    ]
    rows = [
        {
            "left": left_ids[p],
            "right": right_ids[p],
            "left_start": ls,
            "left_end": le,
            "right_start": rs,
            "right_end": re_,
            "words": lw,
            "right_words": rw,
            "similarity": round(sim, 6),
            "moved": bool(moved),
        }
        for p, ls, le, rs, re_, lw, rw, sim, moved in zip(*columns)
    ]
    rows.sort(key=lambda r: (r["left"], r["right"], r["left_start"]))
    return rows
