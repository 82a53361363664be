"""Speed of the persistent index: full build, 1% update, unchanged update, similarity search.

Writes N synthetic documents (``benchmarks.corpus.synthetic_documents``, about
``--doc-bytes`` each) as .txt files in folders of 1,000, then:

1. ``dedup.index.build`` of all of them;
2. edits ``--change`` of them (one word replaced in the middle of each, so each gets a
   new content hash) and runs ``dedup.index.update``;
3. runs ``update`` again with nothing changed;
4. times ``dedup.index.similar`` for ``--queries`` queries: excerpts of 30 words of
   random indexed documents and 3-word keyword queries, on an index opened once, and
   once end to end in a fresh process (interpreter start, imports and the search).

Each build or update is split into its stages (reading and hashing every document,
sketching the new texts, the statistics pass), as reported to the progress object.

Run: ``python -m benchmarks.index_speed [--docs 100000] [--change 0.01] [--queries 40]``
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

from benchmarks.corpus import synthetic_documents
from dedup.progress import Progress


class StageClock(Progress):
    """Seconds spent in each stage the library reports."""

    def __init__(self) -> None:
        self.seconds: dict[str, float] = {}
        self._stage = ""
        self._t = 0.0

    def start(self, stage: str, total: int | None = None) -> None:
        self._stage, self._t = stage, time.perf_counter()

    def done(self, note: str = "") -> None:
        self.seconds[self._stage] = round(time.perf_counter() - self._t, 3)


def write_corpus(root: Path, n: int, doc_bytes: int, seed: int) -> list[Path]:
    paths = []
    for i, (_, text) in enumerate(synthetic_documents(n, seed=seed, doc_bytes=doc_bytes)):
        folder = root / f"{i // 1000:04d}"
        if i % 1000 == 0:
            folder.mkdir(parents=True, exist_ok=True)
        path = folder / f"{i:07d}.txt"
        path.write_text(text, encoding="utf-8")
        paths.append(path)
    return paths


def edit(paths: list[Path], share: float, seed: int) -> int:
    rng = np.random.default_rng(seed)
    picks = rng.choice(len(paths), size=max(1, int(round(share * len(paths)))), replace=False)
    for k in picks.tolist():
        words = paths[k].read_text(encoding="utf-8").split(" ")
        words[len(words) // 2] = f"edited{k}"
        paths[k].write_text(" ".join(words), encoding="utf-8")
    return int(picks.shape[0])


def timed(fn, *args, **kwargs):
    start = time.perf_counter()
    value = fn(*args, **kwargs)
    return value, time.perf_counter() - start


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--docs", type=int, default=100_000)
    parser.add_argument("--doc-bytes", type=int, default=2048)
    parser.add_argument(
        "--change", type=float, default=0.01, help="share of documents edited before the update"
    )
    parser.add_argument("--queries", type=int, default=40)
    parser.add_argument("--seed", type=int, default=5)
    parser.add_argument("--json", metavar="FILE", help="also write the figures as JSON")
    args = parser.parse_args(argv)

    from dedup.index import build, open_index, similar, update

    figures: dict = {"docs": args.docs, "doc_bytes": args.doc_bytes, "change": args.change}
    with tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp) / "corpus"
        index_path = str(Path(tmp) / "corpus.index")
        paths, seconds = timed(write_corpus, root, args.docs, args.doc_bytes, args.seed)
        print(f"corpus: {args.docs:,} documents written in {seconds:.1f} s")

        clock = StageClock()
        summary, seconds = timed(build, [str(root)], index_path, progress=clock)
        figures["build"] = {"seconds": round(seconds, 2), "stages": clock.seconds, "texts": summary.texts}
        size = sum(os.path.getsize(index_path + s) for s in ("", "-wal") if os.path.exists(index_path + s))
        figures["index_megabytes"] = round(size / 1e6, 1)
        print(f"build: {seconds:.1f} s {clock.seconds}; index {size / 1e6:.0f} MB")

        edited = edit(paths, args.change, args.seed)
        clock = StageClock()
        summary, seconds = timed(update, [str(root)], index_path, progress=clock)
        figures["update"] = {
            "edited": edited,
            "seconds": round(seconds, 2),
            "stages": clock.seconds,
            "changed": summary.changed,
            "sketched": summary.sketched,
            "share_of_build": round(seconds / figures["build"]["seconds"], 3),
        }
        print(
            f"update ({edited:,} edited): {seconds:.1f} s {clock.seconds}; {seconds / figures['build']['seconds']:.0%} of the build"
        )

        clock = StageClock()
        summary, seconds = timed(update, [str(root)], index_path, progress=clock)
        figures["unchanged_update"] = {"seconds": round(seconds, 2), "stages": clock.seconds}
        print(f"update (nothing changed): {seconds:.1f} s {clock.seconds}")

        rng = np.random.default_rng(args.seed + 1)
        queries = []
        for k in rng.choice(len(paths), size=args.queries, replace=False).tolist():
            words = paths[k].read_text(encoding="utf-8").split()
            if len(queries) % 2 == 0:
                start = int(rng.integers(0, max(1, len(words) - 30)))
                queries.append(" ".join(words[start : start + 30]))
            else:
                queries.append(" ".join(rng.choice(words, size=3, replace=False).tolist()))
        with open_index(index_path) as index:
            similar(index, queries[0], k=10)  # first call loads the compiled kernels
            latencies = []
            for q in queries:
                _, seconds = timed(similar, index, q, k=10)
                latencies.append(seconds)
        figures["search"] = {
            "queries": len(queries),
            "median_ms": round(1000 * statistics.median(latencies), 1),
            "max_ms": round(1000 * max(latencies), 1),
        }
        print(
            f"search (index open): median {figures['search']['median_ms']} ms, max {figures['search']['max_ms']} ms"
        )
        code = (
            "import argparse, sys\n"
            "from dedup import cli_index\n"
            "p = argparse.ArgumentParser(prog='dedup'); s = p.add_subparsers(dest='command')\n"
            "cli_index.register(s)\n"
            "sys.exit(cli_index.run(p.parse_args(sys.argv[1:])))\n"
        )
        start = time.perf_counter()
        subprocess.run(
            [sys.executable, "-c", code, "similar", queries[0], "--index", index_path, "--json"],
            check=True,
            stdout=subprocess.DEVNULL,
        )
        figures["search"]["fresh_process_ms"] = round(1000 * (time.perf_counter() - start), 1)
        print(f"search (fresh process, end to end): {figures['search']['fresh_process_ms']} ms")
    if args.json:
        Path(args.json).write_text(json.dumps(figures, indent=1) + "\n", encoding="utf-8")
    return 0


if __name__ == "__main__":
    sys.exit(main())
