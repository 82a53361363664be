"""Recall of the audit's defaults on real text with shared templates, against exact whole-text truth.

Template lines (lines in many texts) are left out of what each text is compared on, so
the score that decides a pair is not the score of the texts as they are. This benchmark
measures what that costs and what it saves, as users run the audit (``dedup audit DIR
--out OUT --quiet --no-report``, defaults, Jaccard 0.8), on two corpora of real text:

* ``pages``: every text of ``--corpus`` (the man pages of `benchmarks.pipeline`), as is;
* ``family``: ``--family-size`` pages of one generated family (names starting with
  ``--family``, which share long option and notice sections) and ``--planted`` edited
  copies of some of them whose edits also touch the template lines: lines re-wrapped
  (joined or split), punctuation changed, words substituted (about 2%).

Truth: the Jaccard of the whole texts' 5-word shingles for every pair sharing one, by a
sparse product (`benchmarks.template_rules`). Printed per corpus and setting (defaults,
``--keep-boilerplate``): the recall of the pairs whose whole-text Jaccard is at least 0.85
and 0.8; the pairs reported; how many of those have a whole-text Jaccard under the
threshold; and how many are *template-only*: their own text has a Jaccard under 0.5, where a
text's own text is its shingles found in fewer than max(3, 5%) of the texts (template text
decided per shingle, wherever its lines break, so both texts lose the same shingles). Beside them the audit's stated LSH catch probability at 0.8 and 0.9 and
the measured recall of whole-text pairs in those buckets.

Run: ``python -m benchmarks.template_recall --corpus DIR`` (about 4 minutes and 7 GB for
the 19,961 man pages of this machine).
"""

from __future__ import annotations

import argparse
import csv
import json
import os
import random
import re
import subprocess
import sys
import tempfile
from pathlib import Path

import numpy as np

from benchmarks.template_rules import pair_product, shingle_columns

THRESHOLD = 0.8


def plant_family(source: str, out: Path, prefix: str, size: int, planted: int, seed: int) -> int:
    """``size`` pages of the family and ``planted`` edited copies, written to ``out``."""
    rng = random.Random(seed)
    names = sorted(n for n in os.listdir(source) if n.startswith(prefix))
    chosen = names[:: max(1, len(names) // size)][:size]
    out.mkdir(parents=True, exist_ok=True)
    texts = {n: Path(source, n).read_text(encoding="utf-8", errors="replace") for n in chosen}
    for n, text in texts.items():
        (out / n).write_text(text, encoding="utf-8")
    for k, n in enumerate(rng.sample(chosen, min(planted, len(chosen)))):
        (out / f"planted-{k:04d}-{n}").write_text(_edited(texts[n], rng), encoding="utf-8")
    return len(chosen) + min(planted, len(chosen))


def _edited(text: str, rng: random.Random) -> str:
    """Re-wrapped lines, changed punctuation and substituted words (template lines too)."""
    lines, out = text.splitlines(), []
    for line in lines:
        roll = rng.random()
        if roll < 0.15 and out:  # joined to the line before
            out[-1] = out[-1].rstrip() + " " + line.strip()
            continue
        if roll < 0.25 and len(line.split()) > 6:  # split in two
            words = line.split()
            cut = rng.randrange(2, len(words) - 2)
            out += [" ".join(words[:cut]), " ".join(words[cut:])]
            continue
        if roll < 0.35:
            line = re.sub(r"[.,;:]", lambda m: rng.choice([".", ",", ";", ""]), line)
        out.append(line)
    words = "\n".join(out).split(" ")
    for _ in range(max(1, len(words) // 50)):
        words[rng.randrange(len(words))] = rng.choice(["harbour", "lantern", "meadow", "copper", "willow"])
    return " ".join(words)


class OwnText:
    """Each text's shingles that are not template shingles: a shingle in at least
    max(3, 5%) of the texts (the line rule's limit, applied to shingles) is template text
    wherever it stands, so both texts of a pair lose the same shingles."""

    def __init__(self, names: list[str], rows: np.ndarray, columns: np.ndarray, df: np.ndarray) -> None:
        n = len(names)
        self.number = {name: k for k, name in enumerate(names)}
        self.kept = df < max(3, int(np.ceil(0.05 * n)))
        order = np.lexsort((columns, rows))
        self.columns = columns[order]
        self.starts = np.r_[0, np.cumsum(np.bincount(rows, minlength=n))]

    def shingles(self, name: str) -> np.ndarray:
        k = self.number[name]
        mine = self.columns[self.starts[k] : self.starts[k + 1]]
        return mine[self.kept[mine]]

    def jaccard(self, a: str, b: str) -> float:
        x, y = self.shingles(a), self.shingles(b)
        both = np.intersect1d(x, y, assume_unique=True).size
        return both / max(1, x.size + y.size - both)


def audit(folder: str, out: str, extra: list[str]) -> tuple[dict, dict]:
    """Pairs reported (by sorted name pair) and audit.json's candidates block."""
    subprocess.run(
        [sys.executable, "-m", "dedup", "audit", folder, "--out", out, "--quiet", "--no-report", *extra],
        check=True,
    )
    with open(os.path.join(out, "pairs.csv"), encoding="utf-8") as handle:
        pairs = {tuple(sorted((r["left"], r["right"]))): r for r in csv.DictReader(handle)}
    with open(os.path.join(out, "audit.json"), encoding="utf-8") as handle:
        return pairs, json.load(handle)["candidates"]


def measure(folder: str, tmp: str, label: str) -> None:
    names = sorted(os.listdir(folder))
    rows, columns, df, n = shingle_columns(folder)
    left, right, whole = pair_product(rows, columns, n, df.size)
    keep = whole >= THRESHOLD
    truth = {(names[a], names[b]): float(j) for a, b, j in zip(left[keep], right[keep], whole[keep])}
    own = OwnText(names, rows, columns, df)
    print(f"\n{label}: {n:,} texts; pairs with whole-text Jaccard >= 0.85: "
          f"{sum(j >= 0.85 for j in truth.values()):,}, >= 0.8: {len(truth):,}")  # fmt: skip
    print("| setting | recall, whole J ≥ 0.85 | recall, whole J ≥ 0.8 | reported | whole J < 0.8 "
          "| template-only | stated at 0.8 / 0.9 | measured in [0.8, 0.9) / ≥ 0.9 |")  # fmt: skip
    print("|---|---:|---:|---:|---:|---:|---|---|")
    for setting, extra in (("defaults", []), ("--keep-boilerplate", ["--keep-boilerplate"])):
        found, candidates = audit(folder, os.path.join(tmp, f"{label}-{len(extra)}"), extra)
        hit = {k: k in found for k in truth}
        high = [hit[k] for k, j in truth.items() if j >= 0.85]
        low_whole = sum(float(r["whole_text_jaccard"]) < THRESHOLD for r in found.values())
        template_only = sum(own.jaccard(*k) < 0.5 for k in found)
        points = candidates.get("expected_recall", {}).get("points")
        stated = (
            f"{points['at']['probability']:.3f} / {points['above']['probability']:.3f}"
            if points
            else "1 (exact)"
        )
        mid = [hit[k] for k, j in truth.items() if j < 0.9]
        top = [hit[k] for k, j in truth.items() if j >= 0.9]
        print(
            f"| {setting} | {np.mean(high):.3f} | {np.mean(list(hit.values())):.3f} | {len(found):,} "
            f"| {low_whole:,} | {template_only:,} ({template_only / max(1, len(found)):.1%}) | {stated} "
            f"| {np.mean(mid):.3f} / {np.mean(top):.3f} |"
        )


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--corpus", required=True, help="folder of .txt files (the man pages)")
    parser.add_argument("--family", default="gcloud_", help="name prefix of the family of pages")
    parser.add_argument("--family-size", type=int, default=2000)
    parser.add_argument("--planted", type=int, default=300)
    parser.add_argument("--seed", type=int, default=11)
    parser.add_argument("--skip-pages", action="store_true", help="only the family corpus")
    args = parser.parse_args(argv)
    with tempfile.TemporaryDirectory(prefix="dedup-template-recall-") as tmp:
        family = Path(tmp, "family")
        count = plant_family(args.corpus, family, args.family, args.family_size, args.planted, args.seed)
        measure(str(family), tmp, f"family ({count:,} texts, {args.planted} planted edited copies)")
        if not args.skip_pages:
            measure(args.corpus, tmp, "pages")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
