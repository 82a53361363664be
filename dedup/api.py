"""The Python entry point: ``dedup.audit(paths, settings) -> AuditResult``.

Stages run in one direction (see the package layout): ingest → normalize (and the
exact-duplicate pass) → features → sketch → candidates → verify → cluster. Between
stages travel numpy arrays; only the final result is turned into records for output.
The tool never modifies, moves or deletes any input: it only reads them and proposes
actions.
"""

from __future__ import annotations

import dataclasses
import functools
import hashlib
import json
import resource
import time
from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np

from . import __version__
from .candidates import choose_bands, exhaustive_candidate_pairs, lsh_candidate_pairs, recall_statement
from .cluster import build_clusters
from .cluster.actions import ClusterInputs
from .features import tokenize
from .features.segment_sort import sorted_distinct
from .features.shingles import from_word_hashes
from .heap import lean_allocation
from .ingest import InputError, LedgerEntry, decode_text, iter_documents, summarize
from .normalize import exact_groups
from .normalize.boilerplate import Boilerplate, canonical_lines
from .progress import Progress
from .settings import AuditSettings
from .streaming import (
    ChunkSketcher,
    SlotRows,
    compared_sets,
    kernels_thread_safe,
    prepare_documents,
    read_pass,
    sketch_pass,
    text_order,
)
from .verify import PairScores, deciding_score, may_reach, score_pairs
from .workdir import WorkFolder

__all__ = ["audit", "AuditResult", "SCHEMA_VERSION"]

SCHEMA_VERSION = "1.0"
# A hashed feature space where more than this share of terms collide gets a warning.
COLLISION_WARNING_SHARE = 0.05


@dataclass
class AuditResult:
    """Everything an audit found, ready to be written as JSON, CSV and HTML.

    Attributes
    ----------
    settings : AuditSettings
    inputs : list of str
        The paths as given.
    ledger : list of LedgerEntry
        One entry per input (file or record).
    documents : list of dict
        Every document read (including empty ones), in id order.
    exact_groups : list of dict
    pairs : list of dict
        Confirmed pairs with all scores.
    clusters : list of dict
    actions : list of dict
        One proposed action per document.
    candidates : dict
        How candidates were found and the expected recall.
    tfidf : dict
        Hashed feature space and its collisions.
    warnings : list of dict
    run : dict
        Timings and peak memory of this run; not part of ``audit.json`` (which must
        be byte-identical between runs) but written to ``run.json``.
    texts : dict
        Original text of every clustered document, for the report's evidence view.
    delta : dict or None
        With an index: what changed since the last audit (see `dedup.index`).
    """

    settings: AuditSettings
    inputs: list[str]
    ledger: list[LedgerEntry]
    documents: list[dict]
    exact_groups: list[dict]
    pairs: list[dict]
    clusters: list[dict]
    actions: list[dict]
    candidates: dict
    tfidf: dict
    warnings: list[dict]
    summary: dict
    boilerplate: dict
    audit_id: str
    run: dict = field(default_factory=dict)
    texts: dict = field(default_factory=dict)
    delta: dict | None = None

    def to_dict(self, lazy: bool = False) -> dict:
        """The content of ``audit.json`` (deterministic: no clock, no host, no absolute path).

        With ``lazy`` the ledger is a generator of records (for writing, not keeping).
        """
        return {
            "schema_version": SCHEMA_VERSION,
            "tool": {"name": "dedup", "version": __version__},
            "audit_id": self.audit_id,
            "notice": NOTICE,
            "inputs": self.inputs,
            "settings": self.settings.to_dict(),
            "summary": self.summary,
            "candidates": self.candidates,
            "tfidf": self.tfidf,
            "boilerplate": self.boilerplate,
            "warnings": self.warnings,
            "ledger": (e.to_dict() for e in self.ledger) if lazy else [e.to_dict() for e in self.ledger],
            "documents": self.documents,
            "exact_groups": self.exact_groups,
            "pairs": self.pairs,
            "clusters": self.clusters,
            "actions": self.actions,
            **({"delta": self.delta} if self.delta is not None else {}),
        }

    def write(self, out_dir: str, progress: Progress | None = None) -> dict[str, str]:
        """Write every output file into ``out_dir``; returns name → path."""
        from .report import write_outputs

        with lean_allocation():
            return write_outputs(self, out_dir, progress=progress)


NOTICE = (
    "Similarity is evidence for a person to review, not a verdict: quotations, citations, shared "
    "templates and common phrasing match too. This tool only reads its inputs; the actions are "
    "proposals and no file has been changed, moved or deleted."
)


class _Stopwatch:
    """Seconds of each stage, and the peak memory of the process when each stage ended."""

    def __init__(self) -> None:
        self.stages: dict[str, float] = {}
        self.peaks: dict[str, float] = {}
        self._t = time.perf_counter()

    def split(self, first: str, first_seconds: float, rest: str) -> None:
        """End two interleaved stages: ``first`` took ``first_seconds`` of the time since the last lap."""
        now = time.perf_counter()
        total = now - self._t
        self.stages[first] = round(first_seconds, 4)
        self.stages[rest] = round(max(total - first_seconds, 0.0), 4)
        self.peaks[first] = self.peaks[rest] = _peak_rss_mb()
        self._t = now

    def lap(self, stage: str) -> None:
        now = time.perf_counter()
        self.stages[stage] = round(now - self._t, 4)
        self.peaks[stage] = _peak_rss_mb()
        self._t = now


def _peak_rss_mb() -> float:
    # ru_maxrss is in kilobytes on Linux.
    return round(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0, 1)


def _pair_record(ids: Sequence[str], scores: PairScores, i: int, kind: str, decided: float) -> dict:
    return {
        "left": ids[int(scores.left[i])],
        "right": ids[int(scores.right[i])],
        "kind": kind,
        "deciding_score": decided,
        "jaccard": float(scores.jaccard[i]),
        "containment_left_in_right": float(scores.containment_left_in_right[i]),
        "containment_right_in_left": float(scores.containment_right_in_left[i]),
        "cosine": float(scores.cosine[i]),
        "shared_shingles": int(scores.shared[i]),
    }


def audit(
    paths: Sequence[str],
    settings: AuditSettings | None = None,
    *,
    progress: Progress | None = None,
    work_dir: str | None = None,
    keep_work: bool = False,
    workers: int = 1,
) -> AuditResult:
    """Audit files and folders for exact and near-duplicate documents.

    Parameters
    ----------
    paths : sequence of str
        Files and folders to read (folders are walked recursively).
    settings : AuditSettings, optional
        Every knob; defaults to ``AuditSettings()``.
    progress : Progress, optional
        Receives stage progress (the CLI draws it on stderr).
    work_dir : str, optional
        Folder for intermediate data spilled to disk (texts, signatures); a temporary
        folder by default. Removed at the end unless ``keep_work``.
    keep_work : bool
        Leave the work folder in place (to inspect it).
    workers : int
        Processes that read and normalize files in parallel (default 1: read in this
        process). Results do not depend on it. Worth it where reading dominates and the
        CPUs are real cores: the texts cross between processes once.

    Returns
    -------
    AuditResult

    Raises
    ------
    dedup.SettingsError
        A setting is invalid (checked before any work).
    dedup.InputError
        A given path does not exist.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (d / "a.txt").write_text("the quick brown fox jumps over the lazy dog")
    >>> _ = (d / "b.txt").write_text("The  quick brown fox\\njumps over the LAZY dog")
    >>> audit([str(d)]).summary["exact_groups"]
    1
    """
    settings = (settings or AuditSettings()).validate()
    progress = progress or Progress.silent()
    known_boilerplate = _read_ignore_text(settings.ignore_text_file)
    with lean_allocation():
        try:
            with WorkFolder(work_dir, keep=keep_work) as work:
                return _audit(paths, settings, progress, known_boilerplate, work, workers)
        finally:
            # Freed while the heap keeps what is freed: after, its pages would go back
            # to the system at once (10 ms for this array alone).
            tokenize.release_scratch()


# Up to this many bytes of distinct text, the sketch pass keeps the word hashes of every text.
KEEP_WORDS_TEXT_BYTES = 64 * 2**20
# Sketch the texts while they are read, when there is no boilerplate to strip first.
OVERLAP_SKETCH = True
# Up to this many bytes of distinct text, sketching while reading also makes the shingle
# sets and term counts of every text (about 3 bytes per byte of text), so the compared
# texts are only picked out of them; beyond, the compared texts are tokenized again.
KEEP_SETS_TEXT_BYTES = 64 * 2**20


def _bands(settings: AuditSettings) -> tuple[int, int]:
    """The LSH bands and rows: as set, else chosen for the candidate threshold."""
    if settings.bands is not None:
        return settings.bands, settings.rows
    return choose_bands(
        settings.effective_candidate_threshold, settings.num_perm, settings.false_positive_weight
    )


def _audit(
    paths: Sequence[str],
    settings: AuditSettings,
    progress: Progress,
    known_boilerplate: list[str],
    work: WorkFolder,
    workers: int,
) -> AuditResult:
    watch = _Stopwatch()
    originals, canonicals = work.store("originals"), work.store("canonical")

    # -- ingest + normalize + exact pass (one streaming pass) ---------------------------
    ledger: list[LedgerEntry] = []
    progress.start("reading")
    documents_in = iter_documents(
        paths,
        id_field=settings.id_field,
        text_fields=settings.text_fields,
        max_file_bytes=settings.max_file_bytes,
        include_hidden=settings.include_hidden,
        ledger=ledger,
        max_text_chars=settings.max_text_chars,
        max_archive_ratio=settings.max_archive_ratio,
        max_archive_bytes=settings.max_archive_bytes,
        html_keep_all=settings.html_keep_all,
        include=settings.include,
        exclude=settings.exclude,
        include_vcs=settings.include_vcs,
        workers=workers,
        prepare=functools.partial(prepare_documents, lines=settings.boilerplate),
    )
    # Without boilerplate to strip, the stored texts are the texts to shingle: they are
    # sketched while the reading goes on (LSH signatures too unless comparison is
    # exhaustive by choice; for "auto" they go unused when the corpus turns out small).
    bands, rows = _bands(settings)
    early: ChunkSketcher | None = None
    threaded = OVERLAP_SKETCH and kernels_thread_safe()
    if not settings.boilerplate and threaded:
        early = ChunkSketcher(
            settings,
            lsh=(bands, rows) if settings.candidates != "exhaustive" else None,
            signature_path=work.file("signatures.u32"),
            sets_text_limit=KEEP_SETS_TEXT_BYTES,
        )
    try:
        read = read_pass(
            documents_in, settings, originals, canonicals, progress, sketcher=early, threaded=threaded
        )
    finally:
        if early is not None:
            early.close()
    documents = read.documents
    progress.done(f"{len(documents):,} documents")
    watch.split("ingest", read.read_seconds, "normalize")

    kept_rows = []
    empty_reason: dict[str, str] = {}
    for i, record in enumerate(documents):
        if record["characters"] and record["content_hash"] not in read.wordless:
            kept_rows.append(i)
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
    kept = [documents[i] for i in kept_rows]
    ids = [rec["id"] for rec in kept]
    hashes = [rec["content_hash"] for rec in kept]
    representative, groups = exact_groups(hashes)
    rep_docs = np.flatnonzero(representative == np.arange(len(kept)))
    rep_position = np.full(len(kept), -1, dtype=np.int64)
    rep_position[rep_docs] = np.arange(rep_docs.shape[0])
    doc_to_rep = rep_position[representative] if len(kept) else np.zeros(0, np.int64)
    rep_slots = np.asarray([read.canonical_slot[hashes[i]] for i in rep_docs.tolist()], dtype=np.int64)
    n_reps = int(rep_docs.shape[0])

    boilerplate: Boilerplate | None = None
    if read.counter is not None:
        boilerplate = read.counter.find(
            share=settings.boilerplate_share,
            min_texts=settings.boilerplate_min_texts,
            known=known_boilerplate,
        )

    # -- features + sketches (second streaming pass over the distinct texts) ------------
    lsh_threshold = settings.effective_candidate_threshold
    method = settings.candidates
    if method == "auto":
        method = "exhaustive" if n_reps <= settings.exhaustive_max_docs else "lsh"
    progress.start("shingling", n_reps)
    # Word hashes kept on disk for the texts compared later (8 bytes a word, about 1.3 times
    # the text): cheaper to read back than to tokenize the texts again. Beyond a modest
    # corpus they are not kept: the work folder would more than double, and there the
    # compared texts are a small share, cheaper to tokenize again than to write all words for.
    if early is not None:
        # Sketched during the read pass, in store order; the slots are the texts' own.
        sketch = early.finish(text_order(rep_slots))
        words = None  # the sets are kept instead (or, beyond them, the texts are read again)
        progress.advance(n_reps)
    else:
        keep_words = from_word_hashes(settings) and canonicals.size <= KEEP_WORDS_TEXT_BYTES
        words = work.store("words") if keep_words else None
        sketch = sketch_pass(
            rep_slots,
            canonicals,
            boilerplate,
            settings,
            lsh=(bands, rows) if method == "lsh" else None,
            signature_path=work.file("signatures.u32"),
            progress=progress,
            word_store=words,
        )
    progress.done()
    watch.lap("features")
    tfidf_info = sketch.frequencies.collision_stats()
    tfidf_info["sublinear_tf"] = settings.sublinear_tf
    tfidf_info["idf"] = "ln((1 + n) / (1 + df)) + 1, over distinct texts"

    # -- candidates -------------------------------------------------------------------
    oversize: list[dict] = []
    exact_reps = np.asarray([doc_to_rep[g[0]] for g in groups], dtype=np.int64)
    progress.start("candidates")
    compared_of = functools.partial(
        compared_sets,
        n_texts=n_reps,
        slots=rep_slots,
        canonicals=canonicals,
        boilerplate=boilerplate,
        frequencies=sketch.frequencies,
        settings=settings,
        word_store=words,
        kept=sketch.sets,
    )
    if method == "lsh":
        # Signatures were spilled in store order; only members of oversize buckets are read back.
        signatures = SlotRows(
            np.memmap(sketch.signature_file, dtype=np.uint32, mode="r", shape=(n_reps, settings.num_perm))
            if n_reps
            else np.zeros((0, settings.num_perm), np.uint32),
            rep_slots,
        )
        left, right, oversize = lsh_candidate_pairs(
            signatures, bands, rows, settings.bucket_limit, keys=sketch.keys
        )
        del signatures
        needed = sorted_distinct(np.concatenate([left, right, exact_reps]))
        compared = compared_of(needed, in_place=True)
    else:
        compared = compared_of(np.arange(n_reps))
        cosine_extra = settings.threshold if settings.measure == "cosine" else None
        left, right = exhaustive_candidate_pairs(
            compared.shingles, compared.shingle_offsets, compared.model.rows, cosine_extra
        )
    progress.done(f"{left.shape[0]:,} pairs")
    watch.lap("candidates")

    recall = recall_statement(lsh_threshold, bands, rows)
    candidates_info = {
        "method": method,
        "reason": (
            f"{n_reps} distinct texts: every pair sharing a shingle is compared exactly (no pair is missed)"
            if method == "exhaustive"
            else f"{n_reps} distinct texts: MinHash LSH with {bands} bands x {rows} rows"
        ),
        "lsh_threshold": lsh_threshold,
        "bands": bands,
        "rows": rows,
        "expected_recall": recall,
        "candidate_pairs": int(left.shape[0]),
        "oversize_buckets": len(oversize),
    }
    if method == "exhaustive":
        candidates_info["expected_recall"]["note"] = (
            "exhaustive comparison: recall is 1.0; the probabilities are what LSH would give at this size"
        )

    # -- verify -----------------------------------------------------------------------
    progress.start("verifying", int(left.shape[0]))
    # Most candidates fall well short of the threshold: those are ruled out first, by a
    # merge that stops as soon as they cannot reach it; the rest are scored in full.
    reach = may_reach(
        compared.shingles,
        compared.shingle_offsets,
        compared.of(left),
        compared.of(right),
        settings.measure,
        settings.threshold,
    )
    n_candidates = int(left.shape[0])
    left, right = left[reach], right[reach]
    scores = score_pairs(
        compared.shingles,
        compared.shingle_offsets,
        compared.model.rows,
        compared.of(left),
        compared.of(right),
    )
    scores = dataclasses.replace(scores, left=left, right=right)
    decided = deciding_score(scores, settings.measure) if len(scores) else np.zeros(0)
    confirmed = scores.select(decided >= settings.threshold)
    confirmed_decided = decided[decided >= settings.threshold]
    progress.done(f"{len(confirmed):,} confirmed")
    watch.lap("verify")

    # -- cluster ----------------------------------------------------------------------
    rep_ids = [ids[i] for i in rep_docs.tolist()]
    edge_left = [rep_docs[confirmed.left], np.zeros(0, np.int64)]
    edge_right = [rep_docs[confirmed.right], np.zeros(0, np.int64)]
    edge_score: dict[tuple[int, int], float] = {}
    for a, b, s in zip(edge_left[0].tolist(), edge_right[0].tolist(), confirmed_decided.tolist()):
        edge_score[(min(a, b), max(a, b))] = float(s)
    exact_left, exact_right = [], []
    for group in groups:
        for member in group[1:]:
            exact_left.append(group[0])
            exact_right.append(member)
            edge_score[(group[0], member)] = 1.0
    all_left = np.concatenate([edge_left[0], np.asarray(exact_left, np.int64)])
    all_right = np.concatenate([edge_right[0], np.asarray(exact_right, np.int64)])

    def score_against(members: np.ndarray, keepers: np.ndarray) -> PairScores:
        return score_pairs(
            compared.shingles,
            compared.shingle_offsets,
            compared.model.rows,
            compared.of(doc_to_rep[members]),
            compared.of(doc_to_rep[keepers]),
        )

    cluster_inputs = ClusterInputs(
        ids=ids,
        lengths=[rec["characters"] for rec in kept],
        sizes=[rec["bytes"] for rec in kept],
        dates=[rec.get("date") for rec in kept],
        representative=representative,
    )
    clusters, roles = build_clusters(cluster_inputs, all_left, all_right, edge_score, score_against, settings)
    watch.lap("cluster")

    # -- records ----------------------------------------------------------------------
    pairs = [
        _pair_record(rep_ids, confirmed, i, "near", float(confirmed_decided[i]))
        for i in range(len(confirmed))
    ]
    for a, b in zip(exact_left, exact_right):
        pairs.append(
            {
                "left": ids[a],
                "right": ids[b],
                "kind": "exact",
                "deciding_score": 1.0,
                "jaccard": 1.0,
                "containment_left_in_right": 1.0,
                "containment_right_in_left": 1.0,
                "cosine": 1.0,
                "shared_shingles": int(np.diff(compared.shingle_offsets)[compared.of(doc_to_rep[a])]),
            }
        )
    pairs.sort(key=lambda p: (-p["deciding_score"], p["left"], p["right"]))

    exact_records = [
        {"content_hash": hashes[g[0]], "size": len(g), "members": [ids[m] for m in g]} for g in groups
    ]
    kept_index = {rec["id"]: i for i, rec in enumerate(kept)}
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

    warnings = []
    for bucket in oversize:
        members = [rep_ids[m] for m in bucket["members"][:5].tolist()]
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
    if tfidf_info["expected_colliding_share"] > COLLISION_WARNING_SHARE:
        warnings.append(
            {
                "kind": "tfidf-collisions",
                "message": (
                    f"{tfidf_info['expected_colliding_share']:.1%} of the {tfidf_info['vocabulary_size']:,} terms are "
                    f"expected to share a TF-IDF column; raise --tfidf-features above {settings.tfidf_features:,}"
                ),
            }
        )

    boilerplate_info = {
        "enabled": settings.boilerplate,
        "limit_texts": boilerplate.limit if boilerplate is not None else None,
        "lines": len(boilerplate) if boilerplate is not None else 0,
        "texts_affected": sketch.texts_affected,
        "texts_compared_whole": sketch.texts_compared_whole,
        "top": boilerplate.top(100) if boilerplate is not None else [],
    }
    ledger_counts = summarize(ledger)
    in_clusters = sum(c["size"] for c in clusters)
    summary = {
        "inputs": ledger_counts,
        "documents": len(documents),
        "documents_with_text": len(kept),
        "distinct_texts": n_reps,
        "exact_groups": len(groups),
        "documents_in_exact_groups": sum(len(g) for g in groups),
        "candidate_pairs": n_candidates,
        "confirmed_pairs": len(pairs),
        "near_pairs": len(confirmed),
        "clusters": len(clusters),
        "documents_in_clusters": in_clusters,
        "linked_through": sum(1 for r in roles.values() if r["role"] == "linked-through"),
        "retire_documents": sum(1 for a in actions if a["action"] == "retire"),
        "retire_bytes": sum(c["retire_bytes"] for c in clusters),
        "review_documents": sum(1 for a in actions if a["action"] == "review"),
    }
    audit_id = _audit_id(settings, documents)
    # Original texts travel on only for clustered documents: the report's evidence needs them.
    clustered = {m["document_id"] for c in clusters for m in c["members"]}
    texts = {
        rec["id"]: originals.get(slot).decode("utf-8", "surrogatepass")
        for rec, slot in zip(documents, read.original_slot)
        if rec["id"] in clustered
    }
    watch.lap("records")
    run = {
        "stages_seconds": watch.stages,
        "total_seconds": round(sum(watch.stages.values()), 4),
        "peak_rss_mb": _peak_rss_mb(),
        "peak_rss_mb_by_stage": watch.peaks,
        "started": time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime()),
    }
    return AuditResult(
        settings=settings,
        inputs=list(paths),
        ledger=ledger,
        documents=documents,
        exact_groups=exact_records,
        pairs=pairs,
        clusters=clusters,
        actions=actions,
        candidates=candidates_info,
        tfidf=tfidf_info,
        boilerplate=boilerplate_info,
        warnings=warnings,
        summary=summary,
        audit_id=audit_id,
        run=run,
        texts=texts,
    )


def _read_ignore_text(path: str | None) -> list[str]:
    """Lines of the user's known shared text, normalized; an unreadable file is an input error."""
    if not path:
        return []
    try:
        with open(path, "rb") as handle:
            data = handle.read()
    except OSError as err:
        raise InputError(f"cannot read the ignore-text file {path}: {err.strerror}") from None
    text, _, problem = decode_text(data)
    if text is None:
        raise InputError(f"cannot read the ignore-text file {path}: {problem}")
    return canonical_lines(text)


def _action(doc_id: str, action: str, favour: str | None, cluster: str | None, reason: str) -> dict:
    return {
        "document_id": doc_id,
        "action": action,
        "in_favour_of": favour,
        "cluster_id": cluster,
        "reason": reason,
    }


def _audit_id(settings: AuditSettings, documents: list[dict]) -> str:
    digest = hashlib.blake2b(digest_size=8)
    digest.update(json.dumps(settings.to_dict(), sort_keys=True).encode())
    for rec in documents:
        digest.update(f"{rec['id']}\0{rec['content_hash']}\n".encode())
    return digest.hexdigest()
