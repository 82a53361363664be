"""Character-level measures of passage detection: precision, recall, granularity, plagdet.

From Potthast, Stein, Barrón-Cedeño, Rosso (2010), "An Evaluation Framework for
Plagiarism Detection", COLING 2010, Section 3 (the formulas as recalled from the paper;
the paper's text is not on this machine). A case s and a detection r each name a
passage of a suspicious document and one of a source document; each is taken as the set
of the characters it references in both documents, so ``|s| = |s_plg| + |s_src|``.

* r detects s when they name the same two documents and r's passages overlap s's in both;
* ``s ⊓ r = s ∩ r`` when r detects s, else the empty set;
* ``prec(S, R) = 1/|R| Σ_r |∪_s (s ⊓ r)| / |r|`` and
  ``rec(S, R) = 1/|S| Σ_s |∪_r (s ⊓ r)| / |s|`` (macro-averaged over detections and cases);
* ``gran(S, R) = 1/|S_R| Σ_{s ∈ S_R} |R_s|``, S_R the cases detected at all, R_s the
  detections of s;
* ``plagdet(S, R) = F1 / log2(1 + gran(S, R))``, F1 the harmonic mean of prec and rec.

Where the paper leaves a value undefined this module fixes it (common practice, no
source): precision 0 with no detections, recall 0 with no cases, granularity 1 when no
case is detected, F1 0 when precision and recall are both 0.

Cost O(|S| |R|) set operations on intervals, grouped by document pair.
"""

from __future__ import annotations

import math
from collections import defaultdict
from collections.abc import Iterable, Sequence
from dataclasses import dataclass

__all__ = ["Annotation", "detects", "precision", "recall", "granularity", "plagdet", "measures"]


@dataclass(frozen=True)
class Annotation:
    """A case or a detection: characters ``[plg_start, plg_end)`` of the suspicious document
    ``plg_doc`` and ``[src_start, src_end)`` of the source document ``src_doc``."""

    plg_doc: str
    plg_start: int
    plg_end: int
    src_doc: str
    src_start: int
    src_end: int

    def __len__(self) -> int:
        return (self.plg_end - self.plg_start) + (self.src_end - self.src_start)


def _overlaps(a0: int, a1: int, b0: int, b1: int) -> bool:
    return max(a0, b0) < min(a1, b1)


def detects(r: Annotation, s: Annotation) -> bool:
    """Whether detection r detects case s: same documents, overlapping passages in both."""
    return (
        r.plg_doc == s.plg_doc
        and r.src_doc == s.src_doc
        and _overlaps(r.plg_start, r.plg_end, s.plg_start, s.plg_end)
        and _overlaps(r.src_start, r.src_end, s.src_start, s.src_end)
    )


def _union_length(intervals: Iterable[tuple[int, int]]) -> int:
    total, reach = 0, None
    for a, b in sorted(i for i in intervals if i[1] > i[0]):
        if reach is None or a >= reach:
            total += b - a
            reach = b
        elif b > reach:
            total += b - reach
            reach = b
    return total


def _shared(x: Annotation, others: Sequence[Annotation]) -> int:
    # |∪_o (x ∩ o)| over the others, both documents' characters counted.
    plg = [(max(x.plg_start, o.plg_start), min(x.plg_end, o.plg_end)) for o in others]
    src = [(max(x.src_start, o.src_start), min(x.src_end, o.src_end)) for o in others]
    return _union_length(plg) + _union_length(src)


def _by_documents(items: Sequence[Annotation]) -> dict[tuple[str, str], list[Annotation]]:
    groups: dict[tuple[str, str], list[Annotation]] = defaultdict(list)
    for a in items:
        groups[(a.plg_doc, a.src_doc)].append(a)
    return groups


def _macro(items: Sequence[Annotation], others: Sequence[Annotation], items_are_cases: bool) -> float:
    if not items:
        return 0.0
    groups = _by_documents(others)
    total = 0.0
    for x in items:
        if len(x) == 0:
            continue
        hits = [
            o
            for o in groups.get((x.plg_doc, x.src_doc), [])
            if (detects(o, x) if items_are_cases else detects(x, o))
        ]
        total += _shared(x, hits) / len(x)
    return total / len(items)


def precision(cases: Sequence[Annotation], detections: Sequence[Annotation]) -> float:
    """``1/|R| Σ_r |∪_s (s ⊓ r)| / |r|``; 0.0 with no detections."""
    return _macro(detections, cases, items_are_cases=False)


def recall(cases: Sequence[Annotation], detections: Sequence[Annotation]) -> float:
    """``1/|S| Σ_s |∪_r (s ⊓ r)| / |s|``; 0.0 with no cases."""
    return _macro(cases, detections, items_are_cases=True)


def granularity(cases: Sequence[Annotation], detections: Sequence[Annotation]) -> float:
    """Mean number of detections of each detected case; 1.0 when no case is detected."""
    groups = _by_documents(detections)
    counts = [sum(detects(r, s) for r in groups.get((s.plg_doc, s.src_doc), [])) for s in cases]
    detected = [c for c in counts if c > 0]
    return sum(detected) / len(detected) if detected else 1.0


def plagdet(cases: Sequence[Annotation], detections: Sequence[Annotation]) -> float:
    """``F1 / log2(1 + granularity)``."""
    return measures(cases, detections)["plagdet"]


def measures(cases: Sequence[Annotation], detections: Sequence[Annotation]) -> dict[str, float]:
    """All four measures (and F1) at once.

    >>> s = [Annotation("a", 0, 10, "b", 0, 10)]
    >>> measures(s, [Annotation("a", 0, 5, "b", 0, 5), Annotation("a", 5, 10, "b", 5, 10)])["granularity"]
    2.0
    """
    p = precision(cases, detections)
    r = recall(cases, detections)
    g = granularity(cases, detections)
    f1 = 2 * p * r / (p + r) if p + r > 0 else 0.0
    return {"precision": p, "recall": r, "f1": f1, "granularity": g, "plagdet": f1 / math.log2(1 + g)}
