"""Quality of passage alignment on planted passages of real text, by obfuscation level.

Cases are made from the English man pages of this machine (`benchmarks.corpus.iter_manpages`,
one page per name stem so that pages of one family do not share text by chance). For each
case a passage of 50-800 words is cut from a source page and inserted, edited or not, at a
word boundary of another page (the host), giving the suspicious document; the source page
keeps the passage where it was. Three levels:

* ``none``: the passage verbatim;
* ``light``: 2-5 % of its words substituted, deleted or inserted;
* ``heavy``: 20 % of its words edited as above, then local reorderings: about one swap of
  two adjacent runs of 1-4 words per 25 words, and one swap of two adjacent sentences per
  100 words.

Replacement and inserted words are drawn from the host page. A host and a source that
already share a run of eight words (checked in plain Python on lower-cased words, apart
from the aligner) are not paired: man pages of one project share footers and option
texts, and those true shared passages would count as false detections here. Every pair (suspicious,
source) is aligned with `dedup.align.align_pairs`; every passage found is a detection,
scored with the character-level measures of `benchmarks.pan_measures` (Potthast et al.,
COLING 2010). Everything is seeded: the same pages give the same table.

Run: ``python -m benchmarks.passage_quality [--cases 100] [--pool 1500] [--seed 7]``, and
``--seed-words``, ``--max-gap``, ``--max-swap``, ``--min-words``, ``--min-similarity`` to
score other settings than the defaults of `dedup.align.AlignSettings`.
"""

from __future__ import annotations

import argparse
import re
import sys
import time
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from benchmarks.corpus import iter_manpages
from benchmarks.pan_measures import Annotation, measures
from dedup.align import AlignSettings, align_pairs, word_spans

LEVELS = ("none", "light", "heavy")
_TOKEN = re.compile(r"\S+")
_SENTENCE_END = re.compile(r"[.!?]$")
_LENGTH_BANDS = ((50, 150), (150, 400), (400, 800))


@dataclass(frozen=True)
class Case:
    """One planted passage: the suspicious text, the source text and where the passage is."""

    level: str
    suspicious: str
    source: str
    truth: Annotation


def load_pool(pages: int, min_words: int = 120) -> list[tuple[str, str]]:
    """``(name, text)`` of up to ``pages`` man pages, one per name stem, of at least ``min_words`` words."""
    return list(iter_manpages(limit=pages, min_words=min_words, max_per_stem=1))


def edit_words(tokens: list[str], rate: float, vocabulary: list[str], rng: np.random.Generator) -> list[str]:
    # Each token is edited with probability `rate`: substituted, deleted or preceded by an
    # inserted word, one of the three with equal odds.
    out: list[str] = []
    for token in tokens:
        if rng.random() >= rate:
            out.append(token)
            continue
        action = int(rng.random() * 3)
        word = vocabulary[int(rng.random() * len(vocabulary))]
        if action == 0:
            out.append(word)
        elif action == 2:
            out.extend((word, token))
    return out


def _swap_runs(tokens: list[str], swaps: int, rng: np.random.Generator) -> list[str]:
    # Swap two adjacent runs of 1-4 tokens, `swaps` times at random places.
    tokens = list(tokens)
    for _ in range(swaps):
        a, b = 1 + int(rng.random() * 4), 1 + int(rng.random() * 4)
        if len(tokens) <= a + b:
            break
        p = int(rng.random() * (len(tokens) - a - b))
        tokens[p : p + a + b] = tokens[p + a : p + a + b] + tokens[p : p + a]
    return tokens


def _swap_sentences(tokens: list[str], swaps: int, rng: np.random.Generator) -> list[str]:
    # Sentences end at a token ending in . ! or ?; swap a random one with the next.
    for _ in range(swaps):
        ends = [i + 1 for i, t in enumerate(tokens) if _SENTENCE_END.search(t)]
        bounds = [0, *[e for e in ends if e < len(tokens)], len(tokens)]
        sentences = [tokens[a:b] for a, b in zip(bounds[:-1], bounds[1:]) if b > a]
        if len(sentences) < 2:
            break
        s = int(rng.random() * (len(sentences) - 1))
        sentences[s], sentences[s + 1] = sentences[s + 1], sentences[s]
        tokens = [t for sentence in sentences for t in sentence]
    return tokens


def obfuscate(passage: str, level: str, vocabulary: list[str], rng: np.random.Generator) -> str:
    """The passage as inserted at ``level`` (tokens joined by single spaces when edited)."""
    if level == "none":
        return passage
    tokens = _TOKEN.findall(passage)
    if level == "light":
        return " ".join(edit_words(tokens, 0.02 + 0.03 * rng.random(), vocabulary, rng))
    tokens = edit_words(tokens, 0.2, vocabulary, rng)
    tokens = _swap_runs(tokens, round(len(tokens) / 25), rng)
    tokens = _swap_sentences(tokens, max(1, round(len(tokens) / 100)), rng)
    return " ".join(tokens)


def _cut(text: str, rng: np.random.Generator) -> tuple[int, int]:
    # A passage of whole tokens: a length band at random, then a length and a place.
    tokens = [m.span() for m in _TOKEN.finditer(text)]
    low, high = _LENGTH_BANDS[int(rng.random() * len(_LENGTH_BANDS))]
    length = min(len(tokens), low + int(rng.random() * (high - low + 1)))
    first = int(rng.random() * (len(tokens) - length + 1))
    return tokens[first][0], tokens[first + length - 1][1]


_CHECK_WORDS = 8
_CHECK_WORD = re.compile(r"[^\W_]+")


def _runs_of_words(text: str) -> set[tuple[str, ...]]:
    words = _CHECK_WORD.findall(text.lower())
    return set(zip(*(words[j:] for j in range(_CHECK_WORDS))))


def _apart(pool: Sequence[tuple[str, str]], rng: np.random.Generator, runs: dict) -> tuple[int, int]:
    # Two different pages sharing no run of _CHECK_WORDS words (drawn again until so).
    while True:
        s, h = (int(x) for x in rng.choice(len(pool), size=2, replace=False))
        for d in (s, h):
            if d not in runs:
                runs[d] = _runs_of_words(pool[d][1])
        if not runs[s] & runs[h]:
            return s, h


def make_cases(pool: Sequence[tuple[str, str]], per_level: int, seed: int) -> list[Case]:
    """``per_level`` cases of each level, pages drawn from ``pool`` with a seeded generator.

    Source and host are two different pages sharing no run of eight words; the suspicious
    document is named after the case, the source after its page, so every (suspicious,
    source) pair is one case.
    """
    rng = np.random.default_rng(seed)
    cases: list[Case] = []
    runs: dict[int, set[tuple[str, ...]]] = {}
    for level in LEVELS:
        for c in range(per_level):
            s, h = _apart(pool, rng, runs)
            (source_name, source), (_, host) = pool[s], pool[h]
            start, end = _cut(source, rng)
            vocabulary = _TOKEN.findall(host)
            passage = obfuscate(source[start:end], level, vocabulary, rng)
            host_tokens = [m.end() for m in _TOKEN.finditer(host)]
            at = host_tokens[int(rng.random() * len(host_tokens))]
            suspicious = host[:at] + "\n\n" + passage + "\n\n" + host[at:]
            truth = Annotation(f"{level}-{c}", at + 2, at + 2 + len(passage), source_name, start, end)
            cases.append(Case(level, suspicious, source, truth))
    return cases


def detections(cases: Sequence[Case], settings: AlignSettings | None = None) -> list[list[Annotation]]:
    """The passages `align_pairs` finds in each case's pair (suspicious left, source right)."""
    words = word_spans([t for c in cases for t in (c.suspicious, c.source)])
    n = len(cases)
    found = align_pairs(words, np.arange(n) * 2, np.arange(n) * 2 + 1, settings)
    out: list[list[Annotation]] = []
    for p, case in enumerate(cases):
        out.append(
            [
                Annotation(case.truth.plg_doc, a, b, case.truth.src_doc, c, d)
                for a, b, c, d, _ in found.passages_of(p)
            ]
        )
    return out


def score(
    cases: Sequence[Case], settings: AlignSettings | None = None, *, find=None
) -> dict[str, dict[str, float]]:
    """Measures per level (and ``seconds`` spent finding passages in all cases); ``find``
    replaces the aligner (cases to detections per case)."""
    t = time.perf_counter()
    found = find(cases) if find is not None else detections(cases, settings)
    seconds = time.perf_counter() - t
    table: dict[str, dict[str, float]] = {}
    for level in LEVELS:
        picked = [i for i, c in enumerate(cases) if c.level == level]
        truth = [cases[i].truth for i in picked]
        detected = [r for i in picked for r in found[i]]
        row = measures(truth, detected)
        row.update(cases=len(picked), detections=len(detected))
        table[level] = row
    table["all"] = {"seconds": seconds}
    return table


def _print_table(table: dict[str, dict[str, float]], command: str) -> None:
    print(f"{'level':<7}{'cases':>7}{'found':>7}{'precision':>11}{'recall':>9}{'granul.':>9}{'plagdet':>9}")
    for level in LEVELS:
        r = table[level]
        print(
            f"{level:<7}{r['cases']:>7}{r['detections']:>7}{r['precision']:>11.3f}{r['recall']:>9.3f}"
            f"{r['granularity']:>9.3f}{r['plagdet']:>9.3f}"
        )
    print(f"aligned in {table['all']['seconds']:.2f} s")
    print(f"reproduce: {command}")


def main(argv: Sequence[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n", 1)[0])
    parser.add_argument("--cases", type=int, default=100, help="cases per obfuscation level")
    parser.add_argument("--pool", type=int, default=1500, help="man pages to draw from")
    parser.add_argument("--seed", type=int, default=7)
    defaults = AlignSettings()
    for name in ("seed_words", "max_gap", "max_swap", "min_words", "min_similarity"):
        kind = type(getattr(defaults, name))
        parser.add_argument(f"--{name.replace('_', '-')}", type=kind, default=getattr(defaults, name))
    args = parser.parse_args(argv)
    settings = AlignSettings(
        seed_words=args.seed_words,
        max_gap=args.max_gap,
        max_swap=args.max_swap,
        min_words=args.min_words,
        min_similarity=args.min_similarity,
    )
    pool = load_pool(args.pool)
    if len(pool) < 2:
        print("fewer than two man pages found under /usr/share/man", file=sys.stderr)
        return 1
    cases = make_cases(pool, args.cases, args.seed)
    changed = "".join(
        f" --{name.replace('_', '-')} {getattr(settings, name)}"
        for name in ("seed_words", "max_gap", "max_swap", "min_words", "min_similarity")
        if getattr(settings, name) != getattr(defaults, name)
    )
    command = (
        f"python -m benchmarks.passage_quality --cases {args.cases} --pool {args.pool} --seed {args.seed}"
    )
    print(f"{len(pool)} man pages, {len(cases)} cases, {settings}")
    _print_table(score(cases, settings), command + changed)
    return 0


if __name__ == "__main__":
    sys.exit(main())
