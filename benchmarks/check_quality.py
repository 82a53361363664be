"""Quality of the class check on generated classes of real text, scored PAN-style.

A class is made from the English man pages of this machine (`benchmarks.corpus.iter_manpages`,
one page per name stem). Some pages are the references; the others are the hosts of the
submissions (500-1,000 words each), and no host shares a run of eight words with any
reference or other host, so only what is planted can match. Kinds of submission:

* ``none`` / ``light`` / ``heavy``: one passage of 50-300 words of a reference planted at a
  word boundary, edited as in `benchmarks.passage_quality.obfuscate` (verbatim; 2-5 % of the
  words edited; 20 % edited with runs and sentences swapped);
* ``quoted``: a passage of 30-120 words planted in quotation marks followed by a citation,
  which must come out excluded (reason ``quoted``), never counted;
* ``shared``: two submissions holding the same section of 60-200 words written by neither
  (cut from a page that is not a reference), which must be linked in one group;
* ``clean``: the host alone, which must not have more than 5 % of its text matched.

Measures: source-level recall (the planted reference has a counted passage in the
submission), and the character-level precision, recall, granularity and plagdet of
Potthast et al., COLING 2010 (`benchmarks.pan_measures`, written from memory of the paper),
of the counted passages against the planted ones, per obfuscation level. Also: the
containment of every reported pair equals |S ∩ R| / |S| computed with Python sets of word
tuples on the same words.

Targets: source recall >= 0.98 for planted copies of >= 50 words; no clean submission above
5 % matched; plagdet >= 0.9 (none, light) and >= 0.75 (heavy).

Run: ``python -m benchmarks.check_quality [--cases 25] [--pool 4000] [--seed 5]``.
"""

from __future__ import annotations

import argparse
import re
import sys
import time
import unicodedata
from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np

from benchmarks.corpus import iter_manpages
from benchmarks.pan_measures import Annotation, measures
from benchmarks.passage_quality import obfuscate
from dedup.check import CheckSettings, check

LEVELS = ("none", "light", "heavy")
_TOKEN = re.compile(r"\S+")
_WORD = re.compile(r"[^\W_]+")
_RUN = 8


@dataclass
class Class:
    """A generated class: submissions, references and what was planted."""

    submissions: list[tuple[str, str]] = field(default_factory=list)
    references: list[tuple[str, str]] = field(default_factory=list)
    cases: list[tuple[str, Annotation]] = field(default_factory=list)  # (kind, truth)
    shared: list[tuple[str, str]] = field(default_factory=list)
    clean: list[str] = field(default_factory=list)


def _runs(text: str) -> set[tuple[str, ...]]:
    words = _WORD.findall(text.lower())
    return set(zip(*(words[j:] for j in range(_RUN))))


def _apart_pages(pool: Sequence[tuple[str, str]], wanted: int) -> list[tuple[str, str]]:
    # Pages sharing no run of eight words with any page taken before them.
    seen: set[tuple[str, ...]] = set()
    out = []
    for name, text in pool:
        runs = _runs(text)
        if runs & seen:
            continue
        seen |= runs
        out.append((name, text))
        if len(out) == wanted:
            break
    return out


def _words(text: str, low: int, high: int, rng: np.random.Generator) -> str:
    tokens = _TOKEN.findall(text)
    n = min(len(tokens), low + int(rng.random() * (high - low + 1)))
    first = int(rng.random() * (len(tokens) - n + 1))
    return " ".join(tokens[first : first + n])


def _cut_span(text: str, low: int, high: int, rng: np.random.Generator) -> tuple[int, int]:
    spans = [m.span() for m in _TOKEN.finditer(text)]
    n = min(len(spans), low + int(rng.random() * (high - low + 1)))
    first = int(rng.random() * (len(spans) - n + 1))
    return spans[first][0], spans[first + n - 1][1]


def _insert(host: str, piece: str, rng: np.random.Generator) -> tuple[str, int]:
    ends = [m.end() for m in _TOKEN.finditer(host)]
    at = ends[int(rng.random() * len(ends))]
    return host[:at] + "\n\n" + piece + "\n\n" + host[at:], at + 2


def _excerpts(pages, seen: set, rng: np.random.Generator):
    # Excerpts of 500-1,000 words of the pages in turn, each sharing no run of eight words
    # with anything taken before it (references, other excerpts): blocks of 40 words that
    # hold such a run are left out (man pages share footers and option texts), and an
    # excerpt left with fewer than 400 words is passed over.
    for _, text in pages:
        tokens = _words(text, 500, 1000, rng).split(" ")
        blocks = [" ".join(tokens[i : i + 40]) for i in range(0, len(tokens), 40)]
        piece = " ".join(b for b in blocks if not _runs(b) & seen)
        runs = _runs(piece)
        if len(piece.split()) < 400 or runs & seen:
            continue
        seen |= runs
        yield piece


def make_class(pool: Sequence[tuple[str, str]], per_kind: int, seed: int, n_refs: int = 60) -> Class:
    """A class with ``per_kind`` submissions of each kind (``shared``: pairs), drawn with a seeded generator."""
    rng = np.random.default_rng(seed)
    refs = _apart_pages(pool, n_refs)
    taken = {name for name, _ in refs}
    seen: set[tuple[str, ...]] = set().union(*(_runs(text) for _, text in refs))
    out = Class(references=[(f"ref/{name}", text) for name, text in refs])
    hosts_iter = _excerpts([p for p in pool if p[0] not in taken], seen, rng)

    def host() -> str:
        piece = next(hosts_iter, None)
        if piece is None:
            raise SystemExit("too few man pages share no text with the references; ask for fewer cases")
        return piece

    for level in LEVELS:
        for c in range(per_kind):
            ref_id, source = out.references[int(rng.random() * n_refs)]
            a, b = _cut_span(source, 50, 300, rng)
            passage = obfuscate(source[a:b], level, _TOKEN.findall(source), rng)
            text, at = _insert(host(), passage, rng)
            sid = f"{level}-{c:03d}"
            out.submissions.append((sid, text))
            out.cases.append((level, Annotation(sid, at, at + len(passage), ref_id, a, b)))
    for c in range(per_kind):
        ref_id, source = out.references[int(rng.random() * n_refs)]
        a, b = _cut_span(source, 30, 120, rng)
        # An inline quotation is one paragraph, and double quotation marks inside it become
        # single ones, as a writer sets them.
        words = " ".join(source[a:b].split()).replace('"', "'")
        quoted = '"' + words + '" (Author ' + str(2000 + c % 20) + ", p. " + str(1 + c) + ")"
        text, at = _insert(host(), quoted, rng)
        sid = f"quoted-{c:03d}"
        out.submissions.append((sid, text))
        out.cases.append(("quoted", Annotation(sid, at + 1, at + 1 + len(words), ref_id, a, b)))
    for c in range(per_kind):
        section = _words(host(), 60, 200, rng)
        pair = (f"shared-{c:03d}-a", f"shared-{c:03d}-b")
        for sid in pair:
            out.submissions.append((sid, _insert(host(), section, rng)[0]))
        out.shared.append(pair)
    for c in range(per_kind):
        sid = f"clean-{c:03d}"
        out.submissions.append((sid, host()))
        out.clean.append(sid)
    return out


def python_words(text: str) -> list[tuple[str, int, int]]:
    """Normalized words of ``text`` with their character spans, in plain Python (NFKC, case
    folding, runs of letters and digits), apart from the compiled word kernel."""
    out = []
    for m in _WORD.finditer(text):
        for part in _WORD.findall(unicodedata.normalize("NFKC", m.group()).casefold()):
            out.append((part, m.start(), m.end()))
    return out


def python_shingles(text: str, k: int, left_out: Sequence[dict] = ()) -> set[tuple[str, ...]]:
    """k-word shingles of ``text`` as tuples, none holding a word that overlaps a left-out region."""
    words = python_words(text)
    keep = [not any(r["start"] < e and s < r["end"] for r in left_out) for _, s, e in words]
    return {
        tuple(w for w, _, _ in words[i : i + k]) for i in range(len(words) - k + 1) if all(keep[i : i + k])
    }


def containment_mismatches(result, texts: dict[str, str], k: int) -> list[str]:
    """Reported pairs whose share differs from |S ∩ R| / |S| computed with Python sets."""
    wrong = []
    for record in result.submissions:
        mine = python_shingles(texts[("submission", record["submission"])], k, record["left_out"])
        for s in record["sources"]:
            theirs = python_shingles(texts[(s["source_kind"], s["source"])], k)
            expected = round(len(mine & theirs) / len(mine), 6) if mine else 0.0
            if expected != s["share"]:
                wrong.append(f"{record['submission']} in {s['source']}: {s['share']} != {expected}")
    return wrong


def _detections(counted: list[dict], subs: set[str]) -> list[Annotation]:
    return [
        Annotation(
            m["submission"],
            m["submission_start"],
            m["submission_end"],
            m["source"],
            m["source_start"],
            m["source_end"],
        )
        for m in counted
        if m["submission"] in subs and m["source_kind"] == "reference"
    ]


def score(klass: Class, result) -> dict:
    """Measures per level, and the checks on quoted, shared and clean submissions."""
    counted = [m for m in result.matches if m["status"] == "counted"]
    pairs = {(m["submission"], m["source"]) for m in counted}
    table: dict = {}
    for level in LEVELS:
        truth = [a for kind, a in klass.cases if kind == level]
        row = measures(truth, _detections(counted, {a.plg_doc for a in truth}))
        row["source_recall"] = sum((a.plg_doc, a.src_doc) in pairs for a in truth) / max(len(truth), 1)
        row["cases"] = len(truth)
        table[level] = row
    quoted = [a for kind, a in klass.cases if kind == "quoted"]
    excluded = {(m["submission"], m["source"]) for m in result.matches if m["reason"] == "quoted"}
    table["quoted"] = {
        "cases": len(quoted),
        "excluded": sum(
            (a.plg_doc, a.src_doc) in excluded and (a.plg_doc, a.src_doc) not in pairs for a in quoted
        ),
    }
    group_of = {r["submission"]: r["group"] for r in result.submissions}
    table["shared"] = {
        "cases": len(klass.shared),
        "linked": sum(group_of[a] is not None and group_of[a] == group_of[b] for a, b in klass.shared),
    }
    shares = [r["share_matched"] for r in result.submissions if r["submission"] in set(klass.clean)]
    table["clean"] = {
        "cases": len(shares),
        "max_share": max(shares, default=0.0),
        "above_5_percent": sum(s > 0.05 for s in shares),
    }
    return table


def run(per_kind: int, pool_size: int, seed: int) -> tuple[dict, list[str], float]:
    """Make a class, check it, score it: (table, containment mismatches, seconds of the check)."""
    pool = list(iter_manpages(limit=pool_size, min_words=700, max_per_stem=1))
    klass = make_class(pool, per_kind, seed)
    settings = CheckSettings()
    t = time.perf_counter()
    result = check(klass.submissions, against=klass.references, settings=settings)
    seconds = time.perf_counter() - t
    return score(klass, result), containment_mismatches(result, result.texts, settings.shingle_size), seconds


def print_table(table: dict, wrong: list[str], seconds: float, command: str) -> None:
    print(
        f"{'level':<7}{'cases':>7}{'source recall':>15}{'precision':>11}{'recall':>9}{'granul.':>9}{'plagdet':>9}"
    )
    for level in LEVELS:
        r = table[level]
        print(
            f"{level:<7}{r['cases']:>7}{r['source_recall']:>15.3f}{r['precision']:>11.3f}{r['recall']:>9.3f}"
            f"{r['granularity']:>9.3f}{r['plagdet']:>9.3f}"
        )
    q, s, c = table["quoted"], table["shared"], table["clean"]
    print(f"quoted and cited copies excluded: {q['excluded']}/{q['cases']}")
    print(f"pairs sharing a section linked:   {s['linked']}/{s['cases']}")
    print(
        f"clean submissions above 5%:        {c['above_5_percent']}/{c['cases']} (largest share {c['max_share']:.3f})"
    )
    print(f"containment equal to Python sets:  {'yes' if not wrong else 'NO: ' + '; '.join(wrong[:5])}")
    print(f"check ran in {seconds:.2f} s")
    print(f"reproduce: {command}")


def main(argv: Sequence[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n", 1)[0])
    parser.add_argument("--cases", type=int, default=25, help="submissions of each kind")
    parser.add_argument("--pool", type=int, default=4000, help="man pages to draw from")
    parser.add_argument("--seed", type=int, default=5)
    args = parser.parse_args(argv)
    table, wrong, seconds = run(args.cases, args.pool, args.seed)
    print_table(
        table,
        wrong,
        seconds,
        f"python -m benchmarks.check_quality --cases {args.cases} --pool {args.pool} --seed {args.seed}",
    )
    return 0


if __name__ == "__main__":
    sys.exit(main())
