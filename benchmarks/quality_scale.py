"""Candidate recall of every measure above 10,000 texts, against an exhaustive exact truth.

The corpus is real text of this machine — every English man page (sections 1 to 8)
turned to text by `benchmarks.corpus` — with two kinds of planted documents:

* *edited copies*: a page with words substituted, inserted and deleted at a rate drawn
  log-uniformly from 0.2% to 15% (high cosine; Jaccard and containment from high to low);
* *reuse*: a host page (no other part of the corpus) with a passage of one to three
  paragraphs of a source page pasted in (containment of the passage in the host is low
  or middling, Jaccard low).

Ground truth is computed here, without the tool's hashing or kernels, over every pair:
the texts are the word texts the audit shingles (`benchmarks.quality_truth.feature_texts`
with the audit's boilerplate rule), shingles are tuples of five word numbers (exact, no
hashing) and TF-IDF rows come from scikit-learn's ``TfidfVectorizer`` (smoothed idf, l2
rows, fitted on the distinct texts, as the tool documents its cosine). All pairs are
scored by products split in two: the few hundred most frequent columns as dense blocks
multiplied with BLAS, the rest as sparse products, row block by row block — together
the full product, exactly.

Each measure is audited with its defaults (``--candidates auto``) and its candidate
recall measured: the share of truth pairs at or above the threshold that the audit
reports (every reported pair is verified exactly, so a true pair that is not reported
was never a candidate). It is printed beside the recall the audit states in
``audit.json``. The whole command is timed as users run it (``dedup audit DIR --measure
M --out DIR --quiet``), optionally beside another checkout of the package
(``--before PATH``: its folder is put first on ``PYTHONPATH``).

Run: ``python -m benchmarks.quality_scale [--corpus DIR] [--kind pages|pieces] [--before PATH]``
(``--help`` lists the options). ``--kind pieces`` cuts every page into pieces of about
``--words`` words (whole paragraphs), with ``--max-per-stem`` capping generated families
of pages such as ``gcloud_*``: pieces of 80 words of every page give about 120,000 texts,
to time the audit at that size (``--no-truth``).
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import scipy.sparse as sp
from sklearn.feature_extraction.text import TfidfVectorizer

from benchmarks.corpus import iter_manpages, synthetic_documents
from benchmarks.quality_truth import _paragraphs, _WordSource, feature_texts, word_edits
from dedup.normalize import canonical_text

__all__ = [
    "ScaleCorpus",
    "build_scale_corpus",
    "plant_corpus",
    "manpage_pieces",
    "build_pieces_corpus",
    "read_scale_corpus",
    "TruthPairs",
    "distinct_texts",
    "shingle_matrix",
    "tfidf_matrix",
    "full_products",
    "compute_truth",
    "reported_pairs",
    "measured_recall",
    "main",
]

SECTIONS = ("1", "2", "3", "4", "5", "6", "7", "8")
SHINGLE_SIZE = 5
# The measures and thresholds checked: the defaults, and the low thresholds users reported.
CHECKS = (
    ("jaccard", 0.8),
    ("containment", 0.8),
    ("containment", 0.1),
    ("cosine", 0.8),
    ("cosine", 0.5),
    ("cosine", 0.3),
)
# Columns with more non-zero entries than this go to the dense part of the truth products.
DENSE_COLUMNS = 512
ROW_BLOCK = 2048


@dataclass
class ScaleCorpus:
    """The written corpus: file names (relative, sorted as the audit sorts ids), texts and plants."""

    folder: Path
    ids: list[str]
    texts: list[str]
    planted: list[tuple[str, str, str]]  # (kind, planted document, source document)


def _write(folder: Path, name: str, text: str) -> str:
    path = folder / name
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(text, encoding="utf-8")
    return name


def build_scale_corpus(folder: Path, pages: int | None, edited: int, reuse: int, seed: int) -> None:
    """Man pages (every section, the first ``pages`` by name), edited copies and reuse
    documents under ``folder`` (see `plant_corpus`)."""
    plant_corpus(folder, list(iter_manpages(limit=pages, sections=SECTIONS)), edited, reuse, seed)


def plant_synthetic(
    folder: Path, n: int, *, seed: int, doc_bytes: int, prefix: str, edited: int, reuse: int, plants_seed: int
) -> Path:
    """`plant_corpus` (``edited``, ``reuse``, ``plants_seed``) over ``n`` invented documents
    (`benchmarks.corpus.synthetic_documents` of ``seed`` and ``doc_bytes``) named
    ``<prefix>0000``…: small planted corpora for tests. Returns ``folder``."""
    texts = synthetic_documents(n, seed=seed, doc_bytes=doc_bytes)
    pool = [(f"{prefix}{k:04d}", text) for k, (_, text) in enumerate(texts)]
    plant_corpus(folder, pool, edited=edited, reuse=reuse, seed=plants_seed)
    return folder


def plant_corpus(folder: Path, pool: list[tuple[str, str]], edited: int, reuse: int, seed: int) -> None:
    """Write the ``(name, text)`` pool under ``folder/pages`` with ``edited`` edited copies
    and ``reuse`` reuse documents (their hosts taken out of the pages), and the record of
    the plants beside the folder (``<folder>.planted.json``: no document of the corpus)."""
    rng = np.random.default_rng(seed)
    hosts = set(rng.choice(len(pool), size=reuse, replace=False).tolist())
    kept = [i for i in range(len(pool)) if i not in hosts]
    source = _WordSource([t for _, t in pool[:2000]])
    planted = []
    for i in kept:
        _write(folder, f"pages/{pool[i][0]}.txt", pool[i][1])
    for k, i in enumerate(rng.choice(kept, size=edited, replace=False).tolist()):
        rate = float(np.exp(rng.uniform(np.log(0.002), np.log(0.15))))
        text = word_edits(pool[i][1], rate, ("substitute", "insert", "delete"), rng, source)
        planted.append(("edited", _write(folder, f"edited/e{k:05d}.txt", text), f"pages/{pool[i][0]}.txt"))
    for k, host in enumerate(sorted(hosts)):
        donor = kept[int(rng.integers(len(kept)))]
        paragraphs = [p for p in _paragraphs(pool[donor][1]) if len(p.split()) >= 15]
        if not paragraphs:
            continue
        start = int(rng.integers(len(paragraphs)))
        passage = paragraphs[start : start + int(rng.integers(1, 4))]
        body = _paragraphs(pool[host][1])
        at = int(rng.integers(len(body) + 1))
        text = "\n\n".join(body[:at] + passage + body[at:]) + "\n"
        planted.append(("reuse", _write(folder, f"reuse/r{k:05d}.txt", text), f"pages/{pool[donor][0]}.txt"))
    Path(f"{folder}.planted.json").write_text(json.dumps(planted, indent=0), encoding="utf-8")


def manpage_pieces(words: int = 150, max_per_stem: int | None = None) -> list[tuple[str, str]]:
    """Every man page (at most ``max_per_stem`` of a family such as ``gcloud_*``) cut into
    pieces of about ``words`` words, whole paragraphs each, as ``(name, text)``."""
    pool = []
    for name, text in iter_manpages(sections=SECTIONS, max_per_stem=max_per_stem):
        piece: list[str] = []
        size = 0
        for paragraph in _paragraphs(text):
            piece.append(paragraph)
            size += len(paragraph.split())
            if size >= words:
                pool.append((f"{name}/{len(pool):06d}", "\n\n".join(piece) + "\n"))
                piece, size = [], 0
        if piece:
            pool.append((f"{name}/{len(pool):06d}", "\n\n".join(piece) + "\n"))
    return pool


def build_pieces_corpus(
    folder: Path, words: int, max_per_stem: int | None, edited: int, reuse: int, seed: int
) -> None:
    """Man page pieces (`manpage_pieces`) with edited copies and reuse documents (`plant_corpus`)."""
    plant_corpus(folder, manpage_pieces(words, max_per_stem), edited, reuse, seed)


def read_scale_corpus(folder: Path) -> ScaleCorpus:
    """The corpus as the audit reads it: every .txt file, by path."""
    ids = sorted(p.relative_to(folder).as_posix() for p in folder.rglob("*.txt"))
    texts = [(folder / i).read_text(encoding="utf-8") for i in ids]
    record = Path(f"{folder}.planted.json")
    planted = [tuple(p) for p in json.loads(record.read_text())] if record.exists() else []
    return ScaleCorpus(folder, ids, texts, planted)


# -- ground truth ---------------------------------------------------------------------


@dataclass
class TruthPairs:
    """Pairs of distinct texts (numbers into ``ids``) at or above each checked threshold."""

    ids: list[str]
    pairs: dict[tuple[str, float], set[tuple[int, int]]]


def distinct_texts(corpus: ScaleCorpus) -> tuple[list[str], list[str]]:
    """The first document (by id) of each distinct normalized text, and its word text:
    the audit compares distinct texts and reports near pairs between them."""
    first: dict[str, int] = {}
    for k, text in enumerate(corpus.texts):
        first.setdefault(canonical_text(text), k)
    keep = sorted(first.values())
    words = feature_texts([corpus.texts[k] for k in keep])
    return [corpus.ids[k] for k in keep], words


def shingle_matrix(words: list[str]) -> sp.csr_matrix:
    """Binary texts × shingles: a shingle is the tuple of five word numbers (a shorter
    text: all its words, padded), so no hashing is involved."""
    vocabulary: dict[str, int] = {}
    windows, owners = [], []
    for k, text in enumerate(words):
        ids = np.asarray([vocabulary.setdefault(w, len(vocabulary)) for w in text.split()], dtype=np.int64)
        if ids.size == 0:
            continue
        if ids.size < SHINGLE_SIZE:
            ids = np.concatenate([ids, np.full(SHINGLE_SIZE - ids.size, -1, np.int64)])
        grams = np.lib.stride_tricks.sliding_window_view(ids, SHINGLE_SIZE)
        windows.append(grams)
        owners.append(np.full(grams.shape[0], k, dtype=np.int64))
    grams = np.ascontiguousarray(np.concatenate(windows))
    keys = grams.view(np.dtype((np.void, grams.dtype.itemsize * SHINGLE_SIZE))).ravel()
    _, columns = np.unique(keys, return_inverse=True)
    matrix = sp.csr_matrix(
        (np.ones(columns.shape[0]), (np.concatenate(owners), columns.ravel())),
        shape=(len(words), int(columns.max()) + 1),
    )
    matrix.data[:] = 1.0  # a shingle repeated in a text counts once
    return matrix


def tfidf_matrix(words: list[str], sublinear_tf: bool = False) -> sp.csr_matrix:
    """scikit-learn's TF-IDF rows of the word texts (the tool's documented weighting)."""
    vectorizer = TfidfVectorizer(
        analyzer=str.split, lowercase=False, smooth_idf=True, sublinear_tf=sublinear_tf, norm="l2"
    )
    return vectorizer.fit_transform(words).tocsr()


def full_products(matrix: sp.csr_matrix):
    """``(first, block)`` for row blocks of ``matrix @ matrix.T``, exactly: the most frequent
    columns as a dense product (BLAS), the rest as a sparse one. Cost: n² · `DENSE_COLUMNS`
    multiply-adds plus the sparse rest, one block of `ROW_BLOCK` rows at a time."""
    df = np.bincount(matrix.indices, minlength=matrix.shape[1])
    common = np.argsort(-df, kind="stable")[:DENSE_COLUMNS]
    mask = np.zeros(matrix.shape[1], dtype=bool)
    mask[common] = True
    dense = matrix[:, common].toarray()
    rest = matrix[:, np.flatnonzero(~mask)].tocsr()
    rest_t = rest.T.tocsc()
    for first in range(0, matrix.shape[0], ROW_BLOCK):
        last = min(first + ROW_BLOCK, matrix.shape[0])
        block = dense[first:last] @ dense.T
        block += (rest[first:last] @ rest_t).toarray()
        yield first, block


def _upper(first: int, hit: np.ndarray) -> set[tuple[int, int]]:
    rows, cols = np.nonzero(hit)
    rows = rows + first
    keep = rows < cols
    return set(zip(rows[keep].tolist(), cols[keep].tolist()))


def compute_truth(ids: list[str], words: list[str], checks=CHECKS) -> TruthPairs:
    """Every pair of the distinct texts at or above each ``(measure, threshold)`` of ``checks``."""
    pairs: dict[tuple[str, float], set[tuple[int, int]]] = {check: set() for check in checks}
    shingles = shingle_matrix(words)
    sizes = np.asarray(shingles.sum(axis=1)).ravel()
    for first, shared in full_products(shingles):
        smaller = np.minimum(sizes[first : first + shared.shape[0], None], sizes[None, :])
        union = sizes[first : first + shared.shape[0], None] + sizes[None, :] - shared
        with np.errstate(divide="ignore", invalid="ignore"):
            containment = np.where(smaller > 0, shared / smaller, 0.0)
            jaccard = np.where(union > 0, shared / union, 0.0)
        for measure, threshold in checks:
            if measure == "containment":
                pairs[(measure, threshold)] |= _upper(first, containment >= threshold)
            elif measure == "jaccard":
                pairs[(measure, threshold)] |= _upper(first, jaccard >= threshold)
    del shingles
    rows = tfidf_matrix(words)
    for first, cosine in full_products(rows):
        for measure, threshold in checks:
            if measure == "cosine":
                pairs[(measure, threshold)] |= _upper(first, cosine >= threshold)
    return TruthPairs(ids, pairs)


def reported_pairs(pairs_csv: Path, ids: list[str]) -> set[tuple[int, int]]:
    """Near pairs an audit reported (``pairs.csv``), as numbers into ``ids``."""
    import csv

    number = {doc: k for k, doc in enumerate(ids)}
    found = set()
    with open(pairs_csv, newline="", encoding="utf-8") as handle:
        for row in csv.DictReader(handle):
            if row["kind"] != "near":
                continue
            a, b = number.get(row["left"]), number.get(row["right"])
            if a is not None and b is not None:
                found.add((min(a, b), max(a, b)))
    return found


def measured_recall(truth: set[tuple[int, int]], reported: set[tuple[int, int]]) -> float:
    """Share of the truth pairs reported (1.0 when there is none)."""
    return len(truth & reported) / len(truth) if truth else 1.0


# -- audits, timing, report -----------------------------------------------------------


def audit_command(corpus: Path, out: Path, measure: str, threshold: float, *extra: str) -> list[str]:
    """``dedup audit`` as users run it, in a fresh interpreter."""
    code = "import sys; from dedup.cli import main; sys.exit(main())"
    return [
        sys.executable,
        "-c",
        code,
        "audit",
        str(corpus),
        "--measure",
        measure,
        "--threshold",
        str(threshold),
        "--out",
        str(out),
        "--quiet",
        *extra,
    ]


def run_command(command: list[str], package: Path | None) -> tuple[float, float | None]:
    """Wall seconds and peak resident megabytes of ``command``, with ``package``'s folder
    first on ``PYTHONPATH``. The peak comes from ``/usr/bin/time`` (None without it): the
    audit's own ``run.json`` figure would count the memory of this process, which the
    audit's process inherits at its start."""
    env = dict(os.environ)
    if package is not None:
        env["PYTHONPATH"] = str(package)
    timer = Path("/usr/bin/time")
    with tempfile.NamedTemporaryFile("r", suffix=".peak") as peak_file:
        prefix = [str(timer), "-f", "%M", "-o", peak_file.name] if timer.exists() else []
        start = time.perf_counter()
        done = subprocess.run(prefix + command, capture_output=True, text=True, env=env, cwd="/")
        seconds = time.perf_counter() - start
        peak_text = peak_file.read().strip().splitlines()
    if done.returncode not in (0, 1):
        raise SystemExit(f"{' '.join(command[3:8])} failed ({done.returncode}): {done.stderr[-2000:]}")
    peak = float(peak_text[-1]) / 1024.0 if prefix and peak_text else None
    return seconds, peak


def warm_up(work: Path, versions: dict[str, Path | None]) -> None:
    """One audit of the bundled demo per version and measure, untimed: the compiled
    kernels are cached on disk by the first run of each version, which is not what a
    user waits for on every run."""
    demo = Path(__file__).resolve().parents[1] / "fixtures" / "demo"
    for version, package in versions.items():
        for measure in ("jaccard", "containment", "cosine"):
            run_command(audit_command(demo, work / f"{version}-{measure}", measure, 0.8), package)


def stated_recall(audit_json: Path) -> tuple[float | None, str]:
    """The recall ``audit.json`` states for its measure, and how the audit found candidates:
    the exact search's 1.0, else LSH's catch probability at the threshold (what the command
    line prints as expected recall), or None where the record promises nothing."""
    block = json.loads(audit_json.read_text(encoding="utf-8"))["candidates"]
    recall = block["expected_recall"]
    if "value" in recall:
        return recall["value"], block["method"]
    if block["method"] == "exhaustive":
        return 1.0, block["method"]
    return recall["points"]["at"]["probability"], block["method"]


@dataclass
class CheckResult:
    """One measure and threshold audited by one version of the package."""

    version: str
    measure: str
    threshold: float
    method: str
    truth: int | None
    recall: float | None
    stated: float | None
    seconds: float
    peak_mb: float | None  # the whole command's peak resident memory


def check(
    corpus: Path,
    work: Path,
    truth: TruthPairs | None,
    measure: str,
    threshold: float,
    versions: dict[str, Path | None],
) -> list[CheckResult]:
    """Audit one check with each version: once with defaults, timed; once on whole texts
    (``--keep-boilerplate``, as the truth scores them) for the recall."""
    results = []
    for version, package in versions.items():
        timed = work / f"{version}-{measure}-{threshold}"
        seconds, peak = run_command(audit_command(corpus, timed, measure, threshold), package)
        recall = stated = None
        expected = None
        method = stated_recall(timed / "audit.json")[1]
        if truth is not None:
            whole = work / f"{version}-{measure}-{threshold}-whole"
            run_command(
                audit_command(corpus, whole, measure, threshold, "--keep-boilerplate", "--no-report"), package
            )
            expected = truth.pairs[(measure, threshold)]
            recall = measured_recall(expected, reported_pairs(whole / "pairs.csv", truth.ids))
            stated, method = stated_recall(whole / "audit.json")
        results.append(
            CheckResult(
                version,
                measure,
                threshold,
                method,
                None if expected is None else len(expected),
                recall,
                stated,
                seconds,
                peak,
            )
        )
    return results


def _cell(value: float | None, digits: int = 4) -> str:
    return "—" if value is None else f"{value:.{digits}f}"


def table(results: list[CheckResult], texts: int) -> str:
    """The results as a markdown table."""
    lines = [
        f"{texts:,} texts",
        "",
        "| version | measure | threshold | candidates | truth pairs | measured recall | stated recall "
        "| seconds | peak MB |",
        "|---|---|---:|---|---:|---:|---:|---:|---:|",
    ]
    for r in results:
        truth = "—" if r.truth is None else f"{r.truth:,}"
        lines.append(
            f"| {r.version} | {r.measure} | {r.threshold} | {r.method} | {truth} | {_cell(r.recall)} "
            f"| {_cell(r.stated)} | {r.seconds:.1f} | {_cell(r.peak_mb, 0)} |"
        )
    return "\n".join(lines)


def _parse(argv: list[str] | None) -> argparse.Namespace:
    p = argparse.ArgumentParser(prog="python -m benchmarks.quality_scale", description=__doc__.split("\n")[0])
    p.add_argument("--corpus", type=Path, default=Path("/tmp/dedup-quality-scale/corpus"))
    p.add_argument(
        "--kind", choices=("pages", "pieces"), default="pages", help="whole pages, or pieces of pages"
    )
    p.add_argument("--pages", type=int, default=12000, help="man pages read (pages)")
    p.add_argument("--words", type=int, default=150, help="words per piece (pieces)")
    p.add_argument("--max-per-stem", type=int, default=None, help="pages of one family at most (pieces)")
    p.add_argument("--edited", type=int, default=300)
    p.add_argument("--reuse", type=int, default=100)
    p.add_argument("--seed", type=int, default=7)
    p.add_argument("--check", action="append", default=None, help="MEASURE:THRESHOLD (repeatable)")
    p.add_argument("--before", type=Path, default=None, help="folder holding another version's dedup package")
    p.add_argument("--no-truth", action="store_true", help="time only (no truth, no recall)")
    p.add_argument("--results", type=Path, default=None, help="write the results as JSON here")
    return p.parse_args(argv)


def main(argv: list[str] | None = None) -> int:
    args = _parse(argv)
    if not args.corpus.exists():
        if args.kind == "pages":
            build_scale_corpus(args.corpus, args.pages, args.edited, args.reuse, args.seed)
        else:
            build_pieces_corpus(
                args.corpus, args.words, args.max_per_stem, args.edited, args.reuse, args.seed
            )
    corpus = read_scale_corpus(args.corpus)
    checks = [(c.split(":")[0], float(c.split(":")[1])) for c in args.check] if args.check else list(CHECKS)
    truth = None
    if not args.no_truth:
        ids, words = distinct_texts(corpus)
        truth = compute_truth(ids, words, checks)
    versions = {"after": None} if args.before is None else {"before": args.before, "after": None}
    work = args.corpus.parent / "audits"
    warm_up(work / "warm-up", versions)
    results = []
    for measure, threshold in checks:
        results.extend(check(args.corpus, work, truth, measure, threshold, versions))
        print(table(results[-len(versions) :], len(corpus.ids)).split("\n")[-1], file=sys.stderr, flush=True)
    print(table(results, len(corpus.ids)))
    if args.results is not None:
        args.results.write_text(json.dumps([r.__dict__ for r in results], indent=1), encoding="utf-8")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
