"""End-to-end speed of the whole command, as users run it, against the same job done by hand.

Both sides run as commands in fresh processes and write their results: ``dedup audit``
writes every output (audit.json, the CSV files and report.html; also timed with
``--no-report``), the by-hand pipeline (`benchmarks.by_hand`: datasketch ``MinHash`` per
document, ``MinHashLSH``, set Jaccard) writes its pairs to a CSV file. Both read the
same files, use word 5-shingles, 128 permutations and threshold 0.8; ours runs with LSH
and whole texts (``--keep-boilerplate``) so that both shingle the same text. The
in-process figure (`dedup.audit` alone, no outputs written) is printed beside it.

The corpus is every English man page of this machine (sections 1 to 8) turned to text
by `benchmarks.corpus`, written once into ``--corpus`` (reused when it exists).
Recall of both is measured against an exhaustive exact computation (all pairs, sparse
product).

Run: ``python -m benchmarks.pipeline [--corpus DIR] [--pages N] [--repeat 3]``
"""

from __future__ import annotations

import argparse
import csv
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import scipy.sparse as sp

from benchmarks.by_hand import shingle_sets
from benchmarks.corpus import iter_manpages, make_planted_corpus

THRESHOLD = 0.8
NUM_PERM = 128
SECTIONS = ("1", "2", "3", "4", "5", "6", "7", "8")
OURS_FLAGS = [
    "--candidates",
    "lsh",
    "--keep-boilerplate",
    "--threshold",
    str(THRESHOLD),
    "--num-perm",
    str(NUM_PERM),
]


def build_manpage_corpus(folder: Path, pages: int | None) -> int:
    """Every man page (or the first ``pages``) as a .txt file; returns the number of files."""
    folder.mkdir(parents=True)
    count = 0
    for name, text in iter_manpages(limit=pages, sections=SECTIONS):
        (folder / f"{name}.txt").write_text(text, encoding="utf-8")
        count += 1
    return count


def build_corpus(folder: Path, pages: int, planted: int, seed: int) -> int:
    """Real man pages as .txt files plus planted edited copies; returns the number of files."""
    (folder / "pages").mkdir(parents=True)
    count = 0
    for name, text in iter_manpages(limit=pages):
        (folder / "pages" / f"{name}.txt").write_text(text, encoding="utf-8")
        count += 1
    if planted:
        truth = make_planted_corpus(
            folder / "planted",
            n_base=planted,
            n_families=planted // 2,
            seed=seed,
            edit_rates=(0.01, 0.03, 0.05),
        )
        count += (
            len(truth["files"]) if "files" in truth else sum(1 for _ in (folder / "planted").rglob("*.txt"))
        )
        # The record of the planted families is no document: it goes beside the corpus, so
        # that both sides read exactly the same files (the .txt files).
        (folder / "planted" / "truth.json").replace(folder.parent / f"{folder.name}-planted-truth.json")
    return count


def timed_command(command: list[str]) -> float:
    """Wall-clock seconds of a command in a fresh process (it must succeed)."""
    start = time.perf_counter()
    done = subprocess.run(command, capture_output=True, text=True)
    seconds = time.perf_counter() - start
    if done.returncode not in (0, 1):
        raise SystemExit(f"{command[:4]} failed ({done.returncode}): {done.stderr[-2000:]}")
    return seconds


def ours_command(folder: Path, out: Path, report: bool) -> list[str]:
    code = "import sys; from dedup.cli import main; sys.exit(main())"
    extra = [] if report else ["--no-report"]
    return [
        sys.executable,
        "-c",
        code,
        "audit",
        str(folder),
        "--out",
        str(out),
        "--quiet",
        *OURS_FLAGS,
        *extra,
    ]


def by_hand_command(folder: Path, pairs_csv: Path) -> list[str]:
    return [
        sys.executable,
        "-m",
        "benchmarks.by_hand",
        str(folder),
        str(pairs_csv),
        "--threshold",
        str(THRESHOLD),
    ]


def in_process_seconds(folder: Path) -> float:
    import dedup

    settings = dedup.AuditSettings(
        threshold=THRESHOLD, num_perm=NUM_PERM, candidates="lsh", boilerplate=False
    )
    start = time.perf_counter()
    dedup.audit([str(folder)], settings)
    return time.perf_counter() - start


def read_pairs(path: Path, near_only: bool) -> set[tuple[str, str]]:
    with open(path, newline="", encoding="utf-8") as handle:
        rows = list(csv.DictReader(handle))
    return {tuple(sorted((r["left"], r["right"]))) for r in rows if not near_only or r.get("kind") != "exact"}


def exact_pairs_of(path: Path) -> dict[str, str]:
    """Document → first member of its exact group, from pairs.csv (exact rows go first → member)."""
    rep: dict[str, str] = {}
    with open(path, newline="", encoding="utf-8") as handle:
        for r in csv.DictReader(handle):
            if r["kind"] == "exact":
                rep[r["right"]] = rep.get(r["left"], r["left"])
    return rep


def exact_truth(shingles: dict[str, set[str]], level: float) -> set[tuple[str, str]]:
    """Every pair with exact Jaccard >= level, by a sparse product over all documents."""
    ids = sorted(shingles)
    vocabulary: dict[str, int] = {}
    rows, cols = [], []
    for r, doc_id in enumerate(ids):
        for g in shingles[doc_id]:
            cols.append(vocabulary.setdefault(g, len(vocabulary)))
            rows.append(r)
    incidence = sp.csr_matrix((np.ones(len(rows), np.int32), (rows, cols)), shape=(len(ids), len(vocabulary)))
    sizes = np.asarray(incidence.sum(axis=1)).ravel()
    shared = sp.triu(incidence @ incidence.T, k=1).tocoo()
    jac = shared.data / (sizes[shared.row] + sizes[shared.col] - shared.data)
    keep = jac >= level
    return {(ids[a], ids[b]) for a, b in zip(shared.row[keep].tolist(), shared.col[keep].tolist())}


def _spin(n: int) -> int:
    total = 0
    for i in range(n):
        total += i * i
    return total


def parallel_gain(workers: int = 2, tasks: int = 8, size: int = 2_000_000) -> float:
    """How much faster ``workers`` processes do CPU-bound work than one, on this machine.

    Two cores of a shared virtual machine are not two free cores; this says what the
    hardware gives, so the figures above can be read against it.
    """
    import multiprocessing

    start = time.perf_counter()
    for _ in range(tasks):
        _spin(size)
    one = time.perf_counter() - start
    with multiprocessing.get_context("fork").Pool(workers) as pool:
        start = time.perf_counter()
        pool.map(_spin, [size] * tasks)
        many = time.perf_counter() - start
    return one / many


def recall(truth: set, found: set, rep: dict[str, str] | None = None) -> float:
    """Share of the true pairs found (with ``rep``, a pair inside one exact group counts as found)."""
    if not truth:
        return 1.0
    hits = 0
    for a, b in truth:
        if rep is not None:
            ra, rb = rep.get(a, a), rep.get(b, b)
            hits += ra == rb or tuple(sorted((ra, rb))) in found
        else:
            hits += (a, b) in found
    return hits / len(truth)


def measure(folder: Path, work: Path, repeat: int) -> dict:
    """Fastest of ``repeat`` runs of each side, interleaved so that the machine's moods hit both."""
    times: dict[str, list[float]] = {"whole": [], "no_report": [], "in_process": [], "by_hand": []}
    for k in range(repeat):
        times["whole"].append(timed_command(ours_command(folder, work / f"ours-{k}", report=True)))
        times["no_report"].append(timed_command(ours_command(folder, work / f"data-{k}", report=False)))
        times["by_hand"].append(timed_command(by_hand_command(folder, work / f"by-hand-{k}.csv")))
        times["in_process"].append(in_process_seconds(folder))
    return {name: min(values) for name, values in times.items()}


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument(
        "--corpus", type=Path, default=None, help="folder for the corpus (reused if it exists)"
    )
    parser.add_argument("--pages", type=int, default=None, help="at most this many man pages (default: all)")
    parser.add_argument("--repeat", type=int, default=3, help="runs of each side; the fastest counts")
    args = parser.parse_args(argv)
    with tempfile.TemporaryDirectory() as tmp:
        folder = args.corpus or Path(tmp) / "corpus"
        if not folder.exists():
            build_manpage_corpus(folder, args.pages)
            os.sync()  # its write-back would otherwise load whichever side runs first
        n_files = sum(1 for _ in folder.rglob("*.txt"))
        work = Path(tmp) / "runs"
        work.mkdir()
        in_process_seconds(folder)  # warms numba's on-disk cache, the page cache, the imports
        best = measure(folder, work, args.repeat)
        truth = exact_truth(shingle_sets(folder), THRESHOLD)
        ours_found = read_pairs(work / "ours-0" / "pairs.csv", near_only=True)
        ours_recall = recall(truth, ours_found, exact_pairs_of(work / "ours-0" / "pairs.csv"))
        hand_recall = recall(truth, read_pairs(work / "by-hand-0.csv", near_only=False))
        report_mb = (work / "ours-0" / "report.html").stat().st_size / 2**20
    _print_table(n_files, len(truth), best, ours_recall, hand_recall, report_mb, args.repeat)
    return 0


def _print_table(n_files, n_truth, best, ours_recall, hand_recall, report_mb, repeat) -> None:
    hand = best["by_hand"]
    print(
        f"corpus: {n_files:,} man pages of this machine as text; exact pairs at Jaccard >= {THRESHOLD}: {n_truth:,}"
    )
    print("| run (fresh process, outputs written) | time | x faster than by hand | recall |")
    print("|---|---:|---:|---:|")
    print(
        f"| `dedup audit` (every output, report.html {report_mb:.1f} MB) | {best['whole']:.2f} s | "
        f"**{hand / best['whole']:.1f}x** | {ours_recall:.4f} |"
    )
    print(f"| `dedup audit --no-report` | {best['no_report']:.2f} s | {hand / best['no_report']:.1f}x | |")
    print(f"| by hand with datasketch, pairs to CSV | {hand:.2f} s | 1.0x | {hand_recall:.4f} |")
    print(
        f"| (in process: `dedup.audit()` alone, nothing written) | {best['in_process']:.2f} s | "
        f"{hand / best['in_process']:.1f}x | |"
    )
    print(
        f"fastest of {repeat} interleaved runs each; cpus {os.cpu_count()}; two processes run a pure-Python "
        f"loop {parallel_gain():.2f}x faster than one"
    )


if __name__ == "__main__":
    sys.exit(main())
