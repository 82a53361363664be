"""The local engine against the Spark engine (``local[1]``, ``local[2]``) at 10k and 100k documents.

Each size is the synthetic corpus of `benchmarks.scale` (~2 KB documents of
benchmarks.corpus.synthetic_documents, 5% with an edited copy, JSONL shards of 10,000
records). Each run is a fresh process: the local engine, then Spark with each master
(its session started before the clock starts: the start is printed apart). Printed per
run: seconds, documents per second and per core (the local engine's cores are the
kernels' threads; Spark's the master's), whether audit.json is byte for byte the local
engine's, and for Spark the shuffle bytes written and the task time of each step (from
Spark's status store, read through the JVM: benchmark use only). Figures, no asserts.

Run: ``python -m benchmarks.spark_scale [--sizes 10000 100000] [--masters local[1] local[2]] [--uri]
[--corpus DIR]`` (``DEDUP_BENCH_DRIVER_MEMORY``, default 4g, is the session's driver memory: in
local mode the driver runs the tasks too).
"""

from __future__ import annotations

import argparse
import collections
import hashlib
import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

SETTINGS = {"id_field": "id", "candidates": "lsh"}


def _digest(result, out: str) -> str:
    written = result.write(out, report=False)
    return hashlib.sha256(Path(written["audit.json"]).read_bytes()).hexdigest()[:16]


def run_local(folder: str, out: str) -> dict:
    """Figures of the local engine on ``folder`` (its outputs written to ``out``)."""
    import numba

    import dedup

    start = time.perf_counter()
    result = dedup.audit([folder], dedup.AuditSettings(**SETTINGS))
    seconds = time.perf_counter() - start
    return {
        "engine": "local",
        "cores": numba.get_num_threads(),
        "documents": len(result.documents),
        "seconds": round(seconds, 2),
        "steps": result.run["stages_seconds"],
        "audit_json": _digest(result, out),
    }


def _stage_figures(spark) -> dict:
    """Shuffle bytes written and task seconds of the stages of each step (by job description)."""
    store = spark.sparkContext._jsc.sc().statusStore()
    stages = store.stageList(None, False, False, getattr(store, "stageList$default$4")(), None)
    per = collections.defaultdict(lambda: {"stages": 0, "shuffle_write_mb": 0.0, "task_seconds": 0.0})
    it = stages.iterator()
    while it.hasNext():
        stage = it.next()
        described = stage.description()
        step = described.get().removeprefix("dedup audit: ") if described.isDefined() else "(other)"
        figures = per[step]
        figures["stages"] += 1
        figures["shuffle_write_mb"] += stage.shuffleWriteBytes() / 2**20
        figures["task_seconds"] += stage.executorRunTime() / 1000
    return {k: {f: round(v, 2) for f, v in fig.items()} for k, fig in per.items()}


def run_spark(folder: str, out: str, master: str, uri: bool) -> dict:
    """Figures of the Spark engine on ``folder`` (as a ``file://`` URI with ``uri``), its
    session started on ``master`` before the clock starts."""
    from pyspark.sql import SparkSession

    import dedup

    start = time.perf_counter()
    spark = (
        SparkSession.builder.master(master)
        .config("spark.ui.enabled", "false")
        .config("spark.ui.showConsoleProgress", "false")
        .config("spark.pyspark.python", sys.executable)
        .config("spark.executorEnv.NUMBA_NUM_THREADS", "1")
        .config("spark.driver.memory", os.environ.get("DEDUP_BENCH_DRIVER_MEMORY", "4g"))
        .getOrCreate()
    )
    spark.sparkContext.setLogLevel("ERROR")
    session_seconds = time.perf_counter() - start
    given = Path(folder).resolve().as_uri() if uri else folder
    start = time.perf_counter()
    result = dedup.audit([given], dedup.AuditSettings(**SETTINGS), engine="spark", spark_session=spark)
    seconds = time.perf_counter() - start
    figures = {
        "engine": f"spark {master}" + (" (URI)" if uri else ""),
        "cores": spark.sparkContext.defaultParallelism,
        "documents": len(result.documents),
        "session_seconds": round(session_seconds, 2),
        "seconds": round(seconds, 2),
        "steps": result.run["stages_seconds"],
        "spark_stages": _stage_figures(spark),
    }
    if uri:  # the inputs as given (a URI) differ; the rest must not
        result.inputs = [folder]
    figures["audit_json"] = _digest(result, out)
    spark.stop()
    return figures


def _records(folder: str) -> int:
    """Documents in a corpus folder made before (one JSON record per line)."""
    count = 0
    for name in os.listdir(folder):
        with open(os.path.join(folder, name), "rb") as handle:
            count += sum(1 for _ in handle)
    return count


def _child(args: list[str]) -> dict:
    done = subprocess.run(
        [sys.executable, "-m", "benchmarks.spark_scale", "--one", *args],
        capture_output=True,
        text=True,
        env={**os.environ, "PYSPARK_PYTHON": sys.executable},
    )
    if done.returncode != 0:  # the child's own error, not only its exit status
        said = [line for line in done.stderr.splitlines() if line.strip() and not line.startswith("\tat ")]
        tail = "\n".join(said[:40] + ["..."] + said[-20:])
        raise SystemExit(f"the run {' '.join(args[:1] + args[3:])} failed (exit {done.returncode}):\n{tail}")
    return json.loads(done.stdout.strip().splitlines()[-1])


def _print(figures: dict, reference: str | None) -> None:
    rate = figures["documents"] / figures["seconds"]
    same = (
        ""
        if reference is None
        else ("  same audit.json" if figures["audit_json"] == reference else "  DIFFERENT")
    )
    session = f" (+{figures['session_seconds']} s session start)" if "session_seconds" in figures else ""
    print(
        f"  {figures['engine']:<22} {figures['seconds']:>8.1f} s{session}  {rate:>8.0f} docs/s  "
        f"{rate / figures['cores']:>7.0f} docs/s/core ({figures['cores']} cores){same}"
    )
    print(f"      steps (s): {figures['steps']}")
    for step, stage in figures.get("spark_stages", {}).items():
        print(f"      {step:<20} {stage}")


def main(argv: list[str] | None = None) -> int:
    """Each size: the corpus made, then one fresh process per engine and master."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=[10_000, 100_000])
    parser.add_argument("--masters", nargs="+", default=["local[1]", "local[2]"])
    parser.add_argument("--uri", action="store_true", help="also give Spark the corpus as a file:// URI")
    parser.add_argument("--corpus", help="folder for the corpora (kept, and reused when there)")
    parser.add_argument("--one", nargs="+", help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.one:  # a child process: one run, its figures as the last line of stdout
        engine, folder, out, *rest = args.one
        figures = (
            run_local(folder, out) if engine == "local" else run_spark(folder, out, rest[0], rest[1] == "uri")
        )
        print(json.dumps(figures))
        return 0
    from benchmarks.scale import make_corpus

    for n in args.sizes:
        with tempfile.TemporaryDirectory(prefix="dedup-spark-scale-") as tmp:
            folder = os.path.join(args.corpus, str(n)) if args.corpus else os.path.join(tmp, "corpus")
            documents = _records(folder) if os.path.isdir(folder) else make_corpus(Path(folder), n)
            print(f"{documents:,} documents ({n:,} synthetic, 5% with an edited copy)", flush=True)
            local = _child(["local", folder, os.path.join(tmp, "out-local")])
            _print(local, None)
            runs = [(m, "path") for m in args.masters] + ([(args.masters[-1], "uri")] if args.uri else [])
            for k, (master, how) in enumerate(runs):
                figures = _child(["spark", folder, os.path.join(tmp, f"out-{k}"), master, how])
                _print(figures, local["audit_json"])
            sys.stdout.flush()
    return 0


if __name__ == "__main__":
    sys.exit(main())
