"""A planted-duplicate corpus and its ground truth, for measuring detection quality.

The corpus is made of families. A family is one base document and several copies of
it, each made with exactly one named edit operation (or the ``mixed`` combination), so
that quality can be reported per operation:

    substitute, insert, delete   words replaced, added or removed at a given rate
    reorder_sentences            sentences shuffled inside some paragraphs
    reorder_paragraphs           some paragraphs moved
    add_paragraphs               paragraphs of an unrelated document added
    remove_paragraphs            paragraphs removed
    template                     a shared header and footer wrapped around the text
    html                         the text served as an HTML page with site navigation and footer
    whitespace_case              whitespace and letter case changed (same normalized text)
    punctuation                  punctuation changed (same words, different normalized text)
    mixed                        light word edits plus two structural operations

Beside the families there are documents that must *not* be reported as copies of
them: unrelated base documents (distractors; on man pages, many share a topic with a
family, e.g. two ``git-*`` pages), constructed *siblings* that share a minority of
passages with a family base (quotations on the same topic), and *merged* documents
made of two family bases one after the other, which belong to both families.

Ground truth is computed here, independently of the tool's hashing and kernels: the
shingles are the strings themselves (``dedup.features.shingle_strings`` of
``dedup.normalize.token_text(canonical_text(text))``, which *defines* the measure),
counted with ``sklearn.feature_extraction.text.CountVectorizer`` and a scipy sparse
product over every pair of documents; TF-IDF cosine comes from
``sklearn.feature_extraction.text.TfidfVectorizer`` (smoothed idf, l2 rows, fitted on
the distinct texts, as the tool documents its own cosine). Where the audit leaves
boilerplate lines out of its shingles (lines found in many distinct texts), a second
table scores the texts without them, with the rule counted here from its documented
definition (`boilerplate_lines`).
"""

from __future__ import annotations

import hashlib
import html
import math
import re
import textwrap
from collections import Counter
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import scipy.sparse as sp
from sklearn.feature_extraction.text import CountVectorizer, TfidfVectorizer

from benchmarks.corpus import iter_manpages, synthetic_documents
from dedup.features import shingle_strings
from dedup.normalize import canonical_text, token_text

__all__ = [
    "OPERATIONS",
    "Document",
    "PlantedCorpus",
    "PairTruth",
    "build_corpus",
    "base_pool",
    "compute_truth",
    "features_text",
    "feature_texts",
    "boilerplate_lines",
]

SHINGLE_SIZE = 5
OPERATIONS = (
    "substitute",
    "insert",
    "delete",
    "reorder_sentences",
    "reorder_paragraphs",
    "add_paragraphs",
    "remove_paragraphs",
    "template",
    "html",
    "whitespace_case",
    "punctuation",
    "mixed",
)
# Intensity drawn uniformly per copy: a word-edit rate or a share of paragraphs.
_INTENSITY = {
    "substitute": (0.002, 0.07),
    "insert": (0.002, 0.07),
    "delete": (0.002, 0.07),
    "reorder_sentences": (0.1, 1.0),
    "reorder_paragraphs": (0.1, 1.0),
    "add_paragraphs": (0.05, 0.6),
    "remove_paragraphs": (0.05, 0.5),
    "punctuation": (0.05, 0.5),
    "mixed": (0.002, 0.03),
}
_MIXED_STRUCTURE = (
    "reorder_sentences",
    "reorder_paragraphs",
    "add_paragraphs",
    "remove_paragraphs",
    "template",
    "whitespace_case",
    "punctuation",
)
# Pages of the source pool that contain this much of one another are natural
# near-duplicates outside any family; only the first of them (in seeded order) is kept.
POOL_CONTAINMENT_LIMIT = 0.5
# Pairs whose best score is below this are not stored; every threshold measured is above it.
STORE_FLOOR = 0.3

_TEMPLATES = (
    (
        "Internal documentation portal. This page is part of the operations handbook; if you found it "
        "through search, check that you are reading the current revision before you act on it.",
        "Last reviewed by the documentation team. Report mistakes through the help desk, quoting the page "
        "title. Printed copies are not controlled.",
    ),
    (
        "Mirror notice: the text below was copied from a public reference so that it stays available "
        "offline. Formatting may differ from the original and links may not work.",
        "This mirror is refreshed every night. Questions about the mirror itself go to the site "
        "administrators, questions about the content to its original authors.",
    ),
    (
        "Forwarded for review. Please read the document below and send comments to the list before the "
        "next meeting, marking each comment with the section it refers to.",
        "You are receiving this because you subscribed to the review list. To stop receiving these "
        "messages, write to the list owner with the word unsubscribe in the subject.",
    ),
)
_SITES = (
    (
        "Home Guides Reference Downloads Community Support",
        "Copyright the site authors. Privacy Terms Contact",
    ),
    ("Start Manuals Tutorials Release notes Forum Search", "Hosted by volunteers. Imprint Accessibility"),
)
_PARA_SPLIT_RE = re.compile(r"\n[ \t]*\n+")
_SENTENCE_SPLIT_RE = re.compile(r"(?<=[.!?])\s+(?=[A-Z(\"'])")
_WORD_PARTS_RE = re.compile(r"^([^\w]*)(.*?)([^\w]*)$", re.S)
_ALPHA_WORD_RE = re.compile(r"[A-Za-z][a-z]+")


@dataclass(frozen=True)
class Document:
    """One document of the corpus and what was done to make it.

    Attributes
    ----------
    doc_id : str
        Path relative to the corpus folder, as the tool reports it.
    content : str
        The file's content (HTML markup for ``html`` copies).
    visible : str
        The document's text as a reader takes it (for an HTML page, the article without
        head, navigation and footer); ground-truth scores are computed on it.
    family : int
        Primary family: the base document it derives from, or its own number.
    families : tuple of int
        Every family it belongs to (two for a merged document).
    role : {"base", "copy", "merged", "sibling", "distractor"}
    operation : str
        Edit operation of a copy (see `OPERATIONS`), ``"merge"``, or ``""``.
    intensity : float
        Rate or share used by the operation (0 where it has none).
    changed : bool
        Whether the operation changed the text at all.
    """

    doc_id: str
    content: str
    visible: str
    family: int
    families: tuple[int, ...]
    role: str
    operation: str
    intensity: float
    changed: bool = True


@dataclass
class PlantedCorpus:
    """Documents (sorted by id) with how the corpus was made."""

    documents: list[Document]
    source: str
    seed: int
    pool_size: int
    pool_dropped: int

    def write(self, folder: Path) -> Path:
        """Write every document under ``folder``; returns the folder."""
        for doc in self.documents:
            path = folder / doc.doc_id
            path.parent.mkdir(parents=True, exist_ok=True)
            path.write_bytes(doc.content.encode("utf-8"))
        return folder

    @property
    def ids(self) -> list[str]:
        return [d.doc_id for d in self.documents]

    def count(self, role: str) -> int:
        """Number of documents with the given role."""
        return sum(1 for d in self.documents if d.role == role)


# -- text helpers ---------------------------------------------------------------------


def features_text(text: str) -> str:
    """The word text shingles are made from, exactly as the tool defines it."""
    return token_text(canonical_text(text))


def _lines(text: str) -> list[str]:
    """Non-empty lines of a text, each normalized like a whole text."""
    out = []
    for line in text.splitlines():
        canonical = canonical_text(line)
        if canonical:
            out.append(canonical)
    return out


def boilerplate_lines(texts: Sequence[str], share: float, min_texts: int) -> set[str]:
    """Lines found in at least ``max(min_texts, ceil(share * n))`` of the n distinct texts.

    This is the boilerplate rule the audit documents (``dedup.normalize.boilerplate``),
    counted here on our own so the ground truth does not depend on the tool's code.
    """
    distinct: dict[str, str] = {}
    for text in texts:
        distinct.setdefault(canonical_text(text), text)
    counts: Counter[str] = Counter()
    for text in distinct.values():
        counts.update(set(_lines(text)))
    limit = max(min_texts, math.ceil(share * len(distinct)))
    return {line for line, count in counts.items() if count >= limit}


def feature_texts(texts: Sequence[str], boilerplate: tuple[float, int] | None = None) -> list[str]:
    """The word text that is shingled for each text.

    Without ``boilerplate``: the whole text. With ``(share, min_texts)``: the text without
    its boilerplate lines (the whole text when every line is boilerplate). Texts with the
    same normalized text share the first one's word text, as exact copies share one
    sketch in the audit.
    """
    if boilerplate is None:
        return [features_text(t) for t in texts]
    common = boilerplate_lines(texts, *boilerplate)
    first: dict[str, str] = {}
    out = []
    for text in texts:
        key = canonical_text(text)
        if key not in first:
            lines = _lines(text)
            kept = [line for line in lines if line not in common]
            first[key] = token_text(" ".join(kept or lines))
        out.append(first[key])
    return out


def _paragraphs(text: str) -> list[str]:
    return [p.strip("\n") for p in _PARA_SPLIT_RE.split(text.strip("\n")) if p.strip()]


def _join(paragraphs: Sequence[str]) -> str:
    return "\n\n".join(paragraphs) + "\n"


class _WordSource:
    """Replacement words drawn with their frequency in the base documents."""

    def __init__(self, texts: Sequence[str]) -> None:
        counts = Counter(w.lower() for t in texts for w in _ALPHA_WORD_RE.findall(t))
        self.words = sorted(counts) or ["text"]
        cdf = np.cumsum([counts[w] or 1 for w in self.words]).astype(np.float64)
        self.cdf = cdf / cdf[-1]

    def draw(self, rng: np.random.Generator) -> str:
        i = int(np.searchsorted(self.cdf, rng.random(), side="right"))
        return self.words[min(i, len(self.words) - 1)]


def _match_case(template: str, word: str) -> str:
    if len(template) > 1 and template.isupper():
        return word.upper()
    if template[:1].isupper():
        return word[:1].upper() + word[1:]
    return word


# -- edit operations ------------------------------------------------------------------


def word_edits(
    text: str, rate: float, kinds: Sequence[str], rng: np.random.Generator, source: _WordSource
) -> str:
    """Apply ``max(1, round(rate * words))`` word edits, each of a kind drawn from ``kinds``.

    Paragraph breaks are kept; words inside a paragraph are joined by single spaces
    (whitespace does not change the normalized text).
    """
    paras = [p.split() for p in _paragraphs(text)]
    where = [(i, j) for i, words in enumerate(paras) for j in range(len(words))]
    if not where:
        return text
    k = min(len(where), max(1, int(round(rate * len(where)))))
    chosen = sorted(rng.choice(len(where), size=k, replace=False).tolist(), reverse=True)
    for position in chosen:  # right to left, so earlier positions stay valid
        i, j = where[position]
        kind = kinds[int(rng.integers(len(kinds)))]
        if kind == "substitute":
            pre, core, post = _WORD_PARTS_RE.match(paras[i][j]).groups()
            new = source.draw(rng)
            while new == core.lower() and len(source.words) > 1:
                new = source.draw(rng)
            paras[i][j] = pre + _match_case(core, new) + post if core else new
        elif kind == "insert":
            paras[i].insert(j, source.draw(rng))
        elif len(paras[i]) > 1 or len(paras) > 1:  # delete, never emptying the text
            del paras[i][j]
    return _join([" ".join(words) for words in paras if words])


def _shuffled(items: list, rng: np.random.Generator) -> list:
    """A permutation of ``items`` that differs from the original order when it can."""
    if len(items) < 2:
        return list(items)
    order = rng.permutation(len(items)).tolist()
    if order == sorted(order):
        order = order[1:] + order[:1]
    return [items[i] for i in order]


def reorder_sentences(text: str, share: float, rng: np.random.Generator) -> tuple[str, bool]:
    """Shuffle the sentences (or, in list-like text, the lines) of a share of the paragraphs."""
    paras = _paragraphs(text)
    units = [_SENTENCE_SPLIT_RE.split(" ".join(p.split())) for p in paras]
    joiner = " "
    eligible = [i for i, u in enumerate(units) if len(u) >= 2]
    if not eligible:
        units = [p.split("\n") for p in paras]
        joiner = "\n"
        eligible = [i for i, u in enumerate(units) if len(u) >= 2]
    if not eligible:
        return text, False
    k = max(1, int(round(share * len(eligible))))
    for i in rng.choice(eligible, size=min(k, len(eligible)), replace=False).tolist():
        paras[i] = joiner.join(_shuffled(units[i], rng))
    return _join(paras), True


def reorder_paragraphs(text: str, share: float, rng: np.random.Generator) -> tuple[str, bool]:
    """Move a share of the paragraphs (at least two) to each other's places."""
    paras = _paragraphs(text)
    if len(paras) < 2:
        return text, False
    k = min(len(paras), max(2, int(round(share * len(paras)))))
    slots = sorted(rng.choice(len(paras), size=k, replace=False).tolist())
    moved = _shuffled([paras[i] for i in slots], rng)
    for slot, para in zip(slots, moved):
        paras[slot] = para
    return _join(paras), True


def add_paragraphs(text: str, share: float, donor: str, rng: np.random.Generator) -> tuple[str, bool]:
    """Insert paragraphs of ``donor`` at random places until about ``share`` more words are added."""
    paras = _paragraphs(text)
    donor_paras = _paragraphs(donor)
    if not donor_paras:
        return text, False
    wanted = max(1, int(round(share * len(text.split()))))
    added = 0
    start = int(rng.integers(len(donor_paras)))
    for step in range(len(donor_paras)):
        if added >= wanted:
            break
        para = donor_paras[(start + step) % len(donor_paras)]
        paras.insert(int(rng.integers(len(paras) + 1)), para)
        added += len(para.split())
    return _join(paras), True


def remove_paragraphs(text: str, share: float, rng: np.random.Generator) -> tuple[str, bool]:
    """Remove a share of the paragraphs (at least one, never all)."""
    paras = _paragraphs(text)
    if len(paras) < 2:
        return text, False
    k = min(len(paras) - 1, max(1, int(round(share * len(paras)))))
    gone = set(rng.choice(len(paras), size=k, replace=False).tolist())
    return _join([p for i, p in enumerate(paras) if i not in gone]), True


def wrap_template(text: str, rng: np.random.Generator) -> tuple[str, bool]:
    """Put one of a few shared headers and footers around the text (shared boilerplate)."""
    header, footer = _TEMPLATES[int(rng.integers(len(_TEMPLATES)))]
    return _join([header, text.strip("\n"), footer]), True


def whitespace_case(text: str, rng: np.random.Generator) -> tuple[str, bool]:
    """Change letter case and whitespace only: the normalized text stays the same."""
    variant = int(rng.integers(4))
    if variant == 0:
        out = text.lower()
    elif variant == 1:
        lines = text.split("\n")
        flags = rng.random(len(lines)) < 0.3
        out = "\n".join(line.upper() if f else line for line, f in zip(lines, flags.tolist()))
    elif variant == 2:
        width = int(rng.integers(40, 100))
        out = _join(
            [
                textwrap.fill(" ".join(p.split()), width, break_long_words=False, break_on_hyphens=False)
                for p in _paragraphs(text)
            ]
        )
    else:
        out = "\n".join("\t" + "  ".join(line.split(" ")) for line in text.split("\n")).replace("\n", "\r\n")
    return out, out != text


_PUNCTUATION_SWAPS = (
    (". ", "; "),
    (", ", " "),
    ('"', "\u201c"),
    ("'", "\u2019"),
    (" - ", " \u2014 "),
    (":", " -"),
)


def punctuation(text: str, share: float, rng: np.random.Generator) -> tuple[str, bool]:
    """Change a share of punctuation marks; the words, and so the shingles, stay the same."""
    out = text
    for old, new in _PUNCTUATION_SWAPS:
        pieces = out.split(old)
        if len(pieces) < 2:
            continue
        flags = rng.random(len(pieces) - 1) < share
        rebuilt = [pieces[0]]
        for piece, flag in zip(pieces[1:], flags.tolist()):
            rebuilt.append(new if flag else old)
            rebuilt.append(piece)
        out = "".join(rebuilt)
    if canonical_text(out) == canonical_text(text):
        out = out.rstrip() + " !\n"
    return out, True


def html_page(text: str, title: str, rng: np.random.Generator) -> tuple[str, str]:
    """Serve the text as an HTML page with site navigation; returns ``(markup, page text)``.

    The page text is the article: the head (title, style, script) is never text, and
    the site navigation and footer, which repeat on every page of a site, are page
    furniture rather than the page's own text (the rule the tool's HTML reader follows).
    So an HTML copy has the same text as its base.
    """
    nav, footer = _SITES[int(rng.integers(len(_SITES)))]
    paras = _paragraphs(text)
    body = "\n".join(f"<p>{html.escape(p)}</p>" for p in paras)
    markup = (
        '<!DOCTYPE html>\n<html><head><meta charset="utf-8">'
        f"<title>{html.escape(title)}</title>"
        "<style>body { font-family: sans-serif } nav a { margin: 0 1em }</style>"
        "<script>window.analytics = window.analytics || []; analytics.push('page');</script>"
        f"</head><body>\n<nav>{html.escape(nav)}</nav>\n<main>\n{body}\n</main>\n"
        f"<footer>{html.escape(footer)}</footer>\n</body></html>\n"
    )
    return markup, _join(paras)


# -- the corpus -----------------------------------------------------------------------


@dataclass
class _Context:
    rng: np.random.Generator
    words: _WordSource
    donors: list[str]


def _apply(op: str, text: str, intensity: float, ctx: _Context) -> tuple[str, bool]:
    """Apply one structural or word operation to plain text."""
    rng = ctx.rng
    if op in ("substitute", "insert", "delete"):
        out = word_edits(text, intensity, (op,), rng, ctx.words)
        return out, features_text(out) != features_text(text)
    if op == "reorder_sentences":
        return reorder_sentences(text, intensity, rng)
    if op == "reorder_paragraphs":
        return reorder_paragraphs(text, intensity, rng)
    if op == "add_paragraphs":
        return add_paragraphs(text, intensity, ctx.donors[int(rng.integers(len(ctx.donors)))], rng)
    if op == "remove_paragraphs":
        return remove_paragraphs(text, intensity, rng)
    if op == "template":
        return wrap_template(text, rng)
    if op == "whitespace_case":
        return whitespace_case(text, rng)
    if op == "punctuation":
        return punctuation(text, intensity, rng)
    raise ValueError(f"unknown operation {op!r}")


def make_copy(op: str, base: str, title: str, ctx: _Context) -> tuple[str, str, float, bool]:
    """One copy of ``base`` made with ``op``: ``(content, visible text, intensity, changed)``."""
    low, high = _INTENSITY.get(op, (0.0, 0.0))
    intensity = float(ctx.rng.uniform(low, high)) if high > 0 else 0.0
    if op == "html":
        markup, visible = html_page(base, title, ctx.rng)
        return markup, visible, 0.0, True
    if op == "mixed":
        text = word_edits(base, intensity, ("substitute", "insert", "delete"), ctx.rng, ctx.words)
        for extra in ctx.rng.choice(_MIXED_STRUCTURE, size=2, replace=False).tolist():
            low, high = _INTENSITY.get(extra, (0.0, 0.0))
            text, _ = _apply(extra, text, float(ctx.rng.uniform(low, min(high, 0.3))), ctx)
        return text, text, intensity, True
    text, changed = _apply(op, base, intensity, ctx)
    return text, text, intensity, changed


def _sibling(base: str, filler: str, share: float, rng: np.random.Generator) -> str:
    """A document on the same topic: a share of the base's paragraphs among other text."""
    paras = _paragraphs(base)
    k = max(1, int(round(share * len(paras))))
    kept = sorted(rng.choice(len(paras), size=min(k, len(paras)), replace=False).tolist())
    out = [paras[i] for i in kept]
    target = len(base.split())
    for para in _paragraphs(filler):
        if sum(len(p.split()) for p in out) >= target:
            break
        out.insert(int(rng.integers(len(out) + 1)), para)
    return _join(out)


def _shingle_incidence(texts: Sequence[str]) -> sp.csr_matrix:
    """Binary documents × shingle-strings matrix (``sklearn`` ``CountVectorizer``)."""

    def analyzer(text: str) -> list[str]:
        return shingle_strings(text, SHINGLE_SIZE)

    vectorizer = CountVectorizer(analyzer=analyzer, binary=True, dtype=np.int32)
    return vectorizer.fit_transform(list(texts)).tocsr()


def _curate(pool: list[tuple[str, str]], rng: np.random.Generator) -> tuple[list[tuple[str, str]], int]:
    """Shuffle the pool and drop pages containing half or more of an earlier kept page (or vice versa)."""
    order = rng.permutation(len(pool)).tolist()
    pool = [pool[i] for i in order]
    incidence = _shingle_incidence([features_text(t) for _, t in pool])
    sizes = np.asarray(incidence.sum(axis=1)).ravel().astype(np.float64)
    shared = sp.triu(incidence @ incidence.T, k=1).tocoo()
    smaller = np.maximum(np.minimum(sizes[shared.row], sizes[shared.col]), 1.0)
    close = shared.data / smaller >= POOL_CONTAINMENT_LIMIT
    dropped: set[int] = set()
    for a, b in sorted(zip(shared.row[close].tolist(), shared.col[close].tolist())):
        if a not in dropped:
            dropped.add(b)
    return [p for i, p in enumerate(pool) if i not in dropped], len(dropped)


def base_pool(
    source: str, needed: int, seed: int, *, max_words: int = 3000, min_words: int = 80
) -> tuple[list[tuple[str, str]], int]:
    """Base documents ``(name, text)`` in seeded order, natural near-duplicates removed.

    Parameters
    ----------
    source : {"manpages", "synthetic"}
        This machine's man pages (at most 10 per name stem, as `benchmarks.corpus`
        recommends) or invented Zipf-law text.
    needed : int
        How many documents the corpus needs (for synthetic text, how many to make).
    max_words, min_words : int
        Man pages outside this length range are left out (very long pages only slow
        the run down; very short ones are mostly headers).

    Returns
    -------
    list of (str, str), int
        The pool and how many near-duplicate pages were dropped from it.
    """
    rng = np.random.default_rng([seed, 1])
    if source == "manpages":
        raw = [
            (name, text)
            for name, text in iter_manpages(None, min_words=min_words, max_per_stem=10)
            if len(text.split()) <= max_words
        ]
    elif source == "synthetic":
        raw = []
        for name, text in synthetic_documents(needed + needed // 10 + 5, seed, doc_bytes=3000):
            paras = _paragraphs(text)
            keep = int(rng.integers(min(3, len(paras)), len(paras) + 1))
            raw.append((name, _join(paras[:keep])))
    else:
        raise ValueError(f"unknown source {source!r}")
    return _curate(raw, rng)


def _ops_of_family(family: int, copies: int) -> list[str]:
    """Operations for one family, rotating through `OPERATIONS` so each is used equally often."""
    step = copies + 1 if np.gcd(copies + 1, len(OPERATIONS)) == 1 else 1
    return [OPERATIONS[(family * step + j) % len(OPERATIONS)] for j in range(copies)]


def build_corpus(
    source: str = "manpages",
    *,
    n_families: int = 300,
    copies_per_family: int = 6,
    n_merged: int = 30,
    n_siblings: int = 100,
    n_distractors: int = 400,
    seed: int = 0,
) -> PlantedCorpus:
    """Make families of planted copies, merged documents, siblings and distractors.

    Raises
    ------
    ValueError
        The source has fewer usable documents than the corpus needs.
    """
    needed = n_families + n_distractors + n_siblings
    pool, dropped = base_pool(source, needed, seed)
    if len(pool) < needed:
        raise ValueError(
            f"the {source} pool has {len(pool)} usable documents, {needed} needed "
            f"({n_families} families + {n_distractors} distractors + {n_siblings} sibling fillers)"
        )
    rng = np.random.default_rng([seed, 2])
    bases = pool[:n_families]
    distractors = pool[n_families : n_families + n_distractors]
    fillers = pool[n_families + n_distractors : needed]
    ctx = _Context(rng, _WordSource([t for _, t in pool[:needed]]), [t for _, t in (distractors or fillers)])
    docs: list[Document] = []
    for f, (name, text) in enumerate(bases):
        docs.append(Document(f"families/{f:05d}/base.txt", text, text, f, (f,), "base", "", 0.0))
        for j, op in enumerate(_ops_of_family(f, copies_per_family)):
            content, visible, intensity, changed = make_copy(op, text, name, ctx)
            ext = "html" if op == "html" else "txt"
            docs.append(
                Document(
                    f"families/{f:05d}/copy-{j}-{op}.{ext}",
                    content,
                    visible,
                    f,
                    (f,),
                    "copy",
                    op,
                    intensity,
                    changed,
                )
            )
    for m in range(n_merged if n_families >= 2 else 0):
        a, b = sorted(rng.choice(n_families, size=2, replace=False).tolist())
        text = _join([bases[a][1].strip("\n"), bases[b][1].strip("\n")])
        docs.append(Document(f"merged/m{m:04d}.txt", text, text, a, (a, b), "merged", "merge", 0.0))
    next_family = n_families
    for s, (_, filler) in enumerate(fillers):
        f = int(rng.integers(n_families))
        share = float(rng.uniform(0.15, 0.4))
        text = _sibling(bases[f][1], filler, share, rng)
        docs.append(
            Document(
                f"siblings/s{s:04d}-of-{f:05d}.txt",
                text,
                text,
                next_family,
                (next_family,),
                "sibling",
                "",
                share,
            )
        )
        next_family += 1
    for d, (_name, text) in enumerate(distractors):
        docs.append(
            Document(
                f"distractors/d{d:05d}.txt", text, text, next_family, (next_family,), "distractor", "", 0.0
            )
        )
        next_family += 1
    docs.sort(key=lambda doc: doc.doc_id)
    return PlantedCorpus(docs, source, seed, len(pool), dropped)


# -- ground truth ---------------------------------------------------------------------


@dataclass(frozen=True)
class PairTruth:
    """Exact scores of every pair worth knowing, keyed ``left * n_docs + right`` (left < right).

    Stored: every pair of the same family (planted, whatever its score) and every
    other pair whose best score reaches `STORE_FLOOR`; any pair not stored scores
    below the floor on every measure.

    Attributes
    ----------
    keys : ndarray of int64, sorted
    jaccard, containment, cosine : ndarray of float
        ``containment`` is the larger of the two directions, as the tool decides.
    planted : ndarray of bool
        The two documents share a family.
    kind : ndarray of str
        For a planted pair: the copy's operation for base–copy, ``merge`` for
        base–merged, ``merged vs copy``, or ``two copies``; ``""`` for other pairs.
    """

    n_docs: int
    keys: np.ndarray
    jaccard: np.ndarray
    containment: np.ndarray
    cosine: np.ndarray
    planted: np.ndarray
    kind: np.ndarray

    def score(self, measure: str) -> np.ndarray:
        """The exact deciding score of every stored pair for ``measure``."""
        return {"jaccard": self.jaccard, "containment": self.containment, "cosine": self.cosine}[measure]

    def positions(self, keys: np.ndarray) -> np.ndarray:
        """Index of each key in the table, or -1 where the pair is not stored."""
        keys = np.asarray(keys, dtype=np.int64)
        where = np.searchsorted(self.keys, keys)
        where = np.minimum(where, max(self.keys.shape[0] - 1, 0))
        found = self.keys.shape[0] > 0
        hit = (self.keys[where] == keys) if found else np.zeros(keys.shape, bool)
        return np.where(hit, where, -1)

    def pairs(self, mask: np.ndarray) -> list[tuple[int, int]]:
        """Index pairs of the stored pairs selected by ``mask``."""
        chosen = self.keys[mask]
        return list(zip((chosen // self.n_docs).tolist(), (chosen % self.n_docs).tolist()))


def _planted_pairs(corpus: PlantedCorpus) -> tuple[np.ndarray, np.ndarray]:
    """Keys and kinds of every pair of documents sharing a family."""
    members: dict[int, list[int]] = {}
    for i, doc in enumerate(corpus.documents):
        for f in doc.families:
            members.setdefault(f, []).append(i)
    n = len(corpus.documents)
    kinds: dict[int, str] = {}
    for group in members.values():
        for x in range(len(group)):
            for y in range(x + 1, len(group)):
                a, b = group[x], group[y]
                kinds[a * n + b] = _pair_kind(corpus.documents[a], corpus.documents[b])
    keys = np.array(sorted(kinds), dtype=np.int64)
    return keys, np.array([kinds[k] for k in keys.tolist()], dtype=object)


def _pair_kind(a: Document, b: Document) -> str:
    roles = {a.role, b.role}
    if roles == {"base", "copy"}:
        return a.operation or b.operation
    if roles == {"base", "merged"}:
        return "merge"
    if "merged" in roles:
        return "merged vs copy"
    return "two copies"


def _tfidf_rows(visible: Sequence[str], words: Sequence[str]) -> sp.csr_matrix:
    """TF-IDF rows of every word text, idf fitted once per distinct normalized text."""
    distinct: dict[str, str] = {}
    for text, word_text in zip(visible, words):
        distinct.setdefault(canonical_text(text), word_text)
    vectorizer = TfidfVectorizer(
        analyzer=str.split, smooth_idf=True, norm="l2", sublinear_tf=False, lowercase=False
    )
    vectorizer.fit(list(distinct.values()))
    return vectorizer.transform(list(words)).tocsr()


def compute_truth(corpus: PlantedCorpus, boilerplate: tuple[float, int] | None = None) -> PairTruth:
    """Exact Jaccard, containment and cosine of every pair, by an exhaustive computation.

    Parameters
    ----------
    boilerplate : (float, int) or None
        ``(share, min_texts)`` of the boilerplate rule, to score the texts the audit
        shingles with that rule on; ``None`` scores the whole texts.

    Notes
    -----
    Cost: one sparse product over shingle strings, O(sum over shingles of df²), and
    one over TF-IDF rows; a few seconds for a few thousand man pages.
    """
    visible = [d.visible for d in corpus.documents]
    texts = feature_texts(visible, boilerplate)
    n = len(texts)
    incidence = _shingle_incidence(texts)
    sizes = np.asarray(incidence.sum(axis=1)).ravel().astype(np.float64)
    shared = sp.triu(incidence @ incidence.T, k=1).tocsr()
    rows = _tfidf_rows(visible, texts)
    cosines = sp.triu(rows @ rows.T, k=1).tocsr()
    shared_coo = shared.tocoo()
    small = np.minimum(sizes[shared_coo.row], sizes[shared_coo.col])
    big_enough = shared_coo.data / np.maximum(small, 1.0) >= STORE_FLOOR
    planted_keys, planted_kinds = _planted_pairs(corpus)
    cos_coo = cosines.tocoo()
    close = cos_coo.data >= STORE_FLOOR
    keys = np.unique(
        np.concatenate(
            [
                shared_coo.row[big_enough].astype(np.int64) * n + shared_coo.col[big_enough],
                cos_coo.row[close].astype(np.int64) * n + cos_coo.col[close],
                planted_keys,
            ]
        )
    )
    left, right = keys // n, keys % n
    common = np.asarray(shared[left, right]).ravel().astype(np.float64)
    union = sizes[left] + sizes[right] - common
    jaccard = np.where(union > 0, common / np.maximum(union, 1.0), 0.0)
    containment = common / np.maximum(np.minimum(sizes[left], sizes[right]), 1.0)
    cosine = np.asarray(cosines[left, right]).ravel() if keys.size else np.zeros(0)
    planted = np.isin(keys, planted_keys)
    kind = np.full(keys.shape[0], "", dtype=object)
    kind[planted] = planted_kinds[np.searchsorted(planted_keys, keys[planted])]
    return PairTruth(n, keys, jaccard, containment, np.clip(cosine, 0.0, 1.0), planted, kind)


def corpus_digest(corpus: PlantedCorpus) -> str:
    """Short digest of every document's id and content (to tell two corpora apart)."""
    digest = hashlib.blake2b(digest_size=8)
    for doc in corpus.documents:
        digest.update(doc.doc_id.encode() + b"\0" + doc.content.encode() + b"\n")
    return digest.hexdigest()
