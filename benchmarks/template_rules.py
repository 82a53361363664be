"""How template rules that treat both texts of a pair alike keep recall on real text.

Template text (licence blocks, option sections, headers shared by a family of pages) makes
unrelated texts look alike; leaving it out of only one side of a pair (a line rule that
matches exact lines, when one copy was re-wrapped) loses real copies. This benchmark
compares rules that decide template text per shingle, by document frequency, so both
sides of every pair lose the same shingles:

- ``whole``: no template rule (the whole-text Jaccard: the truth here);
- ``weighted``: each shingle weighted ``min(1, L / df)`` in a weighted Jaccard;
- ``dropped``: shingles in at least ``L`` texts left out of every set;
- ``dropped, whole if mostly template``: as ``dropped``, but a pair where either text
  keeps less than half its shingles is compared whole.

For each template level ``L`` it prints, at threshold 0.8, the recall of the pairs whose
whole-text Jaccard is at least 0.85, the pairs reported, and how many of those share
mostly template text (Jaccard over the non-template shingles below 0.5).

Exact figures: every pair sharing a shingle comes from a sparse product (about 2.5 minutes
and 6 GB for 20,000 man pages on 2 cores); per-pair scores over sorted shingle arrays.

Run: ``python -m benchmarks.template_rules --corpus DIR [--levels 50 200 1000]`` (the man
page corpus of `benchmarks.pipeline`).
"""

from __future__ import annotations

import argparse
import os
import time
from pathlib import Path

import numpy as np
import scipy.sparse as sp

from dedup import AuditSettings
from dedup.features.shingles import features_with, pack_texts
from dedup.normalize import canonical_text

THRESHOLD, TRUTH = 0.8, 0.85


def shingle_columns(folder: str) -> tuple[np.ndarray, np.ndarray, np.ndarray, int]:
    """Rows (documents) and columns (distinct shingles) of the incidence, and each shingle's df."""
    names = sorted(os.listdir(folder))
    texts = [Path(folder, n).read_text(encoding="utf-8", errors="replace") for n in names]
    features = features_with(AuditSettings(), *pack_texts([canonical_text(t) for t in texts]))
    _, columns, df = np.unique(features.shingles, return_inverse=True, return_counts=True)
    rows = np.repeat(np.arange(features.n_docs), np.diff(features.shingle_offsets))
    return rows, columns.ravel(), df, features.n_docs


def pair_product(rows, columns, n, n_columns, keep=None) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """``(left, right, Jaccard)`` of every pair sharing a kept shingle."""
    values = np.ones(columns.size, np.float32) if keep is None else keep[columns].astype(np.float32)
    a = sp.csr_matrix((values, (rows, columns)), shape=(n, n_columns))
    a.eliminate_zeros()
    sizes = np.asarray(a.sum(1)).ravel()
    shared = sp.triu(a @ a.T, k=1).tocoo()
    jaccard = shared.data / np.maximum(1, sizes[shared.row] + sizes[shared.col] - shared.data)
    return shared.row.astype(np.int64), shared.col.astype(np.int64), jaccard


def rule_scores(pairs: np.ndarray, by_doc, df: np.ndarray, level: int, n: int) -> np.ndarray:
    """Per pair: whole, weighted, dropped, and dropped-unless-mostly-template Jaccard."""
    weight, kept = np.minimum(1.0, level / df), df < level
    out = np.empty((pairs.size, 4))
    for i, key in enumerate(pairs.tolist()):
        a, b = by_doc(key // n), by_doc(key % n)
        both = np.intersect1d(a, b, assume_unique=True)
        whole = both.size / (a.size + b.size - both.size)
        wi, wa, wb = weight[both].sum(), weight[a].sum(), weight[b].sum()
        ki, ka, kb = kept[both].sum(), kept[a].sum(), kept[b].sum()
        dropped = ki / max(1, ka + kb - ki)
        mostly_template = ka < 0.5 * a.size or kb < 0.5 * b.size
        out[i] = whole, wi / (wa + wb - wi), dropped, whole if mostly_template else dropped
    return out


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--corpus", required=True, help="folder of .txt files")
    parser.add_argument("--levels", type=int, nargs="+", default=[50, 200, 1000])
    args = parser.parse_args(argv)
    started = time.time()
    rows, columns, df, n = shingle_columns(args.corpus)
    left, right, whole = pair_product(rows, columns, n, df.size)
    print(
        f"{n:,} texts, {df.size:,} shingles, {left.size:,} pairs sharing one ({time.time() - started:.0f} s)"
    )
    order = np.lexsort((columns, rows))
    sorted_columns, starts = columns[order], np.r_[0, np.cumsum(np.bincount(rows, minlength=n))]

    def by_doc(d: int) -> np.ndarray:
        return sorted_columns[starts[d] : starts[d + 1]]

    near = whole >= 0.6
    for level in args.levels:
        kl, kr, kj = pair_product(rows, columns, n, df.size, keep=df < level)
        pairs = np.union1d(left[near] * n + right[near], kl[kj >= 0.6] * n + kr[kj >= 0.6])
        scores = rule_scores(pairs, by_doc, df, level, n)
        truth, template_only = scores[:, 0] >= TRUTH, scores[:, 2] < 0.5
        print(f"level L = {level}: {truth.sum():,} pairs with whole-text Jaccard >= {TRUTH}")
        for name, column in (
            ("whole", 0),
            ("weighted", 1),
            ("dropped", 2),
            ("dropped, whole if mostly template", 3),
        ):
            reported = scores[:, column] >= THRESHOLD
            share = (reported & template_only).sum() / max(1, reported.sum())
            print(
                f"  {name:36s} recall {reported[truth].mean():.4f}  reported {reported.sum():,}  "
                f"mostly template {(reported & template_only).sum():,} ({share:.1%})"
            )
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
