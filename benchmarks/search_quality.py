"""How well ``dedup similar`` finds a page from a few of its words: BM25 against TF-IDF.

Corpus: the English man pages of this machine (`benchmarks.corpus.iter_manpages`, sections
1, 5 and 8, at most three pages per name stem), one file per page, indexed with
``dedup index build`` at default settings.

Queries, built from the pages themselves, each with its page as the one right answer:

* ``title``: the description of the NAME line, after the dash ("list directory contents"
  for ls), when it has at least two words;
* ``sentence``: the first sentence of the DESCRIPTION section, when it has at least four words.

Rankings:

* ``bm25`` and ``tfidf``: the index's own search (`dedup.index.similar`), BM25 (the
  default) and the cosine of TF-IDF rows with sublinear tf, both without stop words;
* ``tfidf-before``: the ranking ``similar`` had before, TF-IDF cosine with raw tf and no
  stop words, computed with scikit-learn's ``TfidfVectorizer`` over the same texts;
* ``bm25-floor`` and ``bm25-stop-words-kept``: BM25 written out here from the formula
  (Robertson & Zaragoza 2009), once with the Robertson/Spärck Jones weight floored at zero
  instead of 1 added inside its logarithm, once with the stop words kept.

The references see the texts as the index sketched them (its template lines left out,
`dedup.index.templates`). Measures: mean reciprocal rank of the answer (an answer below rank
100 counts 0) and recall at 10 (share of queries with the answer in the first ten). A
result lists exact copies together, so an answer found as a copy of the result counts.

Run: ``python -m benchmarks.search_quality [--limit N] [--json FILE]``
"""

from __future__ import annotations

import argparse
import json
import math
import re
import sqlite3
import sys
import tempfile
import zlib
from collections import Counter
from pathlib import Path

import numpy as np

from benchmarks.corpus import iter_manpages
from dedup.features.shingles import pack_bytes
from dedup.index import build, open_index, similar
from dedup.index.search import bm25_idf
from dedup.index.stopwords import STOP_WORDS
from dedup.index.templates import load_templates
from dedup.normalize import canonical_text, token_text

DEPTH = 100


def queries(pages: list[tuple[str, str]]) -> list[tuple[str, str, str]]:
    """``(kind, query, answer id)`` for every page that has a title or a first sentence."""
    out = []
    for name, text in pages:
        doc_id = f"{name}.txt"
        found = re.search(r"NAME\n(.+?)\n", text)
        if found and " - " in found.group(1):
            title = found.group(1).split(" - ", 1)[1].strip()
            if len(token_text(canonical_text(title)).split()) >= 2:
                out.append(("title", title, doc_id))
        found = re.search(r"DESCRIPTION\n(.+?)(?:\.\s|\n)", text)
        if found and len(found.group(1).split()) >= 4:
            out.append(("sentence", found.group(1), doc_id))
    return out


def sketched_texts(index_path: str) -> tuple[list[str], dict[str, list[str]]]:
    """The texts as the index sketched them (template lines left out), and for each the
    ids of the documents that have it."""
    with open_index(index_path) as index, index.reading() as db:
        stored = load_templates(db)
    db = sqlite3.connect(index_path)
    rows = db.execute(
        "SELECT t.content_hash, c.form FROM texts t JOIN canonicals c ON c.text_id = t.text_id ORDER BY t.text_id"
    ).fetchall()
    ids: dict[str, list[str]] = {}
    for doc_id, digest in db.execute("SELECT doc_id, content_hash FROM documents WHERE status = 'present'"):
        ids.setdefault(digest, []).append(doc_id)
    db.close()
    buf, offsets = pack_bytes([zlib.decompress(form) for _, form in rows])
    out, out_offsets, _, _ = stored.boilerplate().strip(buf, offsets, stored.max_text_share)
    texts = [out[out_offsets[k] : out_offsets[k + 1]].tobytes().decode("utf-8") for k in range(len(rows))]
    return texts, {str(k): sorted(ids[digest]) for k, (digest, _) in enumerate(rows)}


class Reference:
    """Rankings written out here over the sketched texts (see the module notes)."""

    def __init__(self, texts: list[str]) -> None:
        self.words = [token_text(t).split() for t in texts]
        self.counts = [Counter(w) for w in self.words]
        self.lengths = np.array([len(w) for w in self.words], dtype=np.float64)
        self.df = Counter(term for c in self.counts for term in c)
        self.postings: dict[str, list[tuple[int, int]]] = {}
        for i, c in enumerate(self.counts):
            for term, tf in c.items():
                self.postings.setdefault(term, []).append((i, tf))
        from sklearn.feature_extraction.text import TfidfVectorizer

        self.vectorizer = TfidfVectorizer(token_pattern=r"\S+", lowercase=False, smooth_idf=True, norm="l2")
        self.rows = self.vectorizer.fit_transform([" ".join(w) for w in self.words])

    def bm25(self, query: str, floor: bool, stop: bool, k1: float = 1.2, b: float = 0.75) -> np.ndarray:
        n, avdl = len(self.counts), float(self.lengths.mean())
        scores = np.zeros(n)
        for term, qtf in Counter(token_text(canonical_text(query)).split()).items():
            if (stop and term in STOP_WORDS) or term not in self.df:
                continue
            df = self.df[term]
            weight = max(math.log((n - df + 0.5) / (df + 0.5)), 0.0) if floor else float(bm25_idf(df, n))
            for i, tf in self.postings[term]:
                scores[i] += qtf * weight * tf * (k1 + 1) / (tf + k1 * ((1 - b) + b * self.lengths[i] / avdl))
        return scores

    def tfidf_before(self, query: str) -> np.ndarray:
        q = self.vectorizer.transform([token_text(canonical_text(query))])
        return (self.rows @ q.T).toarray().ravel()


def _rank_of(order: list[list[str]], answer: str) -> int | None:
    """1-based rank of the result holding ``answer`` (a document id, copies included)."""
    for rank, ids in enumerate(order, 1):
        if answer in ids:
            return rank
    return None


def _reference_order(scores: np.ndarray, ids: dict[str, list[str]]) -> list[list[str]]:
    """Results best first, ties by first document id, as the index orders them."""
    hits = np.flatnonzero(scores > 0)
    best = sorted(hits.tolist(), key=lambda k: (-scores[k], ids[str(k)][0]))[:DEPTH]
    return [ids[str(k)] for k in best]


def measure(index_path: str, qs: list[tuple[str, str, str]], reference: Reference, ids) -> dict:
    """MRR and recall at 10 per ranking and query kind."""
    rankings = {
        "bm25": lambda q, index: _product(index, q, "bm25"),
        "tfidf": lambda q, index: _product(index, q, "tfidf"),
        "tfidf-before": lambda q, index: _reference_order(reference.tfidf_before(q), ids),
        "bm25-floor": lambda q, index: _reference_order(reference.bm25(q, floor=True, stop=True), ids),
        "bm25-stop-words-kept": lambda q, index: _reference_order(
            reference.bm25(q, floor=False, stop=False), ids
        ),
    }
    figures: dict = {}
    with open_index(index_path) as index:
        for name, rank_with in rankings.items():
            ranks: dict[str, list[int | None]] = {}
            for kind, query, answer in qs:
                ranks.setdefault(kind, []).append(_rank_of(rank_with(query, index), answer))
            figures[name] = {
                kind: {
                    "queries": len(found),
                    "mrr": round(float(np.mean([1 / r if r else 0.0 for r in found])), 4),
                    "recall_at_10": round(float(np.mean([bool(r and r <= 10) for r in found])), 4),
                }
                for kind, found in ranks.items()
            }
    return figures


def _product(index, query: str, ranking: str) -> list[list[str]]:
    try:
        results = similar(index, query, k=DEPTH, terms=0, ranking=ranking, snippets=False)
    except ValueError:  # a query of stop words only
        return []
    return [[r["document_id"], *r["copies"]] for r in results]


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--limit", type=int, default=None, help="at most this many pages")
    parser.add_argument("--json", default=None, metavar="FILE", help="also write the figures as JSON")
    args = parser.parse_args(argv)
    pages = list(iter_manpages(limit=args.limit, max_per_stem=3))
    if not pages:
        print("no man pages on this machine", file=sys.stderr)
        return 2
    qs = queries(pages)
    with tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp) / "pages"
        root.mkdir()
        for name, text in pages:
            (root / f"{name}.txt").write_text(text, encoding="utf-8")
        index_path = str(Path(tmp) / "pages.index")
        build([str(root)], index_path)
        texts, ids = sketched_texts(index_path)
        figures = measure(index_path, qs, Reference(texts), ids)
    report = {"pages": len(pages), "queries": dict(Counter(kind for kind, _, _ in qs)), "rankings": figures}
    print(f"{len(pages)} man pages; queries: {report['queries']}")
    if args.json:
        Path(args.json).write_text(json.dumps(report, indent=1, sort_keys=True) + "\n", encoding="utf-8")
    print(f"{'ranking':22} {'kind':9} {'MRR':>6} {'R@10':>6}")
    for name, by_kind in figures.items():
        for kind in ("title", "sentence"):
            print(f"{name:22} {kind:9} {by_kind[kind]['mrr']:6.3f} {by_kind[kind]['recall_at_10']:6.3f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
