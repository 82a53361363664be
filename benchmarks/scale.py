"""Time and peak memory of a full audit as the corpus grows (10k, 100k, 1M documents).

Each size runs in a fresh process (so peak memory is that size's own) on a synthetic corpus
of ~2 KB documents from benchmarks.corpus.synthetic_documents (seeded), 5% of which get a
lightly edited copy, stored as JSONL shards of 10,000 records. The fitted growth exponent
is the slope of log(time) against log(documents).

Run: ``python -m benchmarks.scale [--sizes 10000 100000 1000000] [--no-report]``
"""

from __future__ import annotations

import argparse
import json
import math
import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

SHARD = 10_000


def make_corpus(folder: Path, n: int, seed: int = 5) -> int:
    from benchmarks.corpus import synthetic_documents

    folder.mkdir(parents=True, exist_ok=True)
    written = 0
    shard, handle = -1, None
    for k, (_, text) in enumerate(synthetic_documents(n, seed=seed, doc_bytes=2048)):
        if k // SHARD != shard:
            if handle:
                handle.close()
            shard = k // SHARD
            handle = open(folder / f"part-{shard:05d}.jsonl", "w", encoding="utf-8")  # noqa: SIM115 - one shard after another
        handle.write(json.dumps({"id": f"d{k}", "text": text}) + "\n")
        written += 1
        if k % 20 == 0:
            words = text.split()
            words[len(words) // 3] = "edited"
            handle.write(json.dumps({"id": f"d{k}-copy", "text": " ".join(words)}) + "\n")
            written += 1
    if handle:
        handle.close()
    return written


def run_one(folder: str, out: str, report: bool) -> dict:
    import dedup

    start = time.perf_counter()
    result = dedup.audit([folder], dedup.AuditSettings(id_field="id", candidates="lsh"))
    audit_s = time.perf_counter() - start
    print(
        f"audit {audit_s:.1f} s, stages {result.run['stages_seconds']}, peaks {result.run['peak_rss_mb_by_stage']}",
        file=sys.stderr,
        flush=True,
    )
    start = time.perf_counter()
    if report:
        result.write(out)
    write_s = time.perf_counter() - start
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    return {
        "documents": len(result.documents),
        "clusters": len(result.clusters),
        "audit_seconds": round(audit_s, 2),
        "write_seconds": round(write_s, 2),
        "peak_rss_mb": round(peak),
        "stages": result.run["stages_seconds"],
        "peaks": result.run["peak_rss_mb_by_stage"],
    }


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=[10_000, 100_000])
    parser.add_argument(
        "--no-report", action="store_true", help="time the audit only, not writing its outputs"
    )
    parser.add_argument("--child", nargs=2, metavar=("FOLDER", "OUT"), help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.child:
        print(json.dumps(run_one(args.child[0], args.child[1], not args.no_report)))
        return 0
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        for n in args.sizes:
            folder = Path(tmp) / f"c{n}"
            written = make_corpus(folder, n)
            cmd = [sys.executable, "-m", "benchmarks.scale", "--child", str(folder), str(Path(tmp) / f"o{n}")]
            if args.no_report:
                cmd.append("--no-report")
            out = subprocess.run(cmd, stdout=subprocess.PIPE, text=True, check=True, cwd=os.getcwd()).stdout
            row = json.loads(out.strip().splitlines()[-1])
            row["inputs"] = written
            rows.append(row)
            print(
                f"{row['documents']:>9,} docs  audit {row['audit_seconds']:8.1f} s  write {row['write_seconds']:7.1f} s  "
                f"peak RSS {row['peak_rss_mb']:6,} MB  clusters {row['clusters']:,}  stages {row['stages']}  "
                f"peak MB after each stage {row['peaks']}",
                flush=True,
            )
    if len(rows) >= 2:
        xs = [math.log(r["documents"]) for r in rows]
        ys = [math.log(r["audit_seconds"] + r["write_seconds"]) for r in rows]
        mx, my = sum(xs) / len(xs), sum(ys) / len(ys)
        slope = sum((x - mx) * (y - my) for x, y in zip(xs, ys)) / sum((x - mx) ** 2 for x in xs)
        print(f"growth exponent (time ~ documents^k): k = {slope:.2f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
