"""Passage alignment: where two texts share passages, in characters of the original texts.

`word_spans` turns a batch of original texts into word hashes with character spans;
`align_pairs` finds the passages each pair of texts shares (`Alignment`, columns of
numpy arrays), tuned by `AlignSettings`. Both are compiled and take whole batches.
"""

from .passages import Alignment, AlignSettings, align_pairs, align_texts
from .words import NamedWords, WordSpans, normalized_parts, word_spans

__all__ = [
    "AlignSettings",
    "Alignment",
    "NamedWords",
    "WordSpans",
    "align_pairs",
    "align_texts",
    "normalized_parts",
    "word_spans",
]
