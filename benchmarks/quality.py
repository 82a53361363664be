"""Detection quality: pair precision, recall and F1, LSH candidate recall, cluster accuracy.

A corpus of planted copies with known families is audited (see
`benchmarks.quality_truth`), and what the audit reports is compared with ground truth
computed independently, over every pair, from the shingle strings and scikit-learn's
TF-IDF.

The default audit leaves boilerplate lines out of its shingles; its ground truth is
scored on the same texts (``Bench.truths["default"]``), and one more audit with the
rule off is compared with whole-text scores (``Bench.truths["whole"]``). When it left
template lines out, the default audit also compares the whole texts and reports a pair
whose whole texts reach max(t, 0.75) (the floor of
``dedup.engines.driver.whole_text_threshold``); `audited_truth` joins the two tables
by that rule, and a pair it confirms as whole texts is scored on them.

Definitions
-----------
Pairs are pairs of documents. The audit reports near pairs between the first members
of exact-copy groups; a reported pair stands for every pair of documents of the two
groups, and every pair inside an exact-copy group is reported too.

* *Positives* at threshold t for a measure: pairs of the same family whose exact score
  on that measure is at or above t (planted positives). Same-family pairs below t are
  not expected and are counted apart. Pairs of different families scoring at or above
  t exist too (a donor page pasted into a copy, same-topic pages under cosine); they
  are correct by score and counted apart ("unplanted at or above t").
* A reported pair is *correct* when its exact score is at or above t (the tool verifies
  exactly, so no pair may be reported below t). Precision = correct / reported;
  recall = planted positives reported / planted positives; F1 their harmonic mean.
* *Family recall* of a measure: the share of all planted pairs (whatever their score)
  that it reports; *family precision*: the share of reported pairs that are planted.
  These say which measure suits which kind of copy.

LSH candidate recall is measured before verification. The audit's own stages are
called on the distinct texts (first document of each exact group, as the audit does):
``dedup.features.build_features`` → ``dedup.sketch.minhash_signatures`` →
``dedup.candidates.lsh_candidate_pairs`` with the bands and rows the audit would
choose. Every pair with exact Jaccard of at least 0.5, from the exhaustive truth, is
looked up among the candidates. The S-curve P(s) = 1 - (1 - s^r)^b (Leskovec,
Rajaraman, Ullman, *Mining of Massive Datasets*, §3.4) predicts, for a bucket, the mean
of P(s) over its pairs. Whether a given pair collides depends on the random hash
functions only, so the measurement is repeated with several MinHash seeds and pooled:
each (pair, seed) is one independent trial, and the binomial standard error
sqrt(p(1 - p) / trials) says how far measured and predicted may differ by chance
(common practice, no source). The count of candidates for the audit's own seed is
checked against the audit's.

Clusters are compared, by ``sklearn.metrics.adjusted_rand_score``, with the
*reference clustering*: connected components (``networkx.connected_components``) of
the planted positives, every other document alone. Purity (common practice, no
source) is the share of clustered documents that belong to the largest reference
group of their cluster, from ``sklearn.metrics.cluster.contingency_matrix``.

Run: ``python -m benchmarks.quality`` (all tables, the sweep and the chart; about a
minute on two cores). ``--help`` lists the options.
"""

from __future__ import annotations

import argparse
import math
import shutil
import sys
import tempfile
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from pathlib import Path

import networkx as nx
import numpy as np
from sklearn.metrics import adjusted_rand_score
from sklearn.metrics.cluster import contingency_matrix

import dedup
from benchmarks.corpus import available_manpages
from benchmarks.quality_truth import (
    OPERATIONS,
    PairTruth,
    PlantedCorpus,
    build_corpus,
    compute_truth,
    feature_texts,
)
from dedup.candidates import catch_probability, choose_bands, lsh_candidate_pairs
from dedup.features import build_features
from dedup.normalize import canonical_text
from dedup.sketch import minhash_signatures

__all__ = [
    "Bench",
    "PairCounts",
    "BucketRecall",
    "prepare",
    "run_audit",
    "reported_keys",
    "pair_quality",
    "family_counts",
    "score_agreement",
    "AuditRun",
    "run_plan",
    "boilerplate_rule",
    "whole_text_settings",
    "whole_text_floor",
    "audited_truth",
    "operation_rows",
    "bucket_rows",
    "lsh_recall",
    "cluster_quality",
    "reference_labels",
    "purity",
    "svg_chart",
    "markdown_table",
    "main",
]

MEASURES = ("jaccard", "containment", "cosine")
LSH_EDGES = (0.5, 0.6, 0.7, 0.8, 0.9, 1.0)
PAIR_EDGES = (0.0, 0.5, 0.6, 0.7, 0.8, 0.85, 0.9, 0.95, 1.0)
# Scores computed in a different order of floating-point operations may differ by this.
SCORE_TOLERANCE = 1e-9
TARGET_F1 = 0.97
TARGET_ARI = 0.95
TARGET_LSH_POINTS = 0.02
MIN_BUCKET_PAIRS = 200
SWEEP_THRESHOLDS = (0.5, 0.6, 0.7, 0.8, 0.9)
SWEEP_NUM_PERM = (64, 128, 256)
DEFAULT_CHART = Path("benchmarks/figures/lsh-recall.svg")
# The audits compared at threshold 0.8: (measure, label, truth variant, settings beyond the
# measure). "cand 0.3" tunes the bands for Jaccard 0.3 instead of the default 0.5, for
# containment and cosine pairs whose Jaccard is low; "whole text" turns the boilerplate
# rule off (where the audit has it).
AUDIT_PLAN: tuple[tuple[str, str, str, dict], ...] = (
    ("jaccard", "lsh", "default", {"candidates": "lsh"}),
    ("jaccard", "exhaustive", "default", {"candidates": "exhaustive"}),
    ("jaccard", "lsh, whole text", "whole", {"candidates": "lsh", "boilerplate": False}),
    ("containment", "lsh", "default", {"candidates": "lsh"}),
    ("containment", "lsh, cand 0.3", "default", {"candidates": "lsh", "candidate_threshold": 0.3}),
    ("containment", "exhaustive", "default", {"candidates": "exhaustive"}),
    ("cosine", "lsh", "default", {"candidates": "lsh"}),
    ("cosine", "lsh, cand 0.3", "default", {"candidates": "lsh", "candidate_threshold": 0.3}),
    ("cosine", "exhaustive", "default", {"candidates": "exhaustive"}),
)


# -- setup ----------------------------------------------------------------------------


WHOLE = "whole"
DEFAULT = "default"


def boilerplate_rule() -> tuple[float, int] | None:
    """``(share, min_texts)`` of the default boilerplate rule, or None when the audit has none."""
    defaults = dedup.AuditSettings()
    if not getattr(defaults, "boilerplate", False):
        return None
    return float(defaults.boilerplate_share), int(defaults.boilerplate_min_texts)


def whole_text_settings() -> dict:
    """Settings that make the audit shingle whole texts (boilerplate rule off), where it has the rule."""
    return {"boilerplate": False} if boilerplate_rule() is not None else {}


def whole_text_floor() -> float:
    """The least whole-text score at which the default audit reports a pair as whole texts.

    The documented floor of ``dedup.engines.driver.whole_text_threshold``, computed here
    from the largest template share s of a text: max((2 + s) / (4 - s), (1 + s) / 2).
    """
    share = float(dedup.AuditSettings().boilerplate_max_text_share)
    return max((2 + share) / (4 - share), (1 + share) / 2)


@dataclass
class Bench:
    """A written corpus, its ground truth, and the document index the audit uses.

    ``truths`` holds one table per way of reading the texts: ``"default"`` scores what
    the audit shingles with its default settings (boilerplate lines left out, where the
    audit has that rule) and ``"whole"`` scores the whole texts. ``words`` holds the
    shingled word text of every document for each.
    """

    corpus: PlantedCorpus
    truths: dict[str, PairTruth]
    words: dict[str, list[str]]
    folder: Path
    index: dict[str, int] = field(default_factory=dict)

    @property
    def n_docs(self) -> int:
        return len(self.corpus.documents)

    @property
    def truth(self) -> PairTruth:
        """Ground truth for the audit's default settings."""
        return self.truths[DEFAULT]


def prepare(folder: Path, source: str, seed: int, **sizes: int) -> Bench:
    """Build the planted corpus, write it under ``folder`` and compute its ground truth."""
    corpus = build_corpus(source, seed=seed, **sizes)
    corpus.write(folder)
    visible = [d.visible for d in corpus.documents]
    rule = boilerplate_rule()
    truths = {WHOLE: compute_truth(corpus)}
    words = {WHOLE: feature_texts(visible)}
    truths[DEFAULT] = compute_truth(corpus, rule) if rule else truths[WHOLE]
    words[DEFAULT] = feature_texts(visible, rule) if rule else words[WHOLE]
    return Bench(corpus, truths, words, folder, {doc_id: i for i, doc_id in enumerate(corpus.ids)})


def _column(truth: PairTruth, where: np.ndarray, name: str, missing: object = 0.0) -> np.ndarray:
    """``truth``'s column ``name`` at table positions ``where``; ``missing`` where -1."""
    values = getattr(truth, name)
    return np.where(where >= 0, values[np.maximum(where, 0)], missing)


def audited_truth(bench: Bench, measure: str, threshold: float) -> PairTruth:
    """Ground truth for an audit with default settings at ``threshold`` on ``measure``.

    A pair scores on the texts without template lines, unless that leaves it below the
    threshold and its whole texts reach max(threshold, `whole_text_floor`): the audit
    then reports it as whole texts, with the whole texts' scores. Without a boilerplate
    rule this is the default table. Cost: O(stored pairs log stored pairs).
    """
    part, whole = bench.truths[DEFAULT], bench.truths[WHOLE]
    if part is whole:
        return part
    keys = np.union1d(part.keys, whole.keys)
    p, w = part.positions(keys), whole.positions(keys)
    floor = max(threshold, whole_text_floor()) - SCORE_TOLERANCE
    use_whole = (_column(part, p, measure) < threshold - SCORE_TOLERANCE) & (
        _column(whole, w, measure) >= floor
    )
    scores = [np.where(use_whole, _column(whole, w, m), _column(part, p, m)) for m in MEASURES]
    planted = _column(part, p, "planted", False) | _column(whole, w, "planted", False)
    kind = np.where(p >= 0, _column(part, p, "kind", ""), _column(whole, w, "kind", "")).astype(object)
    return PairTruth(part.n_docs, keys, *scores, planted, kind)


def run_audit(bench: Bench, **settings: object) -> tuple[dedup.AuditResult, float]:
    """Audit the corpus folder with the given settings; returns the result and wall seconds."""
    start = time.perf_counter()
    result = dedup.audit([str(bench.folder)], dedup.AuditSettings(**settings))
    return result, time.perf_counter() - start


def reported_keys(result: dedup.AuditResult, bench: Bench) -> np.ndarray:
    """Sorted keys of every document pair the audit reports, exact groups expanded.

    A near pair between two first members stands for all pairs of their groups.
    """
    n = bench.n_docs
    groups = {g["members"][0]: [bench.index[m] for m in g["members"]] for g in result.exact_groups}
    keys: set[int] = set()
    for pair in result.pairs:
        if pair["kind"] != "near":
            continue
        for a in groups.get(pair["left"], [bench.index[pair["left"]]]):
            for b in groups.get(pair["right"], [bench.index[pair["right"]]]):
                keys.add(min(a, b) * n + max(a, b))
    for members in groups.values():
        ordered = sorted(members)
        for x, a in enumerate(ordered):
            keys.update(a * n + b for b in ordered[x + 1 :])
    return np.array(sorted(keys), dtype=np.int64)


# -- pair measures --------------------------------------------------------------------


@dataclass(frozen=True)
class PairCounts:
    """Counts behind pair precision, recall and F1."""

    reported: int
    correct: int
    below: int
    positives: int
    found: int
    not_expected: int
    unplanted: int

    @property
    def precision(self) -> float:
        return self.correct / self.reported if self.reported else 1.0

    @property
    def recall(self) -> float:
        return self.found / self.positives if self.positives else 1.0

    @property
    def f1(self) -> float:
        p, r = self.precision, self.recall
        return 2 * p * r / (p + r) if p + r else 0.0


def _reported_scores(reported: np.ndarray, truth: PairTruth, measure: str) -> tuple[np.ndarray, np.ndarray]:
    """Positions in the truth table (-1: not stored) and exact scores of reported pairs."""
    where = truth.positions(reported)
    scores = np.where(where >= 0, truth.score(measure)[np.maximum(where, 0)], 0.0)
    return where, scores


def pair_quality(
    reported: np.ndarray, truth: PairTruth, measure: str, threshold: float, subset: np.ndarray | None = None
) -> PairCounts:
    """Pair counts for ``measure`` at ``threshold``, optionally for a subset of stored pairs.

    With ``subset`` (a mask over the truth table) only reported pairs inside it count.
    """
    mask = np.ones(truth.keys.shape[0], bool) if subset is None else subset
    score = truth.score(measure)
    where, scores = _reported_scores(reported, truth, measure)
    inside = (where >= 0) & mask[np.maximum(where, 0)] if subset is not None else np.ones(where.shape, bool)
    is_reported = np.zeros(truth.keys.shape[0], bool)
    is_reported[where[where >= 0]] = True
    positive = truth.planted & mask & (score >= threshold)
    return PairCounts(
        reported=int(inside.sum()),
        correct=int((inside & (scores >= threshold - SCORE_TOLERANCE)).sum()),
        below=int((inside & (scores < threshold - SCORE_TOLERANCE)).sum()),
        positives=int(positive.sum()),
        found=int((positive & is_reported).sum()),
        not_expected=int((truth.planted & mask & (score < threshold)).sum()),
        unplanted=int((~truth.planted & mask & (score >= threshold)).sum()),
    )


def family_counts(
    reported: np.ndarray, truth: PairTruth, subset: np.ndarray | None = None
) -> tuple[int, int, int]:
    """``(planted pairs, planted pairs reported, reported pairs of different families)``."""
    mask = truth.planted if subset is None else truth.planted & subset
    where = truth.positions(reported)
    is_reported = np.zeros(truth.keys.shape[0], bool)
    is_reported[where[where >= 0]] = True
    cross = int((where < 0).sum() + (~truth.planted[where[where >= 0]]).sum())
    return int(mask.sum()), int((mask & is_reported).sum()), cross


def operation_rows(
    reported: np.ndarray, truth: PairTruth, measure: str, threshold: float
) -> list[tuple[str, int, float, PairCounts]]:
    """Per planted-pair kind: ``(kind, planted pairs, median score, counts)``."""
    kinds = [*OPERATIONS, "merge", "merged vs copy", "two copies"]
    rows = []
    score = truth.score(measure)
    for kind in kinds:
        mask = truth.kind == kind
        if not mask.any():
            continue
        counts = pair_quality(reported, truth, measure, threshold, mask)
        rows.append((kind, int(mask.sum()), float(np.median(score[mask])), counts))
    return rows


def bucket_rows(
    reported: np.ndarray,
    truth: PairTruth,
    measure: str,
    threshold: float,
    edges: Sequence[float] = PAIR_EDGES,
) -> list[tuple[str, int, PairCounts]]:
    """Per bucket of exact score of the planted pairs: ``(label, planted pairs, counts)``."""
    score = truth.score(measure)
    rows = []
    for low, high in zip(edges[:-1], edges[1:]):
        top = high >= 1.0
        mask = truth.planted & (score >= low) & ((score <= high) if top else (score < high))
        counts = pair_quality(reported, truth, measure, threshold, mask)
        rows.append((f"{low:.2f}–{high:.2f}", int(mask.sum()), counts))
    return rows


def score_agreement(result: dedup.AuditResult, bench: Bench, truth: PairTruth) -> dict[str, float]:
    """Largest difference between the audit's scores and the truth, over its near pairs."""
    n = bench.n_docs
    keys, tool = [], {m: [] for m in MEASURES}
    for pair in result.pairs:
        if pair["kind"] != "near":
            continue
        a, b = sorted((bench.index[pair["left"]], bench.index[pair["right"]]))
        keys.append(a * n + b)
        tool["jaccard"].append(pair["jaccard"])
        tool["containment"].append(max(pair["containment_left_in_right"], pair["containment_right_in_left"]))
        tool["cosine"].append(pair["cosine"])
    if not keys:
        return {m: 0.0 for m in MEASURES}
    where, _ = _reported_scores(np.asarray(keys, np.int64), truth, "jaccard")
    out = {}
    for m in MEASURES:
        exact = np.where(where >= 0, truth.score(m)[np.maximum(where, 0)], 0.0)
        out[m] = float(np.max(np.abs(np.asarray(tool[m]) - exact)))
    return out


# -- LSH candidate recall -------------------------------------------------------------


@dataclass(frozen=True)
class BucketRecall:
    """Measured and predicted candidate recall of one Jaccard bucket."""

    low: float
    high: float
    pairs: int
    trials: int
    caught: int
    predicted: float
    first_seed: float

    @property
    def measured(self) -> float:
        return self.caught / self.trials if self.trials else float("nan")

    @property
    def standard_error(self) -> float:
        """Binomial standard error of the pooled measurement around the prediction."""
        if not self.trials:
            return float("nan")
        return math.sqrt(max(self.predicted * (1 - self.predicted), 0.0) / self.trials)

    @property
    def gap(self) -> float:
        return self.measured - self.predicted


@dataclass(frozen=True)
class LshRecall:
    """Candidate recall per bucket for one banding, with the facts needed to read it."""

    threshold: float
    num_perm: int
    bands: int
    rows: int
    seeds: tuple[int, ...]
    buckets: list[BucketRecall]
    candidates_first_seed: int
    oversize_buckets: int


def _distinct_documents(bench: Bench) -> np.ndarray:
    """Index of the first document of each distinct normalized text, as the audit keeps them."""
    seen: dict[str, int] = {}
    for i, doc in enumerate(bench.corpus.documents):
        seen.setdefault(canonical_text(doc.visible), i)
    return np.array(sorted(seen.values()), dtype=np.int64)


def lsh_recall(
    bench: Bench,
    *,
    variant: str = DEFAULT,
    threshold: float = 0.8,
    num_perm: int = 128,
    seeds: Sequence[int] = (1,),
    bucket_limit: int = 200,
    edges: Sequence[float] = LSH_EDGES,
) -> LshRecall:
    """Candidate recall of LSH against exhaustive exact Jaccard, per bucket, pooled over seeds."""
    bands, rows = choose_bands(threshold, num_perm)
    reps = _distinct_documents(bench)
    scheme = dedup.AuditSettings().hash_scheme  # the audit's shingle hashes and MinHash
    features = build_features([bench.words[variant][i] for i in reps.tolist()], hash_scheme=scheme)
    truth, n = bench.truths[variant], bench.n_docs
    left, right = truth.keys // n, truth.keys % n
    usable = np.isin(left, reps) & np.isin(right, reps) & (truth.jaccard >= edges[0])
    keys, jac = truth.keys[usable], truth.jaccard[usable]
    caught = np.zeros((len(seeds), keys.shape[0]), bool)
    first_count, oversize = 0, 0
    for s, seed in enumerate(seeds):
        sig = minhash_signatures(
            features.shingles, features.shingle_offsets, num_perm=num_perm, seed=seed, hash_scheme=scheme
        )
        cand_left, cand_right, warnings = lsh_candidate_pairs(sig.values, bands, rows, bucket_limit)
        found = reps[cand_left] * n + reps[cand_right]
        caught[s] = np.isin(keys, found)
        if s == 0:
            first_count, oversize = int(cand_left.shape[0]), len(warnings)
    buckets = []
    for low, high in zip(edges[:-1], edges[1:]):
        mask = (jac >= low) & ((jac <= high) if high >= 1.0 else (jac < high))
        k = int(mask.sum())
        predicted = float(np.mean(catch_probability(jac[mask], bands, rows))) if k else float("nan")
        first = float(caught[0, mask].mean()) if k else float("nan")
        buckets.append(
            BucketRecall(low, high, k, k * len(seeds), int(caught[:, mask].sum()), predicted, first)
        )
    return LshRecall(threshold, num_perm, bands, rows, tuple(seeds), buckets, first_count, oversize)


# -- clusters -------------------------------------------------------------------------


def reference_labels(truth: PairTruth, measure: str, threshold: float) -> np.ndarray:
    """Reference cluster of every document: components of the planted positives."""
    graph = nx.Graph()
    graph.add_nodes_from(range(truth.n_docs))
    positive = truth.planted & (truth.score(measure) >= threshold)
    graph.add_edges_from(truth.pairs(positive))
    labels = np.empty(truth.n_docs, dtype=np.int64)
    for label, component in enumerate(sorted(nx.connected_components(graph), key=min)):
        labels[list(component)] = label
    return labels


def predicted_labels(result: dedup.AuditResult, bench: Bench) -> np.ndarray:
    """Cluster of every document in the audit; a document in no cluster is alone."""
    labels = np.arange(bench.n_docs, dtype=np.int64) + len(result.clusters)
    for c, cluster in enumerate(result.clusters):
        for member in cluster["members"]:
            labels[bench.index[member["document_id"]]] = c
    return labels


def purity(true_labels: np.ndarray, cluster_labels: np.ndarray) -> float:
    """Share of documents in the largest true group of their cluster (common practice, no source)."""
    if true_labels.size == 0:
        return 1.0
    table = contingency_matrix(true_labels, cluster_labels)
    return float(np.asarray(table.max(axis=0)).sum() / true_labels.size)


@dataclass(frozen=True)
class ClusterQuality:
    """How the audit's clusters compare with the reference and with the planted families."""

    ari_reference: float
    ari_families: float
    purity_reference: float
    purity_families: float
    clusters: int
    reference_groups: int
    joined_clusters: int
    joined_groups: int
    cross_edges_at_threshold: int
    cross_edges_below: int


def cluster_quality(
    result: dedup.AuditResult, bench: Bench, truth: PairTruth, measure: str, threshold: float
) -> ClusterQuality:
    """ARI, purity and chaining of the audit's clusters.

    A cluster *joins* reference groups when its members come from two or more of them;
    the reported pairs that cross groups are split into those whose exact score is at
    or above the threshold (correct pairs that are not planted) and those below.
    """
    predicted = predicted_labels(result, bench)
    reference = reference_labels(truth, measure, threshold)
    families = np.array([d.family for d in bench.corpus.documents], dtype=np.int64)
    clustered = np.isin(predicted, np.arange(len(result.clusters)))
    joined, groups = 0, 0
    for c in range(len(result.clusters)):
        distinct = np.unique(reference[predicted == c]).shape[0]
        if distinct > 1:
            joined += 1
            groups += distinct
    keys = reported_keys(result, bench)
    n = bench.n_docs
    crossing = reference[keys // n] != reference[keys % n]
    _, scores = _reported_scores(keys[crossing], truth, measure)
    return ClusterQuality(
        ari_reference=float(adjusted_rand_score(reference, predicted)),
        ari_families=float(adjusted_rand_score(families, predicted)),
        purity_reference=purity(reference[clustered], predicted[clustered]),
        purity_families=purity(families[clustered], predicted[clustered]),
        clusters=len(result.clusters),
        reference_groups=int(sum(np.bincount(reference) > 1)),
        joined_clusters=joined,
        joined_groups=groups,
        cross_edges_at_threshold=int((scores >= threshold - SCORE_TOLERANCE).sum()),
        cross_edges_below=int((scores < threshold - SCORE_TOLERANCE).sum()),
    )


# -- output ---------------------------------------------------------------------------


def markdown_table(headers: Sequence[str], rows: Sequence[Sequence[object]]) -> str:
    """A GitHub-flavoured markdown table; numbers right-aligned."""

    def cell(value: object) -> str:
        return str(value).replace("|", "\\|")

    numeric = [
        all(isinstance(r[i], (int, float)) or _looks_numeric(r[i]) for r in rows) for i in range(len(headers))
    ]
    lines = ["| " + " | ".join(headers) + " |"]
    lines.append("|" + "|".join("---:" if numeric[i] else "---" for i in range(len(headers))) + "|")
    lines.extend("| " + " | ".join(cell(v) for v in row) + " |" for row in rows)
    return "\n".join(lines)


def _looks_numeric(value: object) -> bool:
    text = str(value).replace(",", "").replace("%", "").replace("±", "").replace("−", "-").strip()
    try:
        float(text.split()[0] if text else "x")
    except ValueError:
        return False
    return True


def _pct(x: float, digits: int = 1) -> str:
    return "–" if x != x else f"{100 * x:.{digits}f}%"


def _f(x: float, digits: int = 3) -> str:
    return "–" if x != x else f"{x:.{digits}f}"


def svg_chart(recall: LshRecall, title: str = "") -> str:
    """Measured vs predicted candidate recall per Jaccard bucket, as a standalone SVG.

    The predicted S-curve is drawn as a line; per bucket, the predicted mean is a hollow
    marker and the pooled measurement a filled one with a 95% interval (±1.96 standard
    errors).
    """
    width, height = 640, 420
    left, right, top, bottom = 70, 20, 50, 60
    x0, x1 = recall.buckets[0].low - 0.02, recall.buckets[-1].high + 0.02

    def x(s: float) -> float:
        return left + (s - x0) / (x1 - x0) * (width - left - right)

    def y(p: float) -> float:
        return height - bottom - p * (height - top - bottom)

    parts = [
        f'<svg xmlns="http://www.w3.org/2000/svg" width="{width}" height="{height}" '
        f'viewBox="0 0 {width} {height}" font-family="sans-serif" font-size="12">',
        f'<rect width="{width}" height="{height}" fill="white"/>',
        f'<text x="{width / 2}" y="22" text-anchor="middle" font-size="14">{_xml(title)}</text>',
    ]
    for p in (0.0, 0.25, 0.5, 0.75, 1.0):
        parts.append(
            f'<line x1="{left}" y1="{y(p):.1f}" x2="{width - right}" y2="{y(p):.1f}" stroke="#ddd"/>'
        )
        parts.append(f'<text x="{left - 8}" y="{y(p) + 4:.1f}" text-anchor="end">{p:.2f}</text>')
    for b in recall.buckets:
        parts.append(
            f'<line x1="{x(b.low):.1f}" y1="{y(0):.1f}" x2="{x(b.low):.1f}" y2="{y(0) + 5:.1f}" stroke="#333"/>'
        )
        parts.append(f'<text x="{x(b.low):.1f}" y="{y(0) + 18:.1f}" text-anchor="middle">{b.low:.1f}</text>')
    parts.append(
        f'<text x="{x(recall.buckets[-1].high):.1f}" y="{y(0) + 18:.1f}" text-anchor="middle">'
        f"{recall.buckets[-1].high:.1f}</text>"
    )
    parts.append(f'<line x1="{left}" y1="{y(0)}" x2="{width - right}" y2="{y(0)}" stroke="#333"/>')
    parts.append(f'<line x1="{left}" y1="{y(0)}" x2="{left}" y2="{y(1)}" stroke="#333"/>')
    parts.append(
        f'<text x="{(left + width - right) / 2}" y="{height - 18}" text-anchor="middle">exact Jaccard of the pair</text>'
    )
    parts.append(
        f'<text transform="translate(18 {(top + height - bottom) / 2}) rotate(-90)" text-anchor="middle">'
        "share of pairs that became candidates</text>"
    )
    grid = np.linspace(recall.buckets[0].low, recall.buckets[-1].high, 101)
    curve = catch_probability(grid, recall.bands, recall.rows)
    points = " ".join(f"{x(s):.1f},{y(p):.1f}" for s, p in zip(grid.tolist(), curve.tolist()))
    parts.append(
        f'<polyline class="s-curve" points="{points}" fill="none" stroke="#888" stroke-dasharray="5 4"/>'
    )
    for b in recall.buckets:
        if not b.trials:
            continue
        cx = x((b.low + b.high) / 2)
        half = 1.96 * b.standard_error
        lo, hi = max(b.measured - half, 0.0), min(b.measured + half, 1.0)
        parts.append(
            f'<line x1="{cx:.1f}" y1="{y(lo):.1f}" x2="{cx:.1f}" y2="{y(hi):.1f}" stroke="#1f5fa8"/>'
        )
        parts.append(
            f'<circle class="predicted" cx="{cx:.1f}" cy="{y(b.predicted):.1f}" r="7" fill="none" '
            f'stroke="#c0392b" stroke-width="2"><title>predicted {_pct(b.predicted)}</title></circle>'
        )
        parts.append(
            f'<circle class="measured" cx="{cx:.1f}" cy="{y(b.measured):.1f}" r="4" fill="#1f5fa8">'
            f"<title>measured {_pct(b.measured)} over {b.trials:,} trials</title></circle>"
        )
        last = b is recall.buckets[-1]
        parts.append(
            f'<text x="{cx - 11 if last else cx + 11:.1f}" y="{y(b.measured) + (34 if last else 16):.1f}" font-size="11" '
            f'fill="#1f5fa8" text-anchor="{"end" if last else "start"}">'
            f"{_pct(b.measured)}</text>"
        )
    legend_y = top + 6
    parts.append(
        f'<line x1="{left + 14}" y1="{legend_y}" x2="{left + 40}" y2="{legend_y}" stroke="#888" stroke-dasharray="5 4"/>'
    )
    parts.append(
        f'<text x="{left + 46}" y="{legend_y + 4}">S-curve P(s), {recall.bands} bands × {recall.rows} rows</text>'
    )
    parts.append(
        f'<circle cx="{left + 27}" cy="{legend_y + 20}" r="7" fill="none" stroke="#c0392b" stroke-width="2"/>'
    )
    parts.append(
        f'<text x="{left + 46}" y="{legend_y + 24}">predicted: mean P(s) over the bucket\'s pairs</text>'
    )
    parts.append(f'<circle cx="{left + 27}" cy="{legend_y + 40}" r="4" fill="#1f5fa8"/>')
    parts.append(
        f'<text x="{left + 46}" y="{legend_y + 44}">measured over {len(recall.seeds)} seeds, 95% interval '
        "(labelled)</text>"
    )
    parts.append("</svg>")
    return "\n".join(parts) + "\n"


def _xml(text: str) -> str:
    return text.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")


# -- report sections ------------------------------------------------------------------


@dataclass(frozen=True)
class AuditRun:
    """One audit of the corpus and the ground truth it is compared with."""

    measure: str
    label: str
    truth: PairTruth
    result: dedup.AuditResult
    seconds: float
    keys: np.ndarray

    @property
    def name(self) -> str:
        return f"{self.measure} ({self.label})"


def run_plan(
    bench: Bench, threshold: float, plan: Sequence[tuple[str, str, str, dict]], log: Callable[[str], None]
) -> list[AuditRun]:
    """Run the planned audits; a "whole text" audit is left out when the audit has no boilerplate rule."""
    runs = []
    whole_ok = boilerplate_rule() is not None
    for measure, label, variant, extra in plan:
        if variant == WHOLE and not whole_ok:
            continue
        result, seconds = run_audit(bench, threshold=threshold, measure=measure, **extra)
        truth = audited_truth(bench, measure, threshold) if variant == DEFAULT else bench.truths[variant]
        runs.append(AuditRun(measure, label, truth, result, seconds, reported_keys(result, bench)))
        log(f"audit {measure} ({label}) in {seconds:.1f} s")
    return runs


def _counts_cells(c: PairCounts) -> list[object]:
    return [
        c.positives,
        c.found,
        _f(c.recall),
        c.reported,
        c.below,
        _f(c.precision),
        _f(c.f1),
        c.not_expected,
    ]


_COUNT_HEADERS = [
    "positives",
    "found",
    "recall",
    "reported",
    "below t",
    "precision",
    "F1",
    "below t, not expected",
]


def section_corpus(bench: Bench) -> str:
    """What the corpus holds."""
    c = bench.corpus
    rows = [
        ["families: base documents", c.count("base")],
        ["families: copies (one operation each)", c.count("copy")],
        ["merged documents (two bases joined)", c.count("merged")],
        ["siblings (15–40% of a base's paragraphs among other text)", c.count("sibling")],
        ["unrelated distractors", c.count("distractor")],
        ["documents", len(c.documents)],
        ["planted pairs (same family)", int(bench.truth.planted.sum())],
    ]
    rule = boilerplate_rule()
    rule_text = (
        f"Ground truth scores the texts as the default audit shingles them: lines found in at least "
        f"max({rule[1]}, {rule[0]:.0%} of the distinct texts) are boilerplate and left out. A pair below "
        f"the threshold on those texts whose whole texts reach max(threshold, {whole_text_floor():.2f}) is "
        "scored on its whole texts, as the audit reports it."
        if rule
        else "Ground truth scores the whole texts."
    )
    return (
        f"Source: **{c.source}**, seed {c.seed}; source pool {c.pool_size} documents after "
        f"{c.pool_dropped} natural near-duplicates (containment ≥ 0.5) were dropped. {rule_text}\n\n"
        + markdown_table(["part", "count"], rows)
    )


def section_pairs(run: AuditRun, threshold: float) -> str:
    """Pair quality per operation and per bucket for one audit."""
    truth, measure = run.truth, run.measure
    op_rows = [
        [kind, n, _f(med, 2), *_counts_cells(c)]
        for kind, n, med, c in operation_rows(run.keys, truth, measure, threshold)
    ]
    total = pair_quality(run.keys, truth, measure, threshold)
    op_rows.append(["**all planted**", int(truth.planted.sum()), "", *_counts_cells(total)])
    by_op = markdown_table(["planted pair", "pairs", f"median {measure}", *_COUNT_HEADERS], op_rows)
    b_rows = [
        [label, n, *_counts_cells(c)] for label, n, c in bucket_rows(run.keys, truth, measure, threshold)
    ]
    by_bucket = markdown_table([f"exact {measure}", "planted pairs", *_COUNT_HEADERS], b_rows)
    return f"By edit operation:\n\n{by_op}\n\nBy similarity bucket of the planted pairs:\n\n{by_bucket}"


def section_scores(bench: Bench, runs: Sequence[AuditRun], threshold: float) -> str:
    """Pair precision, recall and F1 against exact scores for every audit."""
    rows = []
    for run in runs:
        c = pair_quality(run.keys, run.truth, run.measure, threshold)
        agree = score_agreement(run.result, bench, run.truth)[run.measure]
        rows.append(
            [
                run.measure,
                run.label,
                run.result.candidates["candidate_pairs"],
                c.positives,
                c.found,
                _f(c.recall),
                c.reported,
                c.below,
                c.unplanted,
                _f(c.f1),
                f"{agree:.1e}",
                f"{run.seconds:.1f}",
            ]
        )
    return markdown_table(
        [
            "measure",
            "audit",
            "candidate pairs",
            "planted positives",
            "found",
            "recall",
            "reported",
            "below t",
            "unplanted ≥ t",
            "F1",
            "max score difference",
            "seconds",
        ],
        rows,
    )


def section_measures(runs: Sequence[AuditRun], threshold: float) -> str:
    """Family recall of every audit per planted-pair kind, and family precision."""
    truth = runs[0].truth
    kinds = [k for k in (*OPERATIONS, "merge", "merged vs copy", "two copies") if (truth.kind == k).any()]
    rows = []
    for kind in kinds:
        cells = []
        for run in runs:
            planted, found, _ = family_counts(run.keys, run.truth, run.truth.kind == kind)
            cells.append(_pct(found / planted if planted else float("nan"), 0))
        rows.append([kind, int((truth.kind == kind).sum()), *cells])
    prec = ["**family precision**", ""]
    for run in runs:
        _, found, cross = family_counts(run.keys, run.truth)
        prec.append(_pct(found / (found + cross) if found + cross else float("nan")))
    rows.append(prec)
    return (
        f"Share of planted pairs reported at threshold {threshold} (family recall), whatever their score, and "
        f"share of reported pairs that are planted (family precision):\n\n"
        + markdown_table(["planted pair", "pairs", *[run.name for run in runs]], rows)
    )


def section_lsh(recall: LshRecall, audit_candidates: int | None, whole_candidates: int | None = None) -> str:
    """The LSH candidate recall table; ``whole_candidates``: the candidates of the audit's
    second pass over the whole texts (seed 1), when it left template lines out."""
    rows = []
    for b in recall.buckets:
        ok = "–" if b.pairs < MIN_BUCKET_PAIRS else ("yes" if abs(b.gap) <= TARGET_LSH_POINTS else "**no**")
        rows.append(
            [
                f"{b.low:.1f}–{b.high:.1f}",
                b.pairs,
                _pct(b.predicted),
                _pct(b.first_seed),
                _pct(b.measured),
                f"{100 * b.gap:+.1f}",
                f"±{100 * 1.96 * b.standard_error:.1f}",
                ok,
            ]
        )
    table = markdown_table(
        [
            "exact Jaccard",
            "pairs",
            "predicted",
            f"measured, seed {recall.seeds[0]}",
            f"measured, {len(recall.seeds)} seeds",
            "gap (points)",
            "95% sampling",
            "within ±2",
        ],
        rows,
    )
    check = ""
    if audit_candidates is not None:
        ours = recall.candidates_first_seed + (whole_candidates or 0)
        same = "equal to" if audit_candidates == ours else "**different from**"
        counted = f"{recall.candidates_first_seed:,},"
        if whole_candidates is not None:
            counted = (
                f"{recall.candidates_first_seed:,} on the texts without template lines and "
                f"{whole_candidates:,} on the whole texts, together"
            )
        check = (
            f" Candidates for seed {recall.seeds[0]}: {counted} {same} the audit's own "
            f"count ({audit_candidates:,})."
        )
    return (
        f"Threshold {recall.threshold}, {recall.num_perm} permutations → {recall.bands} bands × {recall.rows} rows; "
        f"oversize buckets: {recall.oversize_buckets}.{check}\n\n{table}"
    )


def section_clusters(bench: Bench, runs: Sequence[AuditRun], threshold: float) -> str:
    """Cluster quality of every audit."""
    body = []
    for run in runs:
        q = cluster_quality(run.result, bench, run.truth, run.measure, threshold)
        body.append(
            [
                run.name,
                _f(q.ari_reference),
                _f(q.ari_families),
                _f(q.purity_reference),
                _f(q.purity_families),
                q.clusters,
                q.reference_groups,
                q.joined_clusters,
                q.cross_edges_at_threshold,
                q.cross_edges_below,
            ]
        )
    return markdown_table(
        [
            "audit",
            "ARI vs reference",
            "ARI vs families",
            "purity vs reference",
            "purity vs families",
            "clusters",
            "reference groups",
            "clusters joining groups",
            "crossing pairs ≥ t",
            "crossing pairs < t",
        ],
        body,
    )


def sweep(bench: Bench, thresholds: Sequence[float], perms: Sequence[int], log: Callable[[str], None]) -> str:
    """F1, candidates and time across thresholds and permutation counts (Jaccard, default settings, LSH)."""
    rows = []
    for t in thresholds:
        configs = [(p, {"num_perm": p, "candidates": "lsh"}) for p in perms] + [
            ("exhaustive", {"candidates": "exhaustive"})
        ]
        for label, extra in configs:
            result, seconds = run_audit(bench, threshold=t, **extra)
            keys = reported_keys(result, bench)
            truth = audited_truth(bench, "jaccard", t)
            c = pair_quality(keys, truth, "jaccard", t)
            q = cluster_quality(result, bench, truth, "jaccard", t)
            cand = result.candidates
            shape = f"{cand['bands']}×{cand['rows']}" if label != "exhaustive" else "–"
            rows.append(
                [
                    t,
                    label,
                    shape,
                    cand["candidate_pairs"],
                    c.positives,
                    _f(c.recall),
                    _f(c.precision),
                    _f(c.f1),
                    c.below,
                    _f(q.ari_reference),
                    f"{result.run.get('stages_seconds', {}).get('features', 0.0):.2f}",
                    f"{seconds:.2f}",
                ]
            )
            log(f"sweep t={t} {label}: F1 {c.f1:.4f}")
    return markdown_table(
        [
            "threshold",
            "num_perm",
            "bands×rows",
            "candidate pairs",
            "planted positives",
            "recall",
            "precision",
            "F1",
            "below t",
            "ARI",
            "sketch seconds",
            "audit seconds",
        ],
        rows,
    )


# -- command line ---------------------------------------------------------------------


def _choose_source(source: str) -> str:
    if source != "auto":
        return source
    return "manpages" if available_manpages(1500) else "synthetic"


def headline(
    bench: Bench, main_run: AuditRun, runs: Sequence[AuditRun], recall: LshRecall, threshold: float
) -> str:
    """The targets of the issue, wanted against measured."""
    f1 = pair_quality(main_run.keys, main_run.truth, "jaccard", threshold)
    cq = cluster_quality(main_run.result, bench, main_run.truth, "jaccard", threshold)
    below_total = sum(pair_quality(r.keys, r.truth, r.measure, threshold).below for r in runs)
    big = [b for b in recall.buckets if b.pairs >= MIN_BUCKET_PAIRS]
    worst = max(big, key=lambda b: abs(b.gap)) if big else None
    rows = [
        [
            f"pair F1, planted pairs at or above t (Jaccard {threshold}, default settings, LSH)",
            f"≥ {TARGET_F1}",
            _f(f1.f1, 4),
            "yes" if f1.f1 >= TARGET_F1 else "**no**",
        ],
        [
            "ARI vs reference clusters (same audit)",
            f"≥ {TARGET_ARI}",
            _f(cq.ari_reference, 4),
            "yes" if cq.ari_reference >= TARGET_ARI else "**no**",
        ],
        [
            f"LSH recall vs S-curve, buckets ≥ {MIN_BUCKET_PAIRS} pairs (largest gap, {len(recall.seeds)} seeds)",
            "± 2 points",
            f"{100 * worst.gap:+.1f} points ({worst.low:.1f}–{worst.high:.1f})" if worst else "–",
            "yes" if worst is None or abs(worst.gap) <= TARGET_LSH_POINTS else "**no**",
        ],
        [
            f"pairs reported below the threshold, all {len(runs)} audits at {threshold}",
            "0",
            below_total,
            "yes" if below_total == 0 else "**no**",
        ],
    ]
    return markdown_table(["target", "wanted", "measured", "met"], rows)


def _parse(argv: Sequence[str] | None) -> argparse.Namespace:
    parser = argparse.ArgumentParser(
        prog="python -m benchmarks.quality",
        description="Measure detection quality on planted duplicates and print markdown tables.",
    )
    parser.add_argument(
        "--source",
        choices=("auto", "manpages", "synthetic"),
        default="auto",
        help="base documents: this machine's man pages or invented text (auto: man pages if present)",
    )
    parser.add_argument("--seed", type=int, default=0, help="seed of the corpus")
    parser.add_argument("--families", type=int, default=300)
    parser.add_argument("--copies", type=int, default=6, help="copies per family")
    parser.add_argument("--merged", type=int, default=30)
    parser.add_argument("--siblings", type=int, default=100)
    parser.add_argument("--distractors", type=int, default=400)
    parser.add_argument("--lsh-seeds", type=int, default=10, help="MinHash seeds pooled for candidate recall")
    parser.add_argument(
        "--chart", type=Path, default=DEFAULT_CHART, help=f"SVG chart path (default {DEFAULT_CHART})"
    )
    parser.add_argument("--no-sweep", action="store_true", help="skip the threshold × num_perm sweep")
    parser.add_argument("--markdown", type=Path, help="also write the tables to this file")
    return parser.parse_args(argv)


def main(argv: Sequence[str] | None = None) -> int:
    """Build the corpus, run every audit, print the tables and write the chart."""
    args = _parse(argv)
    started = time.perf_counter()

    def log(message: str) -> None:
        print(f"[{time.perf_counter() - started:6.1f} s] {message}", file=sys.stderr, flush=True)

    workdir = Path(tempfile.mkdtemp(prefix="dedup-quality-"))
    try:
        bench = prepare(
            workdir,
            _choose_source(args.source),
            args.seed,
            n_families=args.families,
            copies_per_family=args.copies,
            n_merged=args.merged,
            n_siblings=args.siblings,
            n_distractors=args.distractors,
        )
        log(f"corpus of {bench.n_docs} documents and its truth ready")
        text = report(bench, args, log)
    except ValueError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 2
    finally:
        shutil.rmtree(workdir, ignore_errors=True)
    text += f"\n\nTotal run time: {time.perf_counter() - started:.0f} s.\n"
    print(text)
    if args.markdown:
        args.markdown.write_text(text, encoding="utf-8")
    return 0


def report(bench: Bench, args: argparse.Namespace, log: Callable[[str], None]) -> str:
    """Every audit and every table, as one markdown text; writes the chart."""
    t = 0.8
    runs = run_plan(bench, t, AUDIT_PLAN, log)
    main_run = runs[0]
    seeds = tuple(range(1, args.lsh_seeds + 1))
    recall = lsh_recall(bench, threshold=t, num_perm=128, seeds=seeds)
    recall_low = lsh_recall(bench, threshold=0.5, num_perm=128, seeds=seeds)
    whole_candidates = None
    if main_run.result.boilerplate.get("texts_affected"):  # the audit compared the whole texts too
        whole_candidates = lsh_recall(bench, variant=WHOLE, threshold=t, num_perm=128).candidates_first_seed
    log("LSH recall measured")
    args.chart.parent.mkdir(parents=True, exist_ok=True)
    args.chart.write_text(
        svg_chart(recall, f"LSH candidate recall at threshold {t}, {recall.num_perm} permutations"),
        encoding="utf-8",
    )
    sections = [
        "### Corpus\n\n" + section_corpus(bench),
        "### Targets\n\n" + headline(bench, main_run, runs, recall, t),
        f"### Pairs: Jaccard at {t}, default settings, LSH\n\n" + section_pairs(main_run, t),
        f"### Pairs: every audit at {t}, against exact scores\n\n" + section_scores(bench, runs, t),
        "### Which measure finds which copy\n\n" + section_measures(runs, t),
        "### LSH candidate recall vs the S-curve\n\n"
        + section_lsh(recall, main_run.result.candidates["candidate_pairs"], whole_candidates)
        + f"\n\nChart: `{args.chart.as_posix()}`.\n\nWith the bands used for containment and cosine "
        "(candidate threshold 0.5):\n\n" + section_lsh(recall_low, None),
        f"### Clusters at {t}\n\n" + section_clusters(bench, runs, t),
    ]
    if not args.no_sweep:
        sections.append(
            "### Sweep: threshold × num_perm (Jaccard, default settings)\n\n"
            + sweep(bench, SWEEP_THRESHOLDS, SWEEP_NUM_PERM, log)
        )
    return "\n\n".join(sections)


if __name__ == "__main__":
    raise SystemExit(main())
