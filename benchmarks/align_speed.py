"""Speed of passage alignment (`dedup.align`) on real text, one core.

Texts are English man pages of this machine (`benchmarks.corpus.iter_manpages`) laid end
to end until they hold the words wanted. Three measures:

1. one pair of two texts of N words (10,000 and 100,000): a text and its copy with 5 % of
   the words edited and a block of 2 % of them moved to the end (related), and two
   different texts (unrelated); the best and the median of ``--repeat`` runs of
   `dedup.align.align_pairs`, words already made;
2. words with offsets (`dedup.align.word_spans`) over all the pages, in MB/s;
3. a batch of ``--pairs`` pairs of pages (each page with an edited copy of itself, and with
   another page), per pair on average.

Figures only, no thresholds. Run with one thread for numba (the default here):
``NUMBA_NUM_THREADS=1 python -m benchmarks.align_speed [--repeat 7] [--pairs 10000]``
"""

from __future__ import annotations

import os

os.environ.setdefault("NUMBA_NUM_THREADS", "1")

import argparse  # noqa: E402
import statistics  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402
from collections.abc import Callable, Sequence  # noqa: E402

import numba  # noqa: E402
import numpy as np  # noqa: E402

from benchmarks.corpus import iter_manpages  # noqa: E402
from benchmarks.passage_quality import edit_words  # noqa: E402
from dedup.align import align_pairs, word_spans  # noqa: E402


def timings(run: Callable[[], object], repeat: int) -> tuple[float, float]:
    """Best and median seconds of ``repeat`` runs (after one warm-up run)."""
    run()
    seconds = []
    for _ in range(repeat):
        t = time.perf_counter()
        run()
        seconds.append(time.perf_counter() - t)
    return min(seconds), statistics.median(seconds)


def related_copy(tokens: list[str], rng: np.random.Generator) -> list[str]:
    """5 % of the words edited, then a block of 2 % of them moved to the end."""
    edited = edit_words(tokens, 0.05, tokens[:5000], rng)
    size = max(1, len(edited) // 50)
    at = int(rng.random() * (len(edited) - size))
    return edited[:at] + edited[at + size :] + edited[at : at + size]


def pair_figures(tokens: list[str], n: int, repeat: int, rng: np.random.Generator) -> None:
    if 2 * n > len(tokens):
        print(f"{n:>8} words: not enough text ({len(tokens)} words)")
        return
    base = tokens[:n]
    words = word_spans([" ".join(base), " ".join(related_copy(base, rng)), " ".join(tokens[n : 2 * n])])
    for name, (a, b) in (("related", (0, 1)), ("unrelated", (0, 2))):
        result = align_pairs(words, [a], [b])
        best, median = timings(lambda a=a, b=b: align_pairs(words, [a], [b]), repeat)
        print(
            f"{n:>8} words {name:<10} best {best * 1e3:8.2f} ms  median {median * 1e3:8.2f} ms  "
            f"passages {result.pair.size:>4}  left share {result.left_share[0]:.3f}"
        )


def batch_pairs(
    texts: list[str], count: int, rng: np.random.Generator
) -> tuple[list[str], np.ndarray, np.ndarray]:
    """Pages plus an edited copy of each; pairs alternate (page, its copy) and (page, another page)."""
    copies = [" ".join(edit_words(t.split(), 0.05, t.split(), rng)) for t in texts]
    n = len(texts)
    pick = (np.arange(count) // 2) % n
    other = (pick + 1 + (rng.random(count) * (n - 1)).astype(np.int64)) % n
    right = np.where(np.arange(count) % 2 == 0, pick + n, other)
    return texts + copies, pick.astype(np.int64), right.astype(np.int64)


def batch_figures(pages: list[str], count: int, rng: np.random.Generator) -> None:
    texts, left, right = batch_pairs(pages, count, rng)
    words = word_spans(texts)
    best, _ = timings(lambda: align_pairs(words, left, right), 1)
    found = align_pairs(words, left, right)
    print(
        f"batch of {count} page pairs: {best:.3f} s, {best / count * 1e6:.1f} us per pair, "
        f"{found.pair.size} passages"
    )


def main(argv: Sequence[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n", 1)[0])
    parser.add_argument("--repeat", type=int, default=7)
    parser.add_argument("--pairs", type=int, default=10_000)
    parser.add_argument("--pages", type=int, default=2000)
    args = parser.parse_args(argv)
    rng = np.random.default_rng(12)
    pages = [t for _, t in iter_manpages(limit=args.pages, max_per_stem=2)]
    if len(pages) < 3:
        print("fewer than three man pages found", file=sys.stderr)
        return 1
    tokens = " ".join(pages).split()
    mb = sum(len(t.encode("utf-8")) for t in pages) / 1e6
    print(
        f"numba threads {numba.get_num_threads()}; {len(pages)} man pages, {len(tokens)} words, {mb:.1f} MB"
    )
    for n in (10_000, 100_000):
        pair_figures(tokens, n, args.repeat, rng)
    best, _ = timings(lambda: word_spans(pages), 3)
    print(f"word_spans over all pages: {best:.3f} s, {mb / best:.0f} MB/s")
    batch_figures(pages, args.pairs, rng)
    command = (
        f"NUMBA_NUM_THREADS=1 python -m benchmarks.align_speed --repeat {args.repeat} --pairs {args.pairs}"
    )
    print(f"reproduce: {command} --pages {args.pages}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
