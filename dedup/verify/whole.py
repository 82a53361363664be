"""The whole-text Jaccard of confirmed pairs, beside the score that decided them.

Template lines (`dedup.normalize.boilerplate`) are left out of the shingles a pair is
compared on, so the score that decides a pair is the score of the texts without them.
A reviewer also needs the score of the texts as they are: two pages that share a long
template and little else, or a copy whose template lines were re-wrapped (so only its
original lost them), score differently on the whole texts. This stage gives, per pair,
the Jaccard of the whole texts' shingles and which side had template lines left out
(``templates_left_out``: ``none``, ``both``, ``left`` or ``right``).

It works from the texts as read, with the template lines the audit found, on any engine:
canonical lines (`canonical_packed`), the template rule's per-text decision
(`Boilerplate.left_out`), shingles of the whole canonical text, a merge per pair.

Cost: O(bytes of the texts in pairs) to normalize and shingle them, O(shingles of both
texts) per pair, compiled.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from ..features.shingles import features_with
from ..normalize.canonical_bytes import canonical_packed
from .scores import intersection_sizes

__all__ = ["WholeTexts", "whole_text_scores", "LEFT_OUT"]

# ``templates_left_out`` by (left had template lines left out, right had).
LEFT_OUT = {(False, False): "none", (True, True): "both", (True, False): "left", (False, True): "right"}


class WholeTexts:
    """The whole-text shingle sets of some texts and whether each had template lines
    left out of the set it was compared on."""

    def __init__(self, texts: Sequence[str], boilerplate, settings) -> None:
        buf, offsets, _ = canonical_packed(list(texts), parallel=False)
        if boilerplate is not None and len(boilerplate):
            self.left_out = boilerplate.left_out(buf, offsets, settings.boilerplate_max_text_share)[0]
        else:
            self.left_out = np.zeros(len(texts), dtype=bool)
        whole = buf.copy()
        whole[whole == 0x0A] = 0x20  # the canonical text: lines joined by spaces
        features = features_with(settings, whole, offsets, distinct=True)
        self.shingles, self.offsets = features.shingles, features.shingle_offsets

    def jaccard(self, left: np.ndarray, right: np.ndarray) -> np.ndarray:
        """Jaccard of the whole texts ``left[k]`` and ``right[k]`` (by position)."""
        if not left.shape[0]:
            return np.zeros(0)
        shared = intersection_sizes(self.shingles, self.offsets, left, right)
        sizes = np.diff(self.offsets)
        union = sizes[left] + sizes[right] - shared
        return np.where(union > 0, shared / np.maximum(union, 1), 1.0)


def whole_text_scores(pairs: list[dict], texts: dict[str, str], boilerplate, settings) -> None:
    """Add ``whole_text_jaccard`` to each pair record, and ``templates_left_out`` where the
    record does not say it already (a pair confirmed as whole texts says ``none``).

    ``texts`` maps document ids to their text as read (every document of a pair);
    ``boilerplate`` is the audit's `Boilerplate` (None without template lines). With no
    template lines at all, the texts compared were the whole texts: the Jaccard that
    confirmed the pair is taken as it is, and nothing is shingled again.
    """
    if boilerplate is None or not len(boilerplate):
        # No template lines in this audit: the sets compared were the whole texts' own.
        for p in pairs:
            p["whole_text_jaccard"] = p["jaccard"]
            p.setdefault("templates_left_out", "none")
        return
    ids = sorted({doc for p in pairs for doc in (p["left"], p["right"])})
    if not ids:
        return
    number = {doc: k for k, doc in enumerate(ids)}
    whole = WholeTexts([texts[doc] for doc in ids], boilerplate, settings)
    left = np.asarray([number[p["left"]] for p in pairs], dtype=np.int64)
    right = np.asarray([number[p["right"]] for p in pairs], dtype=np.int64)
    scores = whole.jaccard(left, right).tolist()
    flags = whole.left_out.tolist()
    for p, score, a, b in zip(pairs, scores, left.tolist(), right.tolist()):
        p["whole_text_jaccard"] = float(score)
        p.setdefault("templates_left_out", LEFT_OUT[(flags[a], flags[b])])
