"""The local engine: runs the plan (`dedup.plan`) on one machine, in bounded memory.

1. **read** — documents streamed once: normalized a batch at a time (a thread runs the
   compiled pass while the next batch is read), records kept, original and distinct
   canonical texts appended to stores in the work folder, template lines counted.
   Without template lines to strip, the stored texts are the texts to shingle: they are
   sketched in a thread of their own as they are stored.
2. **exact** — documents grouped by content hash; each distinct text is one row.
3. **sketch** — otherwise the distinct texts are read back chunk by chunk and sketched.
4. **candidates** — band keys bucketed, then the shingle sets and TF-IDF rows of the
   compared texts built; or (exact search) those of every text built, then searched
   for the measure (`dedup.candidates.exact_candidate_pairs`).
5. **verify**, **cluster**, **records** — pairs ruled out early or scored in full; the
   confirmed pairs and exact groups grouped into clusters; the records assembled.

Indices: documents are numbered in id order among those with words ("kept"); distinct
texts by their first document (`DistinctTexts`); store slots and the compared sets'
local numbers stay inside this module.
"""

from __future__ import annotations

import functools
import resource
import time
from collections.abc import Sequence

import numpy as np

from ..align import NamedWords
from ..candidates import exact_candidate_pairs, lsh_candidate_pairs
from ..features.segment_sort import sorted_distinct
from ..features.shingles import from_word_hashes
from ..ingest import LedgerEntry, Records, documents_of
from ..normalize.batch import prepare_documents
from ..normalize.boilerplate import Boilerplate
from ..plan import Plan, reading_keywords
from ..progress import Progress
from ..report import records
from ..result import AuditResult
from ..verify import PairScores, deciding_score, may_reach, score_pairs
from ..verify.whole import whole_text_scores
from ..workdir import WorkFolder
from .compared import ComparedSets, SlotRows, compared_sets
from .driver import (
    DistinctTexts,
    Findings,
    Verified,
    align_step,
    assemble,
    candidates_block,
    cluster_step,
    mark_empty,
    pair_records,
    settle_step,
    tfidf_block,
    whole_text_threshold,
    with_whole_texts,
)
from .reading import ReadResult, read_pass
from .sketching import ChunkSketcher, SketchResult, sketch_pass, text_order
from .threads import kernels_thread_safe

__all__ = ["run_audit", "DistinctTexts"]

# Sketch the texts while they are read, when there are no template lines to strip first.
OVERLAP_SKETCH = True
# Up to this many bytes of distinct text, sketching while reading also makes the shingle
# sets and term counts of every text (about 3 bytes per byte of text), so the compared
# texts are only picked out of them; beyond, the compared texts are tokenized again.
KEEP_SETS_TEXT_BYTES = 64 * 2**20
# Up to this many bytes of distinct text, the sketch pass keeps the word hashes of every
# text (8 bytes a word, about 1.3 times the text): cheaper to read back than to tokenize
# again. Beyond, the work folder would more than double, and the compared texts are a
# small share, cheaper to tokenize again than to write all words for.
KEEP_WORDS_TEXT_BYTES = 64 * 2**20


class Stopwatch:
    """Seconds of each step, and the peak memory of the process when each step ended."""

    def __init__(self) -> None:
        self.stages: dict[str, float] = {}
        self.peaks: dict[str, float] = {}
        self._t = time.perf_counter()

    def split(self, first: str, first_seconds: float, rest: str) -> None:
        """End two interleaved steps: ``first`` took ``first_seconds`` of the time since the last lap."""
        now = time.perf_counter()
        total = now - self._t
        self.stages[first] = round(first_seconds, 4)
        self.stages[rest] = round(max(total - first_seconds, 0.0), 4)
        self.peaks[first] = self.peaks[rest] = peak_rss_mb()
        self._t = now

    def lap(self, stage: str) -> None:
        """End a step (a step run twice adds up)."""
        now = time.perf_counter()
        self.stages[stage] = round(self.stages.get(stage, 0.0) + now - self._t, 4)
        self.peaks[stage] = peak_rss_mb()
        self._t = now

    def run_block(self) -> dict:
        """What ``run.json`` records of this run."""
        return {
            "stages_seconds": self.stages,
            "total_seconds": round(sum(self.stages.values()), 4),
            "peak_rss_mb": peak_rss_mb(),
            "peak_rss_mb_by_stage": self.peaks,
            "started": time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime()),
        }


def peak_rss_mb() -> float:
    # ru_maxrss is in kilobytes on Linux.
    return round(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0, 1)


class _Run:
    """One audit on this machine: the plan's steps in order, sharing the work folder."""

    def __init__(self, plan: Plan, work: WorkFolder, progress: Progress, workers: int) -> None:
        self.plan, self.settings, self.work = plan, plan.settings, work
        self.progress, self.workers = progress, workers
        self.watch = Stopwatch()
        self.originals, self.canonicals = work.store("originals"), work.store("canonical")
        self.threaded = OVERLAP_SKETCH and kernels_thread_safe()

    def read(
        self, paths: Sequence[str] | Records, ledger: list[LedgerEntry]
    ) -> tuple[ReadResult, ChunkSketcher | None]:
        """The read step (with the sketch step overlapped when nothing is to be stripped)."""
        s = self.settings
        self.progress.start("reading")
        documents_in = documents_of(
            paths,
            ledger=ledger,
            workers=self.workers,
            prepare=functools.partial(prepare_documents, lines=s.boilerplate),
            **reading_keywords(s),
        )
        early = None
        if not s.boilerplate and self.threaded:
            early = ChunkSketcher(
                s,
                lsh=self.plan.lsh if self.plan.may_need_lsh() else None,
                signature_path=self.work.file("signatures.u32"),
                sets_text_limit=KEEP_SETS_TEXT_BYTES,
            )
        try:
            read = read_pass(
                documents_in,
                s,
                self.originals,
                self.canonicals,
                self.progress,
                sketcher=early,
                threaded=self.threaded,
            )
        finally:
            if early is not None:
                early.close()
        self.progress.done(f"{len(read.documents):,} documents")
        self.watch.split("ingest", read.read_seconds, "normalize")
        return read, early

    def sketch(
        self, texts: DistinctTexts, early, boilerplate, method: str, whole: bool = False
    ) -> SketchResult:
        """The sketch step over the distinct texts (or the end of the one overlapped);
        ``whole``: the second pass, over the whole texts (files of its own)."""
        tag = "-whole" if whole else ""
        self.progress.start("shingling whole texts" if whole else "shingling", texts.n)
        if early is not None:
            # Sketched during the read pass, in store order; the slots are the texts' own.
            sketch = early.finish(text_order(texts.slots))
            self.progress.advance(texts.n)
        else:
            keep_words = from_word_hashes(self.settings) and self.canonicals.size <= KEEP_WORDS_TEXT_BYTES
            words = self.work.store(f"words{tag}") if keep_words else None
            sketch = sketch_pass(
                texts.slots,
                self.canonicals,
                boilerplate,
                self.settings,
                lsh=self.plan.lsh if method == "lsh" else None,
                signature_path=self.work.file(f"signatures{tag}.u32"),
                progress=self.progress,
                word_store=words,
            )
            sketch.words = words
        self.progress.done()
        self.watch.lap("features")
        return sketch

    def candidates(
        self, texts: DistinctTexts, sketch: SketchResult, boilerplate, method: str, also=None
    ) -> tuple[np.ndarray, np.ndarray, list[dict], ComparedSets]:
        """The candidates step: candidate pairs of distinct texts, oversize buckets, and the
        sets of the texts compared (and of the texts ``also``, paired another way)."""
        settings, n = self.settings, texts.n
        exact_texts = np.asarray([texts.text_of_doc[g[0]] for g in texts.groups], dtype=np.int64)
        self.progress.start("candidates")
        compared_of = functools.partial(
            compared_sets,
            n_texts=n,
            slots=texts.slots,
            canonicals=self.canonicals,
            boilerplate=boilerplate,
            frequencies=sketch.frequencies,
            settings=settings,
            word_store=sketch.words,
            kept=sketch.sets,
        )
        oversize: list[dict] = []
        if method == "lsh":
            # Signatures were spilled in store order; only members of oversize buckets are read back.
            signatures = SlotRows(
                np.memmap(sketch.signature_file, dtype=np.uint32, mode="r", shape=(n, settings.num_perm))
                if n
                else np.zeros((0, settings.num_perm), np.uint32),
                texts.slots,
            )
            left, right, oversize = lsh_candidate_pairs(
                signatures, self.plan.bands, self.plan.rows, settings.bucket_limit, keys=sketch.keys
            )
            del signatures
            ends = [left, right, exact_texts] + ([] if also is None else [np.asarray(also, np.int64)])
            compared = compared_of(sorted_distinct(np.concatenate(ends)), in_place=True)
        else:
            # Every text is compared, numbered as it is (local numbers are text numbers).
            compared = compared_of(np.arange(n))
            left, right = exact_candidate_pairs(
                settings.measure,
                settings.threshold,
                compared.shingles,
                compared.shingle_offsets,
                compared.model.rows,
            )
        self.progress.done(f"{left.shape[0]:,} pairs")
        self.watch.lap("candidates")
        return left, right, oversize, compared

    def verify(
        self, left: np.ndarray, right: np.ndarray, compared: ComparedSets, threshold: float | None = None
    ) -> Verified:
        """The verify step: most candidates fall well short of the threshold (the
        settings', unless given); they are ruled out first, by a merge that stops as soon
        as they cannot reach it; the rest are scored in full."""
        settings = self.settings
        threshold = settings.threshold if threshold is None else threshold
        self.progress.start("verifying", int(left.shape[0]))
        reach = may_reach(
            compared.shingles,
            compared.shingle_offsets,
            compared.of(left),
            compared.of(right),
            settings.measure,
            threshold,
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
        scores = _with_ends(scores, left, right)
        decided = deciding_score(scores, settings.measure) if len(scores) else np.zeros(0)
        sure = decided >= threshold
        self.progress.done(f"{int(sure.sum()):,} confirmed")
        self.watch.lap("verify")
        return Verified(scores.select(sure), decided[sure], n_candidates)

    def cluster(self, texts: DistinctTexts, verified: Verified, compared: ComparedSets, ledger):
        """The cluster step (`driver.cluster_step`), members scored from the compared sets."""

        def score_against(members: np.ndarray, keepers: np.ndarray) -> PairScores:
            return score_pairs(
                compared.shingles,
                compared.shingle_offsets,
                compared.model.rows,
                compared.of(texts.text_of_doc[members]),
                compared.of(texts.text_of_doc[keepers]),
            )

        ledger_ids = [entry.document_id for entry in ledger]
        clustered = cluster_step(texts, verified, score_against, self.settings, ledger_ids)
        self.watch.lap("cluster")
        return clustered

    def whole_texts(self, texts: DistinctTexts, method: str) -> tuple[Verified, list[dict]]:
        """The sketch, candidates and verify steps again, over the whole texts (template
        lines kept), for `driver.with_whole_texts`; with their oversize buckets. Cost: the
        three steps once more."""
        sketch = self.sketch(texts, None, None, method, whole=True)
        left, right, oversize, compared = self.candidates(texts, sketch, None, method)
        return self.verify(left, right, compared, whole_text_threshold(self.settings)), oversize

    def align(
        self, pairs: list[dict], clusters: list[dict], originals: dict[str, str]
    ) -> tuple[list[dict], NamedWords]:
        """The align step (`driver.align_step`), in two threads where kernels may share them."""
        self.progress.start("aligning passages")
        passages, words = align_step(
            pairs, clusters, originals, self.settings, workers=2 if self.threaded else 1
        )
        self.progress.done(f"{len(passages):,} passages")
        self.watch.lap("align")
        return passages, words


def _with_ends(scores: PairScores, left: np.ndarray, right: np.ndarray) -> PairScores:
    import dataclasses

    return dataclasses.replace(scores, left=left, right=right)


def _clustered_texts(documents, original_slot, clusters, originals) -> dict[str, str]:
    """Original texts of clustered documents only: the report's evidence needs them."""
    clustered = {m["document_id"] for c in clusters for m in c["members"]}
    return {
        rec["id"]: originals.get(slot).decode("utf-8", "surrogatepass")
        for rec, slot in zip(documents, original_slot)
        if rec["id"] in clustered
    }


def run_audit(
    plan: Plan,
    paths: Sequence[str],
    *,
    known_boilerplate: list[str],
    work: WorkFolder,
    progress: Progress,
    workers: int = 1,
) -> AuditResult:
    """Run the plan's steps on this machine (see the module notes)."""
    settings = plan.settings
    run = _Run(plan, work, progress, workers)
    ledger: list[LedgerEntry] = []
    read, early = run.read(paths, ledger)
    texts = DistinctTexts.of(mark_empty(read.documents, read.wordless, ledger), read.canonical_slot)
    boilerplate: Boilerplate | None = None
    if read.counter is not None:
        boilerplate = read.counter.find(
            share=settings.boilerplate_share,
            min_texts=settings.boilerplate_min_texts,
            known=known_boilerplate,
        )
    method = plan.candidate_method(texts.n)
    sketch = run.sketch(texts, early, boilerplate, method)
    whole, more = None, []
    if sketch.texts_affected:  # template lines were left out of some texts: compare them whole too
        whole, more = run.whole_texts(texts, method)
    also = None if whole is None else np.concatenate([whole.confirmed.left, whole.confirmed.right])
    left, right, oversize, compared = run.candidates(texts, sketch, boilerplate, method, also)
    verified = run.verify(left, right, compared)
    if whole is not None:
        verified, oversize = with_whole_texts(verified, whole), oversize + more
    clusters, roles, exact_edges = run.cluster(texts, verified, compared, ledger)
    sizes = np.diff(compared.shingle_offsets)
    pairs = pair_records(texts, verified, exact_edges, lambda t: sizes[compared.of(t)])
    originals = _clustered_texts(read.documents, read.original_slot, clusters, run.originals)
    whole_text_scores(pairs, originals, boilerplate, settings)
    passages, words = run.align(pairs, clusters, originals)
    template_lines = boilerplate.counts if boilerplate is not None else None
    clusters, unique_runs = settle_step(
        clusters, roles, texts, originals, template_lines, settings, 2 if run.threaded else 1, words
    )
    run.watch.lap("settle")
    found = Findings(
        ledger=ledger,
        documents=read.documents,
        texts=texts,
        boilerplate=records.boilerplate_block(
            settings, boilerplate, sketch.texts_affected, sketch.texts_compared_whole
        ),
        tfidf=tfidf_block(sketch.frequencies, settings),
        candidates=candidates_block(plan, method, texts.n, verified.candidates, len(oversize)),
        oversize=oversize,
        verified=verified,
        clusters=clusters,
        roles=roles,
        pairs=pairs,
        passages=passages,
        unique_runs=unique_runs,
        original_texts=originals,
    )
    result = assemble(plan, paths, found)
    run.watch.lap("records")
    result.run = run.watch.run_block()
    return result
