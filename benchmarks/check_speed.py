"""Speed of the class check against a large reference set, and whether planted passages are found.

The class: ``--submissions`` texts of about ``--words`` words, cut from the English man pages
of this machine (`benchmarks.corpus.iter_manpages`, real text); into each, one to three
passages of 25-120 words are planted from randomly chosen references, verbatim or with
2-5 % of their words edited (`benchmarks.passage_quality.edit_words`). The references:
``--references`` documents of about 2 KB made by `benchmarks.corpus.synthetic_documents`
(a Zipf vocabulary; no network, any size). A planted passage is found when a counted
passage of the check names the right reference and overlaps the planted characters.

The time measured is that of `dedup.check.check` on texts in memory, after a small
warm-up run (compiled kernels load from numba's cache, as for any later command). The
target is under 30 s for 200 submissions of 2,000 words against 100,000 references on
this machine (2 cores), with no planted passage of 25 words or more missed.

Run: ``python -m benchmarks.check_speed [--submissions 200] [--words 2000] [--references 100000]``.
"""

from __future__ import annotations

import argparse
import re
import sys
import time
from collections.abc import Sequence

import numpy as np

from benchmarks.corpus import iter_manpages, synthetic_documents
from benchmarks.passage_quality import edit_words
from dedup.check import CheckSettings, check

_TOKEN = re.compile(r"\S+")


def class_texts(n: int, words: int, pages: int = 800) -> list[list[str]]:
    """``n`` word lists of ``words`` words from consecutive man-page text (reused when short)."""
    pool = [t for _, text in iter_manpages(limit=pages, min_words=200, max_per_stem=1) for t in text.split()]
    if not pool:
        raise SystemExit("no man pages under /usr/share/man")
    return [[pool[(i * words + j) % len(pool)] for j in range(words)] for i in range(n)]


def plant(
    bases: list[list[str]], references: list[tuple[str, str]], seed: int
) -> tuple[list[tuple[str, str]], list[dict]]:
    """Submissions with passages planted from references, and the truth of every passage
    (characters of the submission as built, the reference, the words taken)."""
    rng = np.random.default_rng(seed)
    submissions, truth = [], []
    for i, base in enumerate(bases):
        sid = f"student-{i:04d}"
        count = 1 + int(rng.random() * 3)
        places = sorted(int(rng.random() * len(base)) for _ in range(count))
        pieces, at, size = [], 0, 0
        for place in places:
            ref_id, ref_text = references[int(rng.random() * len(references))]
            ref_tokens = _TOKEN.findall(ref_text)
            length = min(len(ref_tokens), 25 + int(rng.random() * 96))
            first = int(rng.random() * (len(ref_tokens) - length + 1))
            passage = ref_tokens[first : first + length]
            if rng.random() < 0.5:
                passage = edit_words(passage, 0.02 + 0.03 * rng.random(), base, rng)
            before = " ".join(base[at:place]) + "\n\n"
            planted = " ".join(passage)
            pieces += [before, planted, "\n\n"]
            truth.append({"submission": sid, "source": ref_id, "start": size + len(before),
                          "end": size + len(before) + len(planted), "words": length})  # fmt: skip
            size += len(before) + len(planted) + 2
            at = place
        pieces.append(" ".join(base[at:]))
        submissions.append((sid, "".join(pieces)))
    return submissions, truth


def missed(result, truth: Sequence[dict]) -> list[dict]:
    """The planted passages no counted passage of ``result`` finds."""
    found: dict[tuple[str, str], list[tuple[int, int]]] = {}
    for m in result.matches:
        if m["status"] == "counted" and m["source_kind"] == "reference":
            found.setdefault((m["submission"], m["source"]), []).append(
                (m["submission_start"], m["submission_end"])
            )
    return [
        t
        for t in truth
        if not any(a < t["end"] and t["start"] < b for a, b in found.get((t["submission"], t["source"]), []))
    ]


def main(argv: Sequence[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n", 1)[0])
    parser.add_argument("--submissions", type=int, default=200)
    parser.add_argument("--words", type=int, default=2000)
    parser.add_argument("--references", type=int, default=100_000)
    parser.add_argument("--seed", type=int, default=11)
    args = parser.parse_args(argv)
    t = time.perf_counter()
    references = [
        (f"ref-{i:06d}", text) for i, (_, text) in enumerate(synthetic_documents(args.references, args.seed))
    ]
    submissions, truth = plant(class_texts(args.submissions, args.words), references, args.seed)
    print(f"generated in {time.perf_counter() - t:.1f} s (not timed below)")
    check(submissions[:3], against=references[:50])  # warm-up: compiled kernels loaded
    t = time.perf_counter()
    result = check(submissions, against=references, settings=CheckSettings())
    seconds = time.perf_counter() - t
    ref_chars = sum(len(text) for _, text in references)
    sub_words = sum(len(text.split()) for _, text in submissions)
    lost = missed(result, truth)
    print(f"submissions: {len(submissions):,} ({sub_words:,} words)")
    print(f"references:  {len(references):,} ({ref_chars / 1e6:.1f} M characters)")
    print(
        f"candidate pairs aligned: {result.summary['candidate_pairs']:,}; references compared: {result.summary['references_compared']:,}"
    )
    print(f"check: {seconds:.1f} s (target: under 30 s for 200 × 2,000 words against 100,000 references)")
    print(f"planted passages of >= 25 words: {len(truth)}, missed: {len(lost)}")
    for t in lost[:10]:
        print(f"  missed: {t}")
    print(
        f"reproduce: python -m benchmarks.check_speed --submissions {args.submissions} --words {args.words} "
        f"--references {args.references} --seed {args.seed}"
    )
    return 0 if not lost else 1


if __name__ == "__main__":
    sys.exit(main())
