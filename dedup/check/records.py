"""Records of a class check: passages as rows, sources of each submission ranked, shares.

Figures:

* a pair's ``share`` is the containment of the submission in the source, |S ∩ R| / |S|,
  S the submission's counted shingles (left-out words make none) and R all shingles of
  the source: asymmetric, so a short copied passage in a long essay is seen;
* a submission's ``share_matched`` is |S ∩ (R1 ∪ R2 ∪ …)| / |S| over the sources with a
  counted passage, so shingles matched by chance in unrelated sources do not add up;
* ``matched_words``: the submission's words inside counted passages, each word once.

Order is fixed everywhere (ids, then positions), so the same inputs give the same rows.
Cost O(pairs × shingles of a submission) set work in numpy.
"""

from __future__ import annotations

from collections import defaultdict
from collections.abc import Sequence

import numpy as np

from .masks import REASON_CODES
from .passages import Passage

__all__ = ["passage_rows", "pair_figures", "submission_records", "ROUND"]

ROUND = 6  # decimals of every share and similarity written


def _set(sets: tuple[np.ndarray, np.ndarray], d: int) -> np.ndarray:
    values, offsets = sets
    return values[offsets[d] : offsets[d + 1]]


def _held(mine: np.ndarray, theirs: np.ndarray) -> np.ndarray:
    """Which of the sorted values ``mine`` are in the sorted ``theirs``; O(|mine| log |theirs|)."""
    if not theirs.shape[0]:
        return np.zeros(mine.shape[0], dtype=np.bool_)
    at = np.minimum(np.searchsorted(theirs, mine), theirs.shape[0] - 1)
    return theirs[at] == mine


def passage_rows(passages: Sequence[Passage], ids: Sequence[str], is_sub: np.ndarray) -> list[dict]:
    """One row per passage, by submission id, position and source."""
    rows = [
        {
            "submission": ids[p.submission],
            "source": ids[p.source],
            "source_kind": "submission" if is_sub[p.source] else "reference",
            "submission_start": p.submission_start,
            "submission_end": p.submission_end,
            "source_start": p.source_start,
            "source_end": p.source_end,
            "words": p.words,
            "source_words": p.source_words,
            "similarity": round(p.similarity, ROUND),
            "moved": p.moved,
            "status": p.status,
            "reason": p.reason,
            "cited": p.cited,
            "via": [ids[v] for v in p.via],
        }
        for p in passages
    ]
    rows.sort(
        key=lambda r: (
            r["submission"],
            r["submission_start"],
            r["source_kind"],
            r["source"],
            r["source_start"],
        )
    )
    return rows


def pair_figures(
    passages: Sequence[Passage],
    counted: tuple[np.ndarray, np.ndarray],
    full: tuple[np.ndarray, np.ndarray],
) -> dict[tuple[int, int], dict]:
    """Per (submission, source) with any passage: share, shared shingles, passages and words."""
    grouped: dict[tuple[int, int], list[Passage]] = defaultdict(list)
    for p in passages:
        grouped[(p.submission, p.source)].append(p)
    out = {}
    for (d, j), items in grouped.items():
        mine = _set(counted, d)
        shared = int(np.count_nonzero(_held(mine, _set(full, j))))
        kept = [p for p in items if p.status == "counted"]
        out[(d, j)] = {
            "share": round(shared / mine.shape[0], ROUND) if mine.shape[0] else 0.0,
            "shared_shingles": shared,
            "shingles": int(mine.shape[0]),
            "passages": len(kept),
            "words": sum(p.words for p in kept),
            "excluded_passages": len(items) - len(kept),
        }
    return out


def _matched_words(passages: list[Passage], n_words: int) -> int:
    mask = np.zeros(n_words, dtype=np.bool_)
    for p in passages:
        mask[p.word_start : p.word_end] = True
    return int(np.count_nonzero(mask))


def _source_rows(d: int, figures: dict, ids, is_sub) -> list[dict]:
    rows = [
        {"source": ids[j], "source_kind": "submission" if is_sub[j] else "reference", **f}
        for (dd, j), f in figures.items()
        if dd == d
    ]
    rows.sort(key=lambda r: (r["passages"] == 0, -r["share"], -r["words"], r["source_kind"], r["source"]))
    return rows


def _union_share(d: int, sources: list[int], counted, full) -> float:
    mine = _set(counted, d)
    if not mine.shape[0] or not sources:
        return 0.0
    held = np.zeros(mine.shape[0], dtype=np.bool_)
    for j in sources:
        held |= _held(mine, _set(full, j))
    return round(float(np.count_nonzero(held)) / mine.shape[0], ROUND)


def _left_out(codes: np.ndarray) -> dict[str, int]:
    return {name: int(np.count_nonzero(codes == code)) for name, code in REASON_CODES.items()}


def submission_records(
    passages: Sequence[Passage],
    figures: dict[tuple[int, int], dict],
    ids: Sequence[str],
    is_sub: np.ndarray,
    word_offsets: np.ndarray,
    codes: np.ndarray,
    sets: tuple[tuple[np.ndarray, np.ndarray], tuple[np.ndarray, np.ndarray]],
    group_of: dict[int, str],
) -> list[dict]:
    """One record per submission (by id): words, share matched, sources ranked, passages, what was left out.

    ``sets`` is (counted shingle sets of the submissions, all shingle sets of every text).
    """
    counted, full = sets
    by_sub: dict[int, list[Passage]] = defaultdict(list)
    for p in passages:
        by_sub[p.submission].append(p)
    records = []
    for d in np.flatnonzero(is_sub).tolist():
        a, b = int(word_offsets[d]), int(word_offsets[d + 1])
        mine = by_sub.get(d, [])
        kept = [p for p in mine if p.status == "counted"]
        sources = _source_rows(d, figures, ids, is_sub)
        with_passages = sorted({p.source for p in kept})
        top = sources[0] if sources and sources[0]["passages"] else None
        reasons: dict[str, int] = defaultdict(int)
        for p in mine:
            if p.status != "counted":
                reasons[p.reason] += 1
        records.append(
            {
                "submission": ids[d],
                "words": b - a,
                "counted_words": int(np.count_nonzero(codes[a:b] == 0)),
                "share_matched": _union_share(d, with_passages, counted, full),
                "matched_words": _matched_words(kept, b - a),
                "top_source": top["source"] if top else None,
                "top_source_kind": top["source_kind"] if top else None,
                "top_source_share": top["share"] if top else None,
                "passages": len(kept),
                "excluded_passages": len(mine) - len(kept),
                "excluded_by_reason": dict(sorted(reasons.items())),
                "words_left_out": _left_out(codes[a:b]),
                "group": group_of.get(d),
                "sources": sources,
            }
        )
    records.sort(key=lambda r: r["submission"])
    return records
