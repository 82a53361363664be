"""The class check from inputs to `CheckResult`: `check()`.

Steps, each a function of its own module:

1. read the submissions and templates whole, the references as a stream (`inputs`);
2. words of the submissions, and why each is left out or counted (`masks`, `regions`);
3. the submissions' shingles indexed (`candidates.SubmissionIndex`); each batch of
   references looked up in it; candidate (submission, reference) and (submission,
   submission) pairs from the shared seeding shingles (`candidates`);
4. the candidate pairs aligned and every passage read as counted or excluded (`passages`);
5. containment of each pair, shares, sources ranked, groups (`records`, `groups`).

References are compared with submissions only, never with each other. Only the texts of
references that can be candidates are kept.
"""

from __future__ import annotations

import itertools
from collections.abc import Iterable, Iterator
from dataclasses import dataclass

import numpy as np

from ..align import word_spans
from ..ingest import InputError, LedgerEntry
from ..progress import Progress
from .candidates import HitLog, SubmissionIndex, common_limit, peer_candidates, source_candidates
from .inputs import Input, index_texts, read_texts
from .masks import reason_codes, template_regions
from .passages import align_candidates, directed_passages
from .result import CheckResult
from .settings import CheckSettings
from .shingles import shingle_sets

__all__ = ["check", "REFERENCE_BATCH_CHARS"]

# Characters of references looked up at a time: large enough for the compiled steps to run
# at speed, small enough that a batch's words and shingles stay a few hundred MB at most.
REFERENCE_BATCH_CHARS = 16_000_000


@dataclass
class _Class:
    """The submissions as the steps need them."""

    ids: list[str]
    texts: list[str]
    codes: np.ndarray
    regions: list
    counted: tuple[np.ndarray, np.ndarray]
    index: SubmissionIndex


def _prepare_class(subs: list[tuple[str, str]], templates: list[str], s: CheckSettings) -> _Class:
    texts = [t for _, t in subs]
    words = word_spans(texts)
    extra = template_regions(texts, templates, s.template_min_words)
    codes, regions = reason_codes(
        texts, words, extra, quotes=s.exclude_quotes, reference_list=s.exclude_reference_lists
    )
    full = shingle_sets(words.hashes, words.offsets, s.shingle_size)
    counted = shingle_sets(words.hashes, words.offsets, s.shingle_size, keep=codes == 0)
    barred = np.zeros(0, np.uint64)
    if templates:
        t_words = word_spans(templates)
        barred = np.unique(shingle_sets(t_words.hashes, t_words.offsets, s.shingle_size)[0])
    return _Class([i for i, _ in subs], texts, codes, regions, counted, SubmissionIndex.build(*full, barred))


def _batches(items: Iterator[tuple[str, str]], chars: int) -> Iterator[list[tuple[str, str]]]:
    batch: list[tuple[str, str]] = []
    size = 0
    for item in items:
        batch.append(item)
        size += len(item[1])
        if size >= chars:
            yield batch
            batch, size = [], 0
    if batch:
        yield batch


def _scan(
    references: Iterator[tuple[str, str]], index: SubmissionIndex, s: CheckSettings, progress: Progress
) -> tuple[HitLog, dict[int, tuple[str, str]]]:
    """Look every reference up; keep the texts of those with enough hits to be a candidate."""
    hits = HitLog.empty()
    kept: dict[int, tuple[str, str]] = {}
    progress.start("references")
    for batch in _batches(references, REFERENCE_BATCH_CHARS):
        words = word_spans([t for _, t in batch])
        first = hits.count
        per_ref = hits.add(index, words.hashes, words.offsets, s.shingle_size)
        for j in np.flatnonzero(per_ref >= s.seed_shingles).tolist():
            kept[first + j] = batch[j]
        progress.advance(len(batch))
    progress.done(f"{hits.count:,} references")
    return hits, kept


def check(
    submissions: Iterable[Input],
    against: Iterable[Input] = (),
    settings: CheckSettings | None = None,
    *,
    workers: int = 1,
    progress: Progress | None = None,
    against_index: str | None = None,
) -> CheckResult:
    """Compare a class of submissions with reference material and with each other.

    Parameters
    ----------
    submissions : iterable of path or (id, text), or a table
        The students' texts: files, folders, archives, records files, or pairs in memory;
        or a pandas DataFrame / pyarrow Table with ``id`` and ``text`` columns.
    against : iterable of path or (id, text), or a table
        Reference material; read as a stream (only candidate references are kept).
    against_index : str, optional
        An index file (`dedup.Index`) whose texts are references too, in their stored
        (normalized) form: source offsets of their passages point into that form.
    settings : CheckSettings, optional
        Validated here; ``settings.templates`` names the template files.
    workers : int
        Threads aligning pairs (results do not depend on it).
    progress : Progress, optional
        Receives the progress of the reference scan.

    Returns
    -------
    CheckResult

    Raises
    ------
    dedup.SettingsError
        A setting is invalid.
    dedup.InputError
        A path does not exist, or no submission holds a word.
    dedup.index.IndexFileError
        ``against_index`` is not a usable index.

    Notes
    -----
    Cost: O(reference text) compiled for the scan, plus one alignment per candidate pair
    (a few ms for two 2,000-word texts).
    """
    s = (settings or CheckSettings()).validate()
    progress = progress or Progress.silent()
    ledger: list[tuple[str, LedgerEntry]] = []
    subs = list(read_texts(submissions, s, "submission", ledger))
    if not subs:
        raise InputError("no submission with any words was read (see the ledger for what was found)")
    templates = [t for _, t in read_texts(s.templates, s, "template", ledger)]
    klass = _prepare_class(subs, templates, s)
    references = read_texts(against, s, "reference", ledger)
    if against_index is not None:
        references = itertools.chain(references, index_texts(against_index, "reference", ledger))
    hits, kept = _scan(references, klass.index, s, progress)
    seeds = s.seed_shingles
    ref_pairs = source_candidates(
        klass.index, hits, seed_shingles=seeds, limit=common_limit(s.common_share, s.common_min, hits.count)
    )
    peers = peer_candidates(
        klass.index,
        len(subs),
        seed_shingles=seeds,
        limit=common_limit(s.common_share, s.common_min, len(subs)),
    )
    return _compare(klass, kept, ref_pairs, peers, s, ledger, workers, hits.count)


def _compare(
    klass: _Class, kept: dict, ref_pairs, peers, s: CheckSettings, ledger, workers, n_refs
) -> CheckResult:
    """Align the candidate pairs, read their passages and gather the records."""
    n = len(klass.texts)
    chosen = sorted(set(ref_pairs[1].tolist()))
    local = {g: n + i for i, g in enumerate(chosen)}
    ids = klass.ids + [kept[g][0] for g in chosen]
    texts = klass.texts + [kept[g][1] for g in chosen]
    is_sub = np.arange(len(texts)) < n
    words = word_spans(texts)
    codes = np.zeros(words.hashes.shape[0], dtype=np.uint8)
    codes[: klass.codes.shape[0]] = klass.codes
    left = np.r_[ref_pairs[0], peers[0]].astype(np.int64)
    right = np.r_[np.array([local[g] for g in ref_pairs[1].tolist()], dtype=np.int64), peers[1]].astype(
        np.int64
    )
    runs = align_candidates(words, codes, left, right, s.short_words, workers)
    regions = klass.regions + [[] for _ in chosen]
    passages = directed_passages(runs, left, right, is_sub, words, codes, regions, s.min_words)
    full = shingle_sets(words.hashes, words.offsets, s.shingle_size)
    return CheckResult.assemble(
        settings=s,
        ids=ids,
        texts=texts,
        is_sub=is_sub,
        words=words,
        codes=codes,
        regions=regions,
        passages=passages,
        counted=klass.counted,
        full=full,
        ledger=ledger,
        stats={
            "references": n_refs,
            "candidate_pairs": int(left.shape[0]),
            "references_compared": len(chosen),
        },
    )
