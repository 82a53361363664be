"""Passages of each submission with its candidate sources, each counted or excluded with a reason.

Every candidate pair is aligned twice (`dedup.align.align_pairs`, passages of at least
``short_words`` words):

* with the left-out words of each submission (`dedup.check.masks`) made unmatchable, so a
  passage there is made of counted text only and a quotation, template or reference list
  can neither seed a passage nor stretch one into the words around it;
* on the texts as they are, for the passages lying in left-out text, which are listed as
  excluded (a passage overlapping one of the first run is not listed again).

Each passage is then read from the submission's side, word by word: a word is free when
it is counted and, for a passage shared with another submission, not inside a passage
that both submissions share with one reference. A passage of the first run with at least
``min_words`` free words on both sides is counted; any other is excluded, for the reason
that covers most of its words: ``quoted``, ``reference list``, ``template``, ``same
source`` (both students drew on one reference), else ``short``. A passage shared by two
submissions is read once from each side, so it gives a row for each.

Cost: two alignments per pair, plus O(passages × words of a passage) in numpy.
"""

from __future__ import annotations

from collections import defaultdict
from dataclasses import dataclass

import numpy as np

from ..align import Alignment, AlignSettings, WordSpans, align_pairs
from .masks import REASON_CODES
from .regions import Region

__all__ = ["Passage", "align_candidates", "directed_passages", "EXCLUDED_ORDER"]

# Reasons a passage is excluded, in the order a tie is settled by.
EXCLUDED_ORDER = ("quoted", "reference list", "template", "same source", "short")


@dataclass(frozen=True)
class Passage:
    """One passage read from a submission's side.

    ``submission`` and ``source`` are text indices; spans are characters of the texts as read,
    0-based, end exclusive; ``words``/``source_words`` count words on each side.
    """

    submission: int
    source: int
    submission_start: int
    submission_end: int
    source_start: int
    source_end: int
    words: int
    source_words: int
    similarity: float
    moved: bool
    status: str
    reason: str
    cited: bool
    via: tuple[int, ...]
    word_start: int
    word_end: int


def masked_words(words: WordSpans, codes: np.ndarray) -> WordSpans:
    """``words`` with every left-out word (code not 0) given a hash of its own, which matches nothing."""
    hashes = words.hashes.copy()
    left_out = np.flatnonzero(codes)
    hashes[left_out] = np.uint64(0xA5A5_0000_0000_0000) ^ left_out.astype(np.uint64)
    return WordSpans(hashes, words.starts, words.ends, words.offsets)


def align_candidates(
    words: WordSpans, codes: np.ndarray, left: np.ndarray, right: np.ndarray, short_words: int, workers: int
) -> tuple[Alignment, Alignment]:
    """Passages of at least ``short_words`` words of each pair (left[p], right[p]): in the counted
    text only, and in the texts as they are."""
    settings = AlignSettings(min_words=short_words)
    counted = align_pairs(masked_words(words, codes), left, right, settings, workers=max(1, workers))
    whole = align_pairs(words, left, right, settings, workers=max(1, workers))
    return counted, whole


def _coverage(runs: tuple[Alignment, ...], left: np.ndarray, right: np.ndarray, is_sub: np.ndarray) -> dict:
    # (submission, reference) -> word ranges of the submission's passages with that reference.
    cover: dict[tuple[int, int], list[tuple[int, int]]] = defaultdict(list)
    for found in runs:
        for row in range(found.pair.shape[0]):
            p = int(found.pair[row])
            if not is_sub[right[p]]:
                cover[(int(left[p]), int(right[p]))].append(
                    (int(found.left_word_start[row]), int(found.left_word_end[row]))
                )
    return cover


def _covered(n: int, ranges: list[tuple[int, int]]) -> np.ndarray:
    mask = np.zeros(n, dtype=np.bool_)
    for a, b in ranges:
        mask[a:b] = True
    return mask


def _reason(codes: np.ndarray, covered: np.ndarray) -> str:
    counts = {name: int(np.count_nonzero(codes == code)) for name, code in REASON_CODES.items()}
    counts["same source"] = int(np.count_nonzero(covered & (codes == 0)))
    best = max(EXCLUDED_ORDER[:-1], key=lambda name: (counts[name], -EXCLUDED_ORDER.index(name)))
    return best if counts[best] > 0 else "short"


def _cited(regions: list[Region], start: int, end: int) -> bool:
    return any(r.cited and r.reason == "quoted" and r.start < end and start < r.end for r in regions)


@dataclass(frozen=True)
class _Side:
    text: int
    start: int
    end: int
    word_start: int
    word_end: int


def _sides(found: Alignment, row: int, left: int, right: int) -> tuple[_Side, _Side]:
    a = _Side(
        left,
        int(found.left_start[row]),
        int(found.left_end[row]),
        int(found.left_word_start[row]),
        int(found.left_word_end[row]),
    )
    b = _Side(
        right,
        int(found.right_start[row]),
        int(found.right_end[row]),
        int(found.right_word_start[row]),
        int(found.right_word_end[row]),
    )
    return a, b


class _Reader:
    """Reads passages from one side, with what it needs: codes, regions, reference coverage."""

    def __init__(self, words: WordSpans, codes: np.ndarray, regions: list, cover: dict, min_words: int):
        self.words, self.codes, self.regions, self.cover, self.min_words = (
            words,
            codes,
            regions,
            cover,
            min_words,
        )
        self.refs_of: dict[int, set[int]] = defaultdict(set)
        for sub, ref in cover:
            self.refs_of[sub].add(ref)

    def _codes(self, side: _Side) -> np.ndarray:
        base = int(self.words.offsets[side.text])
        return self.codes[base + side.word_start : base + side.word_end]

    def _source_cover(self, side: _Side, common: list[int]) -> tuple[np.ndarray, tuple[int, ...]]:
        # Words of the side's range inside its passages with the common references, and which.
        n = side.word_end - side.word_start
        mask = np.zeros(n, dtype=np.bool_)
        via = []
        for ref in common:
            ranges = [
                (max(a, side.word_start) - side.word_start, min(b, side.word_end) - side.word_start)
                for a, b in self.cover[(side.text, ref)]
                if a < side.word_end and side.word_start < b
            ]
            if ranges:
                mask |= _covered(n, ranges)
                via.append(ref)
        return mask, tuple(via)

    def read(
        self, me: _Side, them: _Side, similarity: float, moved: bool, peer: bool, whole: bool
    ) -> Passage:
        """The passage as read from ``me`` (a submission) against ``them`` (its source); a passage of
        the run on whole texts (``whole``) is never counted."""
        codes = self._codes(me)
        common = sorted(self.refs_of[me.text] & self.refs_of[them.text]) if peer else []
        mine, via = self._source_cover(me, common)
        theirs, _ = self._source_cover(them, common)
        free = int(np.count_nonzero((codes == 0) & ~mine))
        their_free = int(np.count_nonzero(~theirs & (self._codes(them) == 0)))
        counted = not whole and free >= self.min_words and their_free >= self.min_words
        reason = ""
        if not counted:
            # Their side drawn from a common reference: the whole passage is that reference's.
            drawn = peer and theirs.any() and their_free < self.min_words
            reason = _reason(codes, np.ones_like(mine) if drawn else mine)
        return Passage(
            me.text, them.text, me.start, me.end, them.start, them.end,
            me.word_end - me.word_start, them.word_end - them.word_start, similarity, moved,
            "counted" if counted else "excluded", reason,
            reason == "quoted" and _cited(self.regions[me.text], me.start, me.end),
            via if reason == "same source" else (), me.word_start, me.word_end,
        )  # fmt: skip


def _overlaps(seen: dict, key: tuple[int, int], start: int, end: int) -> bool:
    return any(a < end and start < b for a, b in seen.get(key, ()))


def directed_passages(
    runs: tuple[Alignment, Alignment],
    left: np.ndarray,
    right: np.ndarray,
    is_sub: np.ndarray,
    words: WordSpans,
    codes: np.ndarray,
    regions: list[list[Region]],
    min_words: int,
) -> list[Passage]:
    """Every passage of the two runs of `align_candidates` read from each submission's side.

    ``codes`` holds the reason code of every word of ``words`` (0 for references);
    ``regions`` the left-out regions of each submission (by text index). A passage of the
    whole-text run overlapping, on the submission's side, a passage of the same pair from the
    counted-text run is not listed again.
    """
    reader = _Reader(words, codes, regions, _coverage(runs, left, right, is_sub), min_words)
    out: list[Passage] = []
    seen: dict[tuple[int, int], list[tuple[int, int]]] = defaultdict(list)
    for whole, found in enumerate(runs):
        for row in range(found.pair.shape[0]):
            p = int(found.pair[row])
            a, b = _sides(found, row, int(left[p]), int(right[p]))
            similarity, moved = float(found.similarity[row]), bool(found.moved[row])
            peer = bool(is_sub[b.text])
            for me, them in ((a, b), (b, a)) if peer else ((a, b),):
                key = (me.text, them.text)
                if whole and _overlaps(seen, key, me.word_start, me.word_end):
                    continue
                if not whole:
                    seen[key].append((me.word_start, me.word_end))
                out.append(reader.read(me, them, similarity, moved, peer, bool(whole)))
    return out
