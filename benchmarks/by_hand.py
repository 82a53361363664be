"""The pipeline a user writes by hand with datasketch, as a command: pairs to CSV.

Per-document ``MinHash.update_batch`` over word 5-shingles of the normalized text, then
``MinHashLSH`` insert and query, then the Jaccard of Python sets for each candidate; the
pairs at or above the threshold are written to a CSV file. It reads the same ``.txt``
files and normalizes them the same way as ``dedup audit --keep-boilerplate``.

Run: ``python -m benchmarks.by_hand CORPUS_DIR PAIRS_CSV [--threshold 0.8] [--num-perm 128]``
"""

from __future__ import annotations

import argparse
import csv
import sys
from pathlib import Path


def shingle_sets(folder: Path, shingle_size: int = 5) -> dict[str, set[str]]:
    """Word shingles of every ``.txt`` file under ``folder`` (by relative path), as dedup makes them."""
    from dedup.features import shingle_strings
    from dedup.normalize import canonical_text, token_text

    shingles: dict[str, set[str]] = {}
    for path in sorted(folder.rglob("*.txt")):
        doc_id = path.relative_to(folder).as_posix()
        grams = set(
            shingle_strings(token_text(canonical_text(path.read_text(encoding="utf-8"))), shingle_size)
        )
        if grams:
            shingles[doc_id] = grams
    return shingles


def near_pairs(shingles: dict[str, set[str]], threshold: float, num_perm: int) -> set[tuple[str, str]]:
    """Pairs whose set Jaccard reaches ``threshold`` among the LSH candidates."""
    from datasketch import MinHash, MinHashLSH

    lsh = MinHashLSH(threshold=threshold, num_perm=num_perm)
    sketches = {}
    for doc_id, grams in shingles.items():
        m = MinHash(num_perm=num_perm)
        m.update_batch([g.encode("utf-8") for g in grams])
        sketches[doc_id] = m
        lsh.insert(doc_id, m)
    pairs = set()
    for doc_id, m in sketches.items():
        for other in lsh.query(m):
            if other != doc_id:
                a, b = sorted((doc_id, other))
                jaccard = len(shingles[a] & shingles[b]) / len(shingles[a] | shingles[b])
                if jaccard >= threshold:
                    pairs.add((a, b))
    return pairs


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("corpus", type=Path)
    parser.add_argument("pairs_csv", type=Path)
    parser.add_argument("--threshold", type=float, default=0.8)
    parser.add_argument("--num-perm", type=int, default=128)
    args = parser.parse_args(argv)
    pairs = near_pairs(shingle_sets(args.corpus), args.threshold, args.num_perm)
    with open(args.pairs_csv, "w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(["left", "right"])
        writer.writerows(sorted(pairs))
    return 0


if __name__ == "__main__":
    sys.exit(main())
