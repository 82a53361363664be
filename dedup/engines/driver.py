"""Driver steps every engine shares: documents and their distinct texts, clusters, records.

These steps run on one machine over the (small) results of the map and shuffle steps:
which documents have words, exact groups by content hash, the graph of confirmed pairs
grouped into clusters, and the records of ``audit.json``. An engine supplies the
scores it computed; the same inputs give byte-identical records on any engine.
"""

from __future__ import annotations

import functools
import hashlib
import json
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np

from ..align import AlignSettings, NamedWords, align_pairs
from ..candidates import recall_statement
from ..cluster import build_clusters
from ..cluster.actions import ClusterInputs
from ..cluster.keeper import input_positions, unmatched_prefer
from ..cluster.loss import align_members, settle_actions
from ..ingest import LedgerEntry, input_names, summarize
from ..normalize import exact_groups
from ..report import records
from ..report.wording import describe_roles, describe_warning
from ..result import AuditResult
from ..verify import PairScores

__all__ = [
    "DistinctTexts",
    "Verified",
    "mark_empty",
    "cluster_step",
    "settle_step",
    "pair_records",
    "audit_id_of",
    "Findings",
    "assemble",
    "tfidf_block",
    "candidates_block",
    "evidence_pairs",
    "align_step",
]


@dataclass
class DistinctTexts:
    """Documents with words (``kept``, in id order) and their distinct texts.

    Distinct text ``t`` is the text of kept document ``first_doc[t]``; kept document ``d``
    has text ``text_of_doc[d]``; ``slots[t]`` is where the text lies in the canonical store.
    """

    kept: list[dict]
    groups: list[list[int]]
    representative: np.ndarray
    first_doc: np.ndarray
    text_of_doc: np.ndarray
    slots: np.ndarray

    @classmethod
    def of(cls, kept: list[dict], canonical_slot: dict[str, int]) -> DistinctTexts:
        hashes = [rec["content_hash"] for rec in kept]
        representative, groups = exact_groups(hashes)
        first_doc = np.flatnonzero(representative == np.arange(len(kept)))
        position = np.full(len(kept), -1, dtype=np.int64)
        position[first_doc] = np.arange(first_doc.shape[0])
        text_of_doc = position[representative] if len(kept) else np.zeros(0, np.int64)
        slots = np.asarray([canonical_slot[hashes[i]] for i in first_doc.tolist()], dtype=np.int64)
        return cls(kept, groups, representative, first_doc, text_of_doc, slots)

    @property
    def n(self) -> int:
        return int(self.first_doc.shape[0])

    @functools.cached_property
    def ids(self) -> list[str]:
        return [rec["id"] for rec in self.kept]

    @functools.cached_property
    def text_ids(self) -> list[str]:
        """The id of each distinct text's first document."""
        ids = self.ids
        return [ids[i] for i in self.first_doc.tolist()]


def mark_empty(documents: list[dict], wordless: set[str], ledger: list[LedgerEntry]) -> list[dict]:
    """Documents without words become ``empty`` (record and ledger, with the reason); the
    others are returned, in id order."""
    kept, empty_reason = [], {}
    for record in documents:
        if record["characters"] and record["content_hash"] not in wordless:
            kept.append(record)
            continue
        record["status"] = "empty"
        empty_reason[record["id"]] = (
            "no text" if record["characters"] == 0 else "no words after normalization"
        )
    if empty_reason:
        for entry in ledger:
            reason = empty_reason.get(entry.document_id) if entry.document_id else None
            if reason is not None:
                entry.status = "empty"
                entry.reason = reason
    return kept


@dataclass
class Verified:
    confirmed: PairScores  # left/right are distinct-text numbers
    decided: np.ndarray
    candidates: int
    whole: np.ndarray | None = None  # True: confirmed only when compared as whole texts

    def select(self, mask: np.ndarray) -> Verified:
        whole = None if self.whole is None else self.whole[mask]
        return Verified(self.confirmed.select(mask), self.decided[mask], self.candidates, whole)


def with_whole_texts(without_templates: Verified, whole_texts: Verified) -> Verified:
    """The pairs confirmed on the texts without their template lines, and those confirmed
    only when the texts are compared whole (marked in ``whole``), in (left, right) order.

    Leaving template lines out must not hide two texts that, as they are, reach the
    threshold: a copy whose template lines were re-wrapped or re-punctuated keeps them
    while its original loses them, and two texts that are mostly template differ most in
    the little that is left. So the audit also compares the whole texts and keeps both
    findings; a pair found both ways keeps its scores without template lines.
    Cost: O(pairs log pairs).
    """
    a, b = without_templates.confirmed, whole_texts.confirmed
    only = ~np.isin(_pair_keys(b.left, b.right), _pair_keys(a.left, a.right))
    joined = PairScores(
        *(np.concatenate([getattr(a, f), getattr(b, f)[only]]) for f in a.__dataclass_fields__)
    )
    decided = np.concatenate([without_templates.decided, whole_texts.decided[only]])
    whole = np.concatenate([np.zeros(len(a), bool), np.ones(int(only.sum()), bool)])
    merged = Verified(joined, decided, without_templates.candidates + whole_texts.candidates, whole)
    return merged.select(np.lexsort((joined.right, joined.left)))


def whole_text_threshold(settings) -> float:
    """The score two whole texts must reach to be confirmed as whole texts.

    Shared template text can make up to ``boilerplate_max_text_share`` (s) of each text
    before the text is compared whole anyway. A template shared alone then gives whole
    texts a Jaccard of at most s / (2 - s) and a containment of s; for the whole texts to
    reach the floor, their own text must share at least half (Jaccard of the own texts
    0.5 needs a whole-text Jaccard of (2 + s) / (4 - s), containment (1 + s) / 2). So a
    low threshold never turns a shared footer into a pair. With s = 0.5 the floor is 0.75.
    """
    share = settings.boilerplate_max_text_share
    return max(settings.threshold, (2 + share) / (4 - share), (1 + share) / 2)


def _pair_keys(left: np.ndarray, right: np.ndarray) -> np.ndarray:
    lo, hi = np.minimum(left, right).astype(np.uint64), np.maximum(left, right).astype(np.uint64)
    return (lo << np.uint64(32)) | hi


def exact_edges_of(groups: list[list[int]], edge_score: dict) -> tuple[list[int], list[int]]:
    """Each exact group as edges from its first member (score 1)."""
    exact_left, exact_right = [], []
    for group in groups:
        for member in group[1:]:
            exact_left.append(group[0])
            exact_right.append(member)
            edge_score[(group[0], member)] = 1.0
    return exact_left, exact_right


def pair_records(
    texts: DistinctTexts, verified: Verified, exact_edges, shingles_of: Callable[[np.ndarray], np.ndarray]
) -> list[dict]:
    """Confirmed near pairs and exact pairs, highest score first (``shingles_of`` gives
    the shingle count of distinct texts)."""
    pairs = records.near_pair_records(texts.text_ids, verified.confirmed, verified.decided, verified.whole)
    ids = texts.ids
    firsts = np.asarray([a for a, _ in exact_edges], dtype=np.int64)
    counts = shingles_of(texts.text_of_doc[firsts]).tolist() if len(firsts) else []
    for (a, b), shingles in zip(exact_edges, counts):
        pairs.append(records.exact_pair_record(ids[a], ids[b], int(shingles)))
    pairs.sort(key=lambda p: (-p["deciding_score"], p["left"], p["right"]))
    return pairs


def audit_id_of(settings, documents: list[dict]) -> str:
    digest = hashlib.blake2b(digest_size=8)
    digest.update(json.dumps(settings.to_dict(), sort_keys=True).encode())
    for rec in documents:
        digest.update(f"{rec['id']}\0{rec['content_hash']}\n".encode())
    return digest.hexdigest()


def cluster_step(
    texts: DistinctTexts,
    verified: Verified,
    score_against: Callable[[np.ndarray, np.ndarray], PairScores],
    settings,
    ledger_ids: Sequence[str | None] = (),
) -> tuple[list[dict], dict[int, dict], list[tuple[int, int]]]:
    """The cluster step over confirmed near pairs and exact groups (kept-document numbers).

    ``score_against(members, keepers)`` scores kept documents against their keepers;
    ``ledger_ids`` (the document id of each ledger entry, in input order) gives the
    ``first-seen`` keeper policy its order. Returns the clusters, the role of each
    clustered document (reasons as data: `settle_step` words them), and the exact edges
    (first member → member).
    """
    first_doc = texts.first_doc
    near_left, near_right = first_doc[verified.confirmed.left], first_doc[verified.confirmed.right]
    edge_score: dict[tuple[int, int], float] = {}
    for a, b, s in zip(near_left.tolist(), near_right.tolist(), verified.decided.tolist()):
        edge_score[(min(a, b), max(a, b))] = float(s)
    exact_left, exact_right = exact_edges_of(texts.groups, edge_score)
    all_left = np.concatenate([near_left, np.asarray(exact_left, np.int64)])
    all_right = np.concatenate([near_right, np.asarray(exact_right, np.int64)])
    kept = texts.kept
    cluster_inputs = ClusterInputs(
        ids=texts.ids,
        lengths=[rec["characters"] for rec in kept],
        sizes=[rec["bytes"] for rec in kept],
        dates=[rec.get("date") for rec in kept],
        representative=texts.representative,
        order=input_positions(texts.ids, ledger_ids) if settings.keeper_policy == "first-seen" else None,
    )
    clusters, roles = build_clusters(cluster_inputs, all_left, all_right, edge_score, score_against, settings)
    return clusters, roles, list(zip(exact_left, exact_right))


def settle_step(
    clusters: list[dict],
    roles: dict[int, dict],
    texts: DistinctTexts,
    originals: dict[str, str],
    template_lines,
    settings,
    workers: int = 1,
    words: NamedWords | None = None,
) -> tuple[list[dict], list[dict]]:
    """Settle what happens to each near-duplicate so that no text is lost: a member whose
    words are not all in its keeper is proposed ``merge-then-retire`` (or ``review``),
    never plain ``retire`` (`dedup.cluster.loss`); then every reason is worded. Returns
    the clusters (counted again) and the member's unique runs. ``words``: the words the
    align step found (`align_step`), so they are not found again. Cost: one compiled
    alignment per near-duplicate member."""
    words = align_members(
        clusters, originals, settings, template_lines=template_lines, workers=workers, words=words
    )
    settled = settle_actions(clusters, roles, words, settings, [rec["bytes"] for rec in texts.kept])
    describe_roles(roles)  # reasons as data become sentences for the outputs
    return settled.clusters, settled.unique_runs


@dataclass
class Findings:
    """What an engine's steps found, for `assemble`."""

    ledger: list[LedgerEntry]
    documents: list[dict]
    texts: DistinctTexts
    boilerplate: dict
    tfidf: dict
    candidates: dict
    oversize: list[dict]
    verified: Verified
    clusters: list[dict]
    roles: dict[int, dict]
    pairs: list[dict]
    passages: list[dict]
    unique_runs: list[dict]
    original_texts: dict[str, str]


def assemble(plan, paths: Sequence[str], found: Findings) -> AuditResult:
    """The records step: every record of ``audit.json`` from what the steps found."""
    settings, texts = plan.settings, found.texts
    kept_index = {rec["id"]: i for i, rec in enumerate(texts.kept)}
    actions = records.action_records(found.documents, kept_index, found.roles)
    counts = {
        "candidate_pairs": found.verified.candidates,
        "confirmed_pairs": len(found.pairs),
        "near_pairs": len(found.verified.confirmed),
    }
    summary = records.summary_block(
        summarize(found.ledger),
        found.documents,
        len(texts.kept),
        texts.n,
        texts.groups,
        counts,
        found.clusters,
        found.roles,
        actions,
    )
    return AuditResult(
        settings=settings,
        inputs=input_names(paths),
        ledger=found.ledger,
        documents=found.documents,
        exact_groups=records.exact_group_records(
            texts.groups, texts.ids, [r["content_hash"] for r in texts.kept]
        ),
        pairs=found.pairs,
        clusters=found.clusters,
        actions=actions,
        candidates=found.candidates,
        tfidf=found.tfidf,
        boilerplate=found.boilerplate,
        warnings=records.warning_records(found.oversize, texts.text_ids, found.tfidf, settings)
        + [
            describe_warning(w) for w in unmatched_prefer(settings.prefer, [d["id"] for d in found.documents])
        ],
        summary=summary,
        audit_id=audit_id_of(settings, found.documents),
        passages=found.passages,
        unique_runs=found.unique_runs,
        texts=found.original_texts,
    )


def tfidf_block(frequencies, settings) -> dict:
    """The TF-IDF columns (exact vocabulary, or a hashed space and its collisions), with
    the weighting used."""
    block = frequencies.collision_stats()
    block["sublinear_tf"] = settings.sublinear_tf
    block["idf"] = "ln((1 + n) / (1 + df)) + 1, over distinct texts"
    return block


def candidates_block(plan, method: str, n_texts: int, candidate_pairs: int, oversize: int) -> dict:
    """How candidates were found, and the recall to expect for the audit's measure
    (`dedup.report.records.candidates_block`; LSH's catch probabilities at the plan's bands)."""
    settings = plan.settings
    recall = recall_statement(settings.effective_candidate_threshold, plan.bands, plan.rows)
    return records.candidates_block(method, n_texts, plan, recall, candidate_pairs, oversize)


def evidence_pairs(pairs: list[dict], clusters: list[dict]) -> list[tuple[str, str]]:
    """The pairs whose shared passages are reported: every confirmed pair (as oriented in
    ``pairs``) and each cluster member with its keeper, once each, in a fixed order."""
    chosen: dict[tuple[str, str], tuple[str, str]] = {}
    for p in pairs:
        chosen.setdefault(tuple(sorted((p["left"], p["right"]))), (p["left"], p["right"]))
    for c in clusters:
        for m in c["members"]:
            if m["document_id"] != c["keeper"]:
                key = tuple(sorted((m["document_id"], c["keeper"])))
                chosen.setdefault(key, (m["document_id"], c["keeper"]))
    return [chosen[key] for key in sorted(chosen)]


def align_step(
    pairs: list[dict], clusters: list[dict], texts: dict[str, str], settings, workers: int = 1
) -> tuple[list[dict], NamedWords]:
    """The align step: shared passages of the evidence pairs (`evidence_pairs`), as records;
    each record of ``pairs`` gains ``left_covered`` / ``right_covered``, the share of each
    text's words in shared passages. Also returns the words found, of every text in a
    pair or cluster (for `settle_step`). Cost: O(words of the clustered texts) to find
    words, then O(words of both texts) per pair, compiled (`dedup.align`)."""
    chosen = evidence_pairs(pairs, clusters)
    words = NamedWords.of(texts, (doc for pair in chosen for doc in pair))
    left, right = words.numbers(a for a, _ in chosen), words.numbers(b for _, b in chosen)
    alignment = align_pairs(
        words.spans, left, right, AlignSettings(min_words=settings.passage_min_words), workers=workers
    )
    share = {
        pair: (float(ls), float(rs))
        for pair, ls, rs in zip(chosen, alignment.left_share.tolist(), alignment.right_share.tolist())
    }
    for p in pairs:
        left_share, right_share = share[(p["left"], p["right"])]
        p["left_covered"], p["right_covered"] = round(left_share, 6), round(right_share, 6)
    return records.passage_records([a for a, _ in chosen], [b for _, b in chosen], alignment), words
