"""Evidence for a pair: where in each original text the shared shingles lie.

The audit compares normalized words; a reviewer reads the original text. So the words
are found again in the original text with their character offsets (each word is
normalized on its own, NFKC + casefold, exactly as the whole text was), shingles are
formed over them, and every shingle the two documents share marks its words as
matched. Consecutive shared shingles that are also consecutive in the other text merge
into one passage, numbered alike in both texts, so a reader can follow passage 3 from
the left text to the right one even when the two texts order their passages differently. What is not matched is what one text has
and the other lacks.

Cost O(words of both texts) per pair, in Python: done only for the pairs a report shows.
"""

from __future__ import annotations

import re
import unicodedata
from dataclasses import dataclass
from functools import lru_cache

__all__ = ["Passage", "PairEvidence", "words_with_offsets", "pair_evidence"]

_WORD = re.compile(r"[^\W_]+")


@dataclass(frozen=True)
class Passage:
    """A run of matched text: characters ``[start, end)`` of the original, and its number."""

    start: int
    end: int
    number: int


@dataclass(frozen=True)
class PairEvidence:
    """Matched passages of both texts and the share of each text's words they cover."""

    left: list[Passage]
    right: list[Passage]
    left_coverage: float
    right_coverage: float

    def to_compact(self) -> list:
        """``[[[start, end, number], ...], [[...]], left_coverage, right_coverage]`` for the report."""
        return [
            [[p.start, p.end, p.number] for p in self.left],
            [[p.start, p.end, p.number] for p in self.right],
            round(self.left_coverage, 4),
            round(self.right_coverage, 4),
        ]


def words_with_offsets(text: str) -> tuple[list[str], list[tuple[int, int]]]:
    """Normalized words of an original text and the character span each comes from.

    >>> words_with_offsets("Ünïcode ﬁle, OK?")
    (['ünïcode', 'file', 'ok'], [(0, 7), (8, 11), (13, 15)])
    """
    if text.isascii():
        # NFKC changes no ASCII text and case folding is lower-casing, which keeps every offset.
        matches = list(_WORD.finditer(text.lower()))
        return [m.group() for m in matches], [m.span() for m in matches]
    words: list[str] = []
    spans: list[tuple[int, int]] = []
    for match in _WORD.finditer(text):
        span = match.span()
        # NFKC can split one original word into several (e.g. "x²" → "x2" stays one, "½" → "1⁄2" two).
        for part in _normalized_word(match.group()):
            words.append(part)
            spans.append(span)
    return words, spans


@lru_cache(maxsize=65536)
def _normalized_word(word: str) -> tuple[str, ...]:
    # Words repeat across a text and across the pairs of a report: normalize each once.
    return tuple(_WORD.findall(unicodedata.normalize("NFKC", word).casefold()))


def _shingles(words: list[str], k: int) -> list[tuple[str, ...]]:
    # Tuples of words (a word holds no space, so equal tuples are equal joined shingles),
    # built by zip in C rather than one join per position.
    if not words:
        return []
    width = min(k, len(words))
    return list(zip(*(words[j:] for j in range(width))))


def pair_evidence(left_text: str, right_text: str, shingle_size: int = 5) -> PairEvidence:
    """Shared passages of two original texts (word shingles of ``shingle_size`` words).

    >>> e = pair_evidence("one two three four five six", "zero one two three four five", 3)
    >>> [(p.start, p.end) for p in e.left], e.left_coverage
    ([(0, 23)], 0.8333333333333334)
    """
    left_words, left_spans = words_with_offsets(left_text)
    right_words, right_spans = words_with_offsets(right_text)
    left_shingles = _shingles(left_words, shingle_size)
    right_shingles = _shingles(right_words, shingle_size)
    shared = set(left_shingles) & set(right_shingles)
    width_left = min(shingle_size, len(left_words))
    width_right = min(shingle_size, len(right_words))

    # Alignment runs: consecutive left shingles matched to consecutive right shingles.
    right_positions: dict[tuple[str, ...], list[int]] = {}
    for j, sh in enumerate(right_shingles):
        if sh in shared:
            right_positions.setdefault(sh, []).append(j)
    runs: list[list[int]] = []  # [left_start, right_start, length]
    for i, sh in enumerate(left_shingles):
        if sh not in shared:
            continue
        positions = right_positions[sh]
        if runs:
            li, rj, n = runs[-1]
            if li + n == i and (rj + n) in positions:
                runs[-1][2] += 1
                continue
        runs.append([i, positions[0], 1])

    left_matched = [False] * len(left_words)
    right_matched = [False] * len(right_words)
    left_ranges, right_ranges = [], []
    for number, (li, rj, n) in enumerate(runs, 1):
        left_ranges.append((li, li + n - 1 + width_left, number))
        right_ranges.append((rj, rj + n - 1 + width_right, number))
        for w in range(li, li + n - 1 + width_left):
            left_matched[w] = True
        for w in range(rj, rj + n - 1 + width_right):
            right_matched[w] = True

    def passages(ranges, spans):
        # Runs can overlap by up to k - 1 words where an alignment breaks: clip to keep passages apart.
        out, last_end = [], 0
        for a, b, number in sorted(ranges):
            a = max(a, last_end)
            if a >= b:
                continue
            out.append(Passage(spans[a][0], spans[b - 1][1], number))
            last_end = b
        return out

    left = passages(left_ranges, left_spans)
    right = passages(right_ranges, right_spans)
    left_coverage = sum(left_matched) / len(left_words) if left_words else 0.0
    right_coverage = sum(right_matched) / len(right_words) if right_words else 0.0
    return PairEvidence(left, right, left_coverage, right_coverage)
