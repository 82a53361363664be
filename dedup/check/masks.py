"""Which words of each submission count: a reason code per word.

Code 0 is a counted word; any other code names why the word is left out (`REASON_CODES`):
it lies in a quotation or block quote, in the reference list, or in a stretch matching
a template given with the assignment. Regions are character spans (`dedup.check.regions`);
a word is left out when its span overlaps one. Template stretches are found by aligning
the submission with each template (`dedup.align.align_pairs`).

Cost O(words + regions log words) per submission, plus one alignment per (submission,
template).
"""

from __future__ import annotations

import numpy as np

from ..align import AlignSettings, WordSpans, align_pairs, word_spans
from .regions import Region, exclusion_regions

__all__ = ["REASON_CODES", "reason_codes", "template_regions", "words_in"]

# Code of each reason of a left-out word; 0 is "counted".
REASON_CODES = {"quoted": 1, "reference list": 2, "template": 3}


def words_in(starts: np.ndarray, ends: np.ndarray, region: Region) -> slice:
    """The words (rows of one text's spans, sorted) overlapping ``region``'s characters."""
    first = int(np.searchsorted(ends, region.start, side="right"))
    last = int(np.searchsorted(starts, region.end, side="left"))
    return slice(first, max(first, last))


def template_regions(texts: list[str], templates: list[str], min_words: int) -> list[list[Region]]:
    """Per text, the stretches matching any of ``templates`` (at least ``min_words`` words)."""
    out: list[list[Region]] = [[] for _ in texts]
    if not templates or not texts:
        return out
    words = word_spans(list(texts) + list(templates))
    n, t = len(texts), len(templates)
    left = np.repeat(np.arange(n, dtype=np.int64), t)
    right = np.tile(np.arange(n, n + t, dtype=np.int64), n)
    found = align_pairs(words, left, right, AlignSettings(min_words=min_words, max_gap=8))
    for row in range(found.pair.shape[0]):
        d = int(left[found.pair[row]])
        out[d].append(Region(int(found.left_start[row]), int(found.left_end[row]), "template"))
    return out


def reason_codes(
    texts: list[str], words: WordSpans, extra: list[list[Region]], *, quotes: bool, reference_list: bool
) -> tuple[np.ndarray, list[list[Region]]]:
    """A reason code per word of ``words`` (the words of ``texts``) and each text's regions.

    The regions are the quotations and reference list of each text (as switched on) and its
    ``extra`` regions (template stretches). A word in several keeps the first reason set:
    quotations, then the reference list, then templates.
    """
    codes = np.zeros(words.hashes.shape[0], dtype=np.uint8)
    all_regions: list[list[Region]] = []
    for d, text in enumerate(texts):
        regions = exclusion_regions(text, quotes=quotes, reference_list=reference_list) + extra[d]
        _, starts, ends = words.of(d)
        base = int(words.offsets[d])
        for region in regions:
            rows = words_in(starts, ends, region)
            part = codes[base + rows.start : base + rows.stop]
            part[part == 0] = REASON_CODES[region.reason]
        all_regions.append(sorted(regions, key=lambda r: (r.start, r.end)))
    return codes, all_regions
