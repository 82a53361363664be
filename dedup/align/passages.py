"""Shared passages of pairs of texts, in characters of the original texts.

For each pair of texts (left, right) the passages are the stretches of text both hold,
found on normalized words (see `dedup.align.words`) and reported as character spans of
the original texts, so a reader can be shown them. The method (`dedup.align.kernels`):
shared k-word shingles seed; the longest chain of seeds in the same order in both texts
is the main alignment, so a phrase repeated in both is paired occurrence by occurrence
and stray matches elsewhere do not pull a passage apart; seeds of the chain closer than
a gap limit merge into one passage, so a changed, added or dropped word does not split
it; matches left off the main chain that form passages of their own are reported as
moved; every reported passage is long enough, and no two overlap in either text.

Everything runs compiled, pair after pair, with no Python per word; the result is
columns of numpy arrays, one row per passage, with the pair of each row.
"""

from __future__ import annotations

from collections.abc import Sequence
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass

import numpy as np

from . import kernels
from .words import WordSpans, word_spans

__all__ = ["AlignSettings", "Alignment", "align_pairs", "align_texts"]


@dataclass(frozen=True)
class AlignSettings:
    """How passages are found.

    The defaults were chosen on `benchmarks.passage_quality` (planted passages of real
    man pages, character-level plagdet of Potthast et al., COLING 2010), 100 cases per
    level, seed 7: plagdet 0.998 / 0.997 / 0.909 for no / light / heavy editing. The
    figures quoted below for other values are from the same command with one setting
    changed (``--seed-words 4`` and so on).

    Attributes
    ----------
    seed_words : int
        Words per seed shingle, k. Three: where one word in five is edited, a run of k
        words survives with probability about 0.8^k (0.51 for three, 0.33 for five), so
        short seeds still fall every few words; chance matches of three common words
        ("of the file") are what the chain, the gap limit and the length and similarity
        filters remove. Heavy plagdet: 0.909 at three, 0.792 at four, 0.633 at five;
        no loss on unedited text.
    max_gap : int
        Most words, in each text, between two seeds that still join one passage: a
        sentence or two, so a changed, added or swapped sentence does not split a
        passage, while passages a paragraph apart stay apart. Heavy plagdet 0.834 at
        24, 0.909 at 32, 0.929 at 40 (by fewer splits, granularity 1.23 / 1.10 / 1.07).
    max_swap : int
        Two passages next to each other in both texts but in swapped order merge when
        the shorter has at most this many words (two long sentences swapped); a longer
        block out of order stays a passage of its own, flagged moved. Heavy plagdet
        0.840 with 0 (no swap merges).
    min_words : int
        Fewest words, in each text, of a reported passage (main or moved).
    min_similarity : float
        Least `Alignment.similarity` of a reported passage; below it a passage is chance
        seeds strung together by the gap limit.
    max_repeat : int
        A shingle found more often than this in either text seeds nothing: it would add
        up to ``max_repeat`` squared anchors and says little about where a passage is;
        the gap limit bridges the words it would have covered.
    max_rounds : int
        Rounds of chaining: the first finds the main alignment, each later one the
        moved passages of one more chain of what is left.

    Texts with fewer than ``seed_words`` words have no seed, hence no passage.
    """

    seed_words: int = 3
    max_gap: int = 32
    max_swap: int = 64
    min_words: int = 15
    min_similarity: float = 0.35
    max_repeat: int = 16
    max_rounds: int = 16

    def __post_init__(self) -> None:
        if self.seed_words < 1:
            raise ValueError(f"seed_words must be at least 1, got {self.seed_words}")
        if min(self.max_gap, self.max_swap) < 0 or min(self.min_words, self.max_repeat, self.max_rounds) < 1:
            raise ValueError(
                "max_gap, max_swap must be at least 0; min_words, max_repeat, max_rounds at least 1"
            )
        if not 0.0 <= self.min_similarity <= 1.0:
            raise ValueError(f"min_similarity must be within [0, 1], got {self.min_similarity}")


@dataclass(frozen=True)
class Alignment:
    """Passages of a batch of pairs: one row per passage, rows grouped by pair and, within
    a pair, in the order of the left text.

    Attributes
    ----------
    pair : ndarray of int64
        Index of the pair (position in ``left``/``right`` of `align_pairs`) of each row.
    left_start, left_end, right_start, right_end : ndarray of int64
        Character span ``[start, end)`` of the passage in each original text: from the
        first character of its first word to the last character of its last word.
    left_word_start, left_word_end, right_word_start, right_word_end : ndarray of int64
        The same passage as a range of word indices (rows of `WordSpans.of`).
    left_words, right_words : ndarray of int64
        Words of the passage in each text (``word_end - word_start``); they differ when
        words were added or dropped.
    similarity : ndarray of float64
        ``(left_matched + right_matched) / (left_words + right_words)``, where a word is
        matched when it lies in a seed shingle of the passage's chain or in its run of
        equal words at either end: 1.0 for a verbatim copy, lower the more was edited.
    moved : ndarray of bool
        True for a passage off the main chain: it stands elsewhere in the other text.
    pair_offsets : ndarray of int64
        ``n_pairs + 1`` entries: the rows of pair p are ``pair_offsets[p]:pair_offsets[p + 1]``.
    left_share, right_share : ndarray of float64
        Per pair: the share of each text's words inside its passages (0.0 for a text with
        no words). Passages never overlap, so this is the sum of their words over the
        text's words.
    """

    pair: np.ndarray
    left_start: np.ndarray
    left_end: np.ndarray
    right_start: np.ndarray
    right_end: np.ndarray
    left_word_start: np.ndarray
    left_word_end: np.ndarray
    right_word_start: np.ndarray
    right_word_end: np.ndarray
    left_words: np.ndarray
    right_words: np.ndarray
    similarity: np.ndarray
    moved: np.ndarray
    pair_offsets: np.ndarray
    left_share: np.ndarray
    right_share: np.ndarray

    @property
    def n_pairs(self) -> int:
        return int(self.pair_offsets.shape[0] - 1)

    def rows_of(self, p: int) -> slice:
        """The rows of pair ``p``, a slice for every column."""
        return slice(int(self.pair_offsets[p]), int(self.pair_offsets[p + 1]))

    def passages_of(self, p: int) -> list[tuple[int, int, int, int, bool]]:
        """``(left_start, left_end, right_start, right_end, moved)`` of pair ``p``, in Python ints."""
        s = self.rows_of(p)
        columns = (
            self.left_start[s],
            self.left_end[s],
            self.right_start[s],
            self.right_end[s],
            self.moved[s],
        )
        return [tuple(row) for row in zip(*(c.tolist() for c in columns))]


def _run(words: WordSpans, left: np.ndarray, right: np.ndarray, s: AlignSettings):
    return kernels.align_batch(
        words.hashes, words.offsets, left, right, s.seed_words, s.max_gap, s.max_swap, s.min_words,
        float(s.min_similarity), s.max_repeat, s.max_rounds,
    )  # fmt: skip


def _run_chunks(words, left, right, settings, workers):
    # The kernel releases the GIL: chunks of pairs run in threads, results in pair order.
    if workers <= 1 or left.shape[0] < 2 * workers:
        return _run(words, left, right, settings)
    bounds = np.linspace(0, left.shape[0], workers + 1).astype(np.int64)
    with ThreadPoolExecutor(workers) as pool:
        parts = list(
            pool.map(
                lambda ab: _run(words, left[ab[0] : ab[1]], right[ab[0] : ab[1]], settings),
                zip(bounds[:-1], bounds[1:]),
            )
        )
    rows = np.concatenate([r for r, _ in parts])
    pair = np.concatenate([p + a for (_, p), a in zip(parts, bounds[:-1])])
    return rows, pair


def align_pairs(
    words: WordSpans,
    left: Sequence[int] | np.ndarray,
    right: Sequence[int] | np.ndarray,
    settings: AlignSettings | None = None,
    *,
    workers: int = 1,
) -> Alignment:
    """Shared passages of the pairs of texts ``(left[p], right[p])`` of a batch.

    Parameters
    ----------
    words : WordSpans
        Words of the texts (`dedup.align.words.word_spans`).
    left, right : sequence of int
        Text indices of each pair, same length.
    settings : AlignSettings, optional
        Defaults: ``AlignSettings()``.
    workers : int
        Threads, each aligning a contiguous share of the pairs (the result is the same
        for any number).

    Returns
    -------
    Alignment
        One row per passage, pairs in order, with per-pair covered shares.

    Notes
    -----
    Cost per pair O(n + m + A log A) compiled, n and m words, A shared seeds
    (about the words of the shorter text when the two are related), typically a few
    milliseconds for two texts of 10,000 words; O(passages) numpy per batch.

    >>> w = word_spans(["Alpha beta gamma delta epsilon zeta.", "x alpha beta GAMMA delta epsilon zeta y"])
    >>> a = align_pairs(w, [0], [1], AlignSettings(min_words=4))
    >>> a.passages_of(0), a.left_share.tolist(), a.right_share.tolist()
    ([(0, 35, 2, 37, False)], [1.0], [0.75])
    """
    settings = settings or AlignSettings()
    left = np.ascontiguousarray(left, dtype=np.int64)
    right = np.ascontiguousarray(right, dtype=np.int64)
    if left.shape != right.shape or left.ndim != 1:
        raise ValueError("left and right must be 1-d sequences of the same length")
    if left.size and (min(left.min(), right.min()) < 0 or max(left.max(), right.max()) >= words.n_texts):
        raise ValueError("a text index is outside the batch")
    rows, pair = _run_chunks(words, left, right, settings, workers)
    return _columns(words, left, right, rows, pair)


def _columns(words: WordSpans, left: np.ndarray, right: np.ndarray, rows: np.ndarray, pair: np.ndarray):
    # Word ranges to character spans, and the per-pair shares. Cost O(passages + pairs).
    n_pairs = left.shape[0]
    base_left = words.offsets[left[pair]]
    base_right = words.offsets[right[pair]]
    ls, le, rs, re_, lm, rm, moved = (rows[:, f] for f in range(kernels.FIELDS))
    left_words, right_words = le - ls, re_ - rs
    total = left_words + right_words
    similarity = (lm + rm) / np.maximum(total, 1)
    counts = np.bincount(pair, minlength=n_pairs)
    pair_offsets = np.zeros(n_pairs + 1, dtype=np.int64)
    np.cumsum(counts, out=pair_offsets[1:])
    n_left = np.diff(words.offsets)[left]
    n_right = np.diff(words.offsets)[right]
    covered_left = np.bincount(pair, weights=left_words, minlength=n_pairs)
    covered_right = np.bincount(pair, weights=right_words, minlength=n_pairs)
    return Alignment(
        pair=pair,
        left_start=words.starts[base_left + ls],
        left_end=words.ends[base_left + le - 1],
        right_start=words.starts[base_right + rs],
        right_end=words.ends[base_right + re_ - 1],
        left_word_start=ls,
        left_word_end=le,
        right_word_start=rs,
        right_word_end=re_,
        left_words=left_words,
        right_words=right_words,
        similarity=similarity.astype(np.float64),
        moved=moved.astype(np.bool_),
        pair_offsets=pair_offsets,
        left_share=np.divide(covered_left, n_left, out=np.zeros(n_pairs), where=n_left > 0),
        right_share=np.divide(covered_right, n_right, out=np.zeros(n_pairs), where=n_right > 0),
    )


def align_texts(left_text: str, right_text: str, settings: AlignSettings | None = None) -> Alignment:
    """`align_pairs` for one pair of original texts (the pair index of every row is 0).

    >>> a = align_texts("one two three four five six", "zero one two three four five", AlignSettings(min_words=3))
    >>> a.passages_of(0), a.left_words.tolist()
    ([(0, 23, 5, 28, False)], [5])
    """
    return align_pairs(word_spans([left_text, right_text]), [0], [1], settings)
