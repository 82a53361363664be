"""The Spark engine gives byte for byte the local engine's outputs.

Each check audits the same inputs with the same settings on both engines and compares
audit.json, pairs.csv, clusters.csv, actions.csv and ledger.csv byte for byte (run.json
holds timings and is left out). The session is shared by the whole module (``local[2]``,
two shuffle partitions that are never coalesced, so every reduce really merges parts);
without pyspark, pandas or Java the Spark checks are skipped, with the reason.
"""

from __future__ import annotations

import filecmp
import json
import os
import random
import shutil
import sys
from pathlib import Path

import numpy as np
import pytest

import dedup
from dedup import AuditSettings
from dedup.engines import EngineUnavailable, engine_problem

ROOT = Path(__file__).resolve().parents[2]
# The outputs the brief names; every other one written (passages, worklists …) is compared too.
COMPARED = ("audit.json", "pairs.csv", "clusters.csv", "actions.csv", "ledger.csv")
# The demo command of the README.
DEMO = {"measure": "containment", "threshold": 0.9, "prefer": ("current/**",), "id_field": "id"}
DEMO_TEXT = {"text_fields": ("body",)}

needs_spark = pytest.mark.skipif(engine_problem("spark") is not None, reason=str(engine_problem("spark")))


@pytest.fixture(scope="module")
def spark():
    problem = engine_problem("spark")
    if problem:
        pytest.skip(problem)
    from pyspark.sql import SparkSession

    with pytest.MonkeyPatch.context() as patch:
        patch.setenv("PYSPARK_PYTHON", sys.executable)
        session = (
            SparkSession.builder.master("local[2]")
            .appName("dedup tests")
            .config("spark.ui.enabled", "false")
            .config("spark.ui.showConsoleProgress", "false")
            .config("spark.sql.shuffle.partitions", "2")
            .config("spark.sql.adaptive.coalescePartitions.enabled", "false")
            .config("spark.executorEnv.NUMBA_NUM_THREADS", "1")
            .getOrCreate()
        )
        session.sparkContext.setLogLevel("ERROR")
        yield session
        session.stop()


def _same_outputs(local, spark_result, tmp_path: Path, skip_keys: tuple[str, ...] = ()) -> dict[str, bool]:
    """Whether each output file (all but run.json) is byte for byte the same; the names of
    `COMPARED` are always among them."""
    a = local.write(str(tmp_path / "local"), report=False)
    b = spark_result.write(str(tmp_path / "spark"), report=False)
    assert set(a) == set(b) and set(COMPARED) <= set(a)
    same = {}
    for name in sorted(set(a) - {"run.json"}):
        if name == "audit.json" and skip_keys:
            left, right = (json.loads(Path(p[name]).read_text()) for p in (a, b))
            same[name] = {k: v for k, v in left.items() if k not in skip_keys} == {
                k: v for k, v in right.items() if k not in skip_keys
            }
        else:
            same[name] = filecmp.cmp(a[name], b[name], shallow=False)
    return same


def _both(paths, settings: AuditSettings, spark, tmp_path: Path, **spark_options):
    local = dedup.audit([str(p) for p in paths], settings)
    on_spark = dedup.audit(
        [str(p) for p in paths], settings, engine="spark", spark_session=spark, **spark_options
    )
    return local, on_spark, _same_outputs(local, on_spark, tmp_path)


# -- the demo ----------------------------------------------------------------------------
@needs_spark
@pytest.mark.parametrize(
    "options",
    [
        {"candidates": "exhaustive"},  # the README's demo (templates on)
        {"candidates": "lsh"},
        {"candidates": "lsh", "measure": "jaccard", "threshold": 0.7, "boilerplate": False},
        {"candidates": "exhaustive", "measure": "jaccard", "threshold": 0.6, "boilerplate": False},
        {"candidates": "exhaustive", "measure": "cosine", "threshold": 0.8},
    ],
    ids=[
        "exhaustive-containment-templates",
        "lsh-containment-templates",
        "lsh-jaccard",
        "exhaustive-jaccard",
        "exhaustive-cosine-templates",
    ],
)
def test_the_demo_gives_byte_identical_outputs(spark, demo_path, tmp_path, options):
    settings = AuditSettings(**{**DEMO, **DEMO_TEXT, **options})
    local, on_spark, same = _both([demo_path], settings, spark, tmp_path)
    assert all(same.values()), same
    assert local.summary["clusters"] > 0  # the check can fail: there is something to find
    assert on_spark.run["engine"] == "spark"


# -- small and odd corpora ------------------------------------------------------------------
def _odd_corpus() -> dict[str, str]:
    """Near copies sharing a footer, an exact copy, an empty file, a text without words, a
    file that is not a document, records with a broken line and a repeated id."""
    rng = random.Random(3)
    words = [
        "meter",
        "leave",
        "fleet",
        "token",
        "portal",
        "depot",
        "reading",
        "quarterly",
        "estimate",
        "calendar",
        "keys",
        "fuel",
    ]
    footer = "Printed copies are not controlled documents; check the intranet before acting on them."
    bases = [" ".join(rng.choice(words) for _ in range(rng.randint(30, 90))) for _ in range(8)]
    files = {}
    for k in range(24):
        body = bases[k % 8].split()
        if k >= 8:
            body[rng.randrange(len(body))] = "edited"
        files[f"kb/a{k:03d}.txt"] = "\n".join(" ".join(body[i : i + 12]) for i in range(0, len(body), 12)) + (
            "\n" + footer if k % 2 else ""
        )
    files["kb/empty.txt"] = ""
    files["kb/punct.txt"] = "-- ... !!"
    files["kb/same.txt"] = files["kb/a001.txt"]
    files["kb/image.png"] = "not a document"
    files["kb/records.jsonl"] = '{"id": "1", "text": "x"}\n{broken\n{"id": "1", "text": "y"}\n'
    return files


@needs_spark
@pytest.mark.parametrize("candidates", ["lsh", "exhaustive"])
def test_odd_corpora_give_byte_identical_outputs(spark, write_corpus, tmp_path, candidates):
    root = write_corpus(_odd_corpus())
    settings = AuditSettings(candidates=candidates, threshold=0.7, boilerplate_min_texts=3, id_field="id")
    local, on_spark, same = _both([root], settings, spark, tmp_path)
    assert all(same.values()), same
    assert local.summary["clusters"] > 0 and local.boilerplate["lines"] > 0


def _rewrapped_corpus() -> dict[str, str]:
    """Pages sharing a notice (template lines) and a copy whose notice lines were re-wrapped:
    only the original loses them, so the pair is found when the texts are compared whole."""
    notice = [
        f"Notice line {i}: this handbook page is reviewed by the depot council each spring."
        for i in range(10)
    ]
    words = ["Meter", "Leave", "Fleet", "Badge", "Token", "Ferry"]
    pages = [
        [f"{w} step {k} of procedure {i} covers the visit, the estimate and the reading." for k in range(12)]
        for i, w in enumerate(words)
    ]
    files = {f"page{i}.txt": "\n".join(page + notice) for i, page in enumerate(pages)}
    copy = list(pages[0])
    copy[3] = copy[3].replace("estimate", "written estimate")
    files["copy.txt"] = "\n".join(copy + [" ".join(notice[k : k + 2]) for k in range(0, 10, 2)])
    return files


@needs_spark
@pytest.mark.parametrize("candidates", ["lsh", "exhaustive"])
def test_pairs_found_as_whole_texts_are_the_same_on_spark(spark, write_corpus, tmp_path, candidates):
    root = write_corpus(_rewrapped_corpus())
    settings = AuditSettings(candidates=candidates, threshold=0.8)
    local, on_spark, same = _both([root], settings, spark, tmp_path)
    assert all(same.values()), same
    assert [p["templates_left_out"] for p in local.pairs] == ["none"]


@needs_spark
def test_a_folder_without_documents_gives_the_same_empty_audit(spark, tmp_path):
    (tmp_path / "nothing").mkdir()
    (tmp_path / "nothing" / "notes.bin").write_bytes(b"\x00\x01")
    _, on_spark, same = _both([tmp_path / "nothing"], AuditSettings(), spark, tmp_path / "out")
    assert all(same.values()), same
    assert on_spark.summary["documents"] == 0


# -- a generated corpus -------------------------------------------------------------------
@pytest.fixture(scope="module")
def generated(tmp_path_factory) -> Path:
    """A few thousand synthetic documents with planted edited copies (and template
    headers and footers), exact copies, and records in JSONL and Parquet."""
    sys.path.insert(0, str(ROOT))
    try:
        from benchmarks.corpus import make_planted_corpus
    finally:
        sys.path.remove(str(ROOT))
    root = tmp_path_factory.mktemp("generated")
    make_planted_corpus(root / "kb", 1500, 200, 11, source="synthetic", doc_bytes=1200)
    (root / "kb" / "truth.json").unlink()
    base = sorted((root / "kb" / "base").iterdir())
    copies = root / "kb" / "copies" / "exact"
    copies.mkdir()
    for k, path in enumerate(base[:25]):
        shutil.copy(path, copies / f"copy-{k:02d}.txt")
    rng = random.Random(5)
    records = []
    for k, path in enumerate(rng.sample(base, 60)):
        text = path.read_text(encoding="utf-8")
        words = text.split()
        if k % 2:  # an edited copy
            words[rng.randrange(len(words))] = "edited"
        records.append({"id": f"r{k}", "body": " ".join(words)})
    with open(root / "kb" / "exports.jsonl", "w", encoding="utf-8") as handle:
        handle.writelines(json.dumps(r) + "\n" for r in records[:30])
    import pyarrow as pa
    import pyarrow.parquet as pq

    pq.write_table(pa.Table.from_pylist(records[30:]), root / "kb" / "exports.parquet")
    return root / "kb"


@needs_spark
@pytest.mark.parametrize(
    "options",
    [
        {"measure": "jaccard", "threshold": 0.7, "candidates": "lsh"},
        {
            "measure": "containment",
            "threshold": 0.8,
            "candidates": "lsh",
            "boilerplate": False,
            "bucket_limit": 3,
        },
        {"measure": "jaccard", "threshold": 0.8, "candidates": "exhaustive"},
        {"measure": "containment", "threshold": 0.3},
        {"measure": "cosine", "threshold": 0.5},  # the default TF-IDF space: the exact vocabulary
        {"measure": "cosine", "threshold": 0.5, "tfidf_features": 2**16, "boilerplate": False},
    ],
    ids=[
        "lsh-jaccard-templates",
        "lsh-containment-oversize",
        "exhaustive-jaccard-templates",
        "exact-containment-templates",
        "exact-cosine-templates-default-tfidf",
        "exact-cosine-hashed",
    ],
)
def test_a_generated_corpus_gives_byte_identical_outputs(spark, generated, tmp_path, options):
    settings = AuditSettings(**options, id_field="id", text_fields=("body",))
    local, on_spark, same = _both([generated], settings, spark, tmp_path)
    assert all(same.values()), same
    assert local.summary["documents"] > 2000 and local.summary["clusters"] > 100
    if options.get("bucket_limit") == 3:  # oversize buckets: warned about the same way
        assert any(w["kind"] == "oversize-bucket" for w in on_spark.warnings)
    if options["measure"] != "jaccard" and "candidates" not in options:  # searched exactly on the driver
        assert on_spark.candidates["expected_recall"]["value"] == 1.0
        assert on_spark.tfidf["n_features"] == options.get("tfidf_features", 0)
        assert on_spark.to_dict()["settings"]["tfidf_features"] == on_spark.tfidf["n_features"]


@needs_spark
def test_an_exact_search_too_large_for_the_driver_is_refused_with_the_way_out(spark, demo_path, monkeypatch):
    from dedup.engines.spark import verifying

    monkeypatch.setattr(verifying, "DRIVER_SEARCH_VALUES", 100)
    settings = AuditSettings(**{**DEMO, **DEMO_TEXT})
    with pytest.raises(dedup.SettingsError, match="--engine local") as caught:
        dedup.audit([str(demo_path)], settings, engine="spark", spark_session=spark)
    assert "exact containment search" in str(caught.value) and "at most 100" in str(caught.value)


@needs_spark
def test_components_found_in_spark_give_the_same_clusters(spark, generated, tmp_path, monkeypatch):
    # Every confirmed edge over the limit: components by large-star / small-star, clusters
    # made a batch of components at a time.
    from dedup.engines.spark import clustering, run_audit_spark
    from dedup.plan import Plan

    calls = []
    found_in_spark = clustering.component_labels_of_arrays

    def spy(*args):
        calls.append(args[1])
        return found_in_spark(*args)

    monkeypatch.setattr(clustering, "component_labels_of_arrays", spy)
    settings = AuditSettings(
        measure="jaccard", threshold=0.6, candidates="lsh", id_field="id", text_fields=("body",)
    )
    local = dedup.audit([str(generated)], settings)
    on_spark = run_audit_spark(Plan.of(settings), [str(generated)], spark=spark, driver_component_edges=40)
    same = _same_outputs(local, on_spark, tmp_path)
    assert all(same.values()), same
    assert len(local.clusters) > 50 and len(calls) == 1  # the components were found in Spark


@needs_spark
def test_uris_are_read_in_a_map_step_with_the_same_outputs(spark, demo_path, tmp_path):
    settings = AuditSettings(**DEMO, **DEMO_TEXT, candidates="lsh")
    local = dedup.audit([str(demo_path)], settings)
    on_spark = dedup.audit([demo_path.as_uri()], settings, engine="spark", spark_session=spark)
    # Only the inputs as given differ (a path, a URI).
    same = _same_outputs(local, on_spark, tmp_path, skip_keys=("inputs",))
    assert all(same.values()), same
    assert on_spark.inputs == [demo_path.as_uri()]


@needs_spark
def test_a_missing_uri_is_an_input_error(spark, tmp_path):
    with pytest.raises(dedup.InputError, match="no such file or folder"):
        dedup.audit([(tmp_path / "nothing").as_uri()], engine="spark", spark_session=spark)


@needs_spark
def test_local_paths_and_uris_together_are_refused(spark, demo_path):
    with pytest.raises(dedup.SettingsError, match="not both"):
        dedup.audit([str(demo_path), demo_path.as_uri()], engine="spark", spark_session=spark)


@needs_spark
def test_the_command_line_runs_the_spark_engine(spark, demo_path, tmp_path):
    from dedup.cli import main

    common = [str(demo_path), "--measure", "containment", "--threshold", "0.9", "--prefer", "current/**"]
    common += ["--id-field", "id", "--text-field", "body", "--no-report", "--quiet"]
    assert main(["audit", *common, "--out", str(tmp_path / "local")]) == 0
    # The module's session is running: the command uses it.
    assert main(["audit", *common, "--out", str(tmp_path / "spark"), "--engine", "spark"]) == 0
    written = sorted(p.name for p in (tmp_path / "local").iterdir() if p.is_file() and p.name != "run.json")
    assert set(COMPARED) <= set(written)
    for name in written:
        assert filecmp.cmp(tmp_path / "local" / name, tmp_path / "spark" / name, shallow=False), name


# -- parts ----------------------------------------------------------------------------------
@needs_spark
@pytest.mark.parametrize("shape", ["chain", "isolated", "random"])
def test_large_star_small_star_finds_scipys_components(spark, shape):
    import scipy.sparse as sp
    from scipy.sparse.csgraph import connected_components

    from dedup.engines.spark.components import component_labels_of_arrays

    rng = np.random.default_rng(3)
    n = 400
    if shape == "chain":  # one long path, its nodes numbered at random (many rounds)
        order = rng.permutation(n)
        left, right = order[:-1], order[1:]
    elif shape == "isolated":  # two chains and many nodes on no edge
        left = np.array([5, 6, 7, 300, 301, 8, 302], np.int64)
        right = np.array([6, 7, 8, 301, 302, 399, 399], np.int64)
    else:  # random edges, repeats and loops included
        left, right = rng.integers(0, n, 300), rng.integers(0, n, 300)
    labels = component_labels_of_arrays(spark, n, np.asarray(left, np.int64), np.asarray(right, np.int64))
    graph = sp.coo_matrix((np.ones(len(left)), (left, right)), shape=(n, n))
    _, expected = connected_components(graph.tocsr(), directed=False)
    # The same partition of the nodes, each labelled by its smallest node.
    smallest = {}
    for node, component in enumerate(expected.tolist()):
        smallest.setdefault(component, node)
    assert labels.tolist() == [smallest[c] for c in expected.tolist()]
    if shape == "chain":
        assert set(labels.tolist()) == {0}


def test_template_lines_from_summed_counts_equal_the_counters():
    # The Spark engine sums line counts by hash and makes the boilerplate of them; the same
    # lines, counts and limit as `BoilerplateCounter.find` over the whole corpus.
    import pyarrow as pa

    from dedup.engines.spark.templates import boilerplate_of_counts, count_lines
    from dedup.features.shingles import pack_bytes
    from dedup.normalize.boilerplate import BoilerplateCounter

    rng = random.Random(2)
    lines = [f"line {k}" for k in range(12)]
    texts = ["\n".join(rng.sample(lines, rng.randint(1, 6))).encode() for _ in range(80)]
    known = ["line 3", "never seen", ""]
    counter = BoilerplateCounter()
    counter.add(*pack_bytes(texts))
    expected = counter.find(share=0.2, min_texts=3, known=known)
    parts = [texts[:30], texts[30:]]  # two partitions
    summed: dict[int, int] = {}
    for part in parts:
        batch = pa.RecordBatch.from_arrays([pa.array(part, pa.binary())], names=["canonical"])
        for out in count_lines(iter([batch])):
            for h, c in zip(out.column("line").to_pylist(), out.column("texts").to_pylist()):
                key = int(np.int64(h).view(np.uint64))
                summed[key] = summed.get(key, 0) + c
    values = np.asarray(sorted(summed), np.uint64)
    counts = np.asarray([summed[int(v)] for v in values], np.int64)
    found = boilerplate_of_counts(values, counts, len(texts), share=0.2, min_texts=3, known=known)
    assert (found.counts, found.limit, found.texts) == (expected.counts, expected.limit, expected.texts)
    assert found.counts  # the check can fail: some lines are common


def test_the_engine_says_what_to_install_when_pyspark_is_missing(monkeypatch):
    import importlib.util

    real = importlib.util.find_spec
    monkeypatch.setattr(
        importlib.util, "find_spec", lambda name, *a: None if name == "pyspark" else real(name, *a)
    )
    assert "install dedup[spark]" in engine_problem("spark")
    with pytest.raises(EngineUnavailable, match=r"install dedup\[spark\]"):
        dedup.audit([str(ROOT / "fixtures" / "demo" / "kb")], engine="spark")
    from dedup.cli import main

    with pytest.raises(SystemExit) as exit_info:
        main(["audit", "x", "--out", "y", "--engine", "spark"])
    assert exit_info.value.code == 2


@needs_spark
def test_parquet_outputs_hold_the_csv_rows(spark, demo_path, tmp_path):
    import pyarrow.parquet as pq

    from dedup.engines.spark import write_parquet
    from dedup.engines.spark.parquet import OUTPUTS

    settings = AuditSettings(**DEMO, **DEMO_TEXT)
    result = dedup.audit([str(demo_path)], settings, engine="spark", spark_session=spark)
    written = write_parquet(result, str(tmp_path / "parquet"))
    counts = {"pairs": len(result.pairs), "actions": len(result.actions), "ledger": len(result.ledger)}
    counts["clusters"] = sum(len(c["members"]) for c in result.clusters)
    for name, columns in OUTPUTS.items():
        table = pq.read_table(written[name])
        assert table.column_names == columns
        assert table.num_rows == counts[name] > 0
    pairs = pq.read_table(written["pairs"]).to_pylist()
    assert [(p["left"], p["right"], p["deciding_score"]) for p in pairs] == [
        (p["left"], p["right"], p["deciding_score"]) for p in result.pairs
    ]
    # From DataFrames: written by Spark, read back alike.
    frame = spark.createDataFrame(pq.read_table(written["actions"]))
    again = write_parquet({"actions": frame}, str(tmp_path / "frames"))
    assert (
        sorted(pq.read_table(again["actions"]).to_pylist(), key=lambda r: r["document_id"]) == result.actions
    )


def test_unknown_outputs_are_refused(tmp_path):
    import pyarrow as pa

    from dedup.engines.spark.parquet import write_parquet

    with pytest.raises(ValueError, match="unknown output"):
        write_parquet({"everything": pa.table({"a": [1]})}, str(tmp_path))
    assert os.path.isdir(tmp_path)


@needs_spark
def test_uris_read_names_spark_would_hide_as_the_walk_does(spark, tmp_path):
    # Spark's file sources leave out names starting with "_" or "."; the walk's rules decide here.
    text = "Meter readings are taken every quarter and estimated bills are corrected afterwards. "
    files = {
        "ok.txt": text * 3,
        "_notes.txt": text * 3 + "A note.",
        "_drafts/draft.txt": text * 2,
        ".hidden.txt": text,
        ".cache/kept.txt": text,
        "_empty.txt": "",
    }
    for name, body in files.items():
        (tmp_path / "docs" / name).parent.mkdir(parents=True, exist_ok=True)
        (tmp_path / "docs" / name).write_text(body, encoding="utf-8")
    settings = AuditSettings(threshold=0.5, candidates="lsh")
    local = dedup.audit([str(tmp_path / "docs")], settings)
    on_spark = dedup.audit([(tmp_path / "docs").as_uri()], settings, engine="spark", spark_session=spark)
    same = _same_outputs(local, on_spark, tmp_path / "compared", skip_keys=("inputs",))
    assert all(same.values()), same
    inputs = {e.input: e.status for e in on_spark.ledger}
    assert inputs["_notes.txt"] == "read" and inputs["_drafts/draft.txt"] == "read"
    assert inputs["_empty.txt"] == "empty" and inputs[".hidden.txt"] == "skipped"


@needs_spark
def test_rows_in_memory_give_the_local_engine_outputs(spark, tmp_path):
    pd = pytest.importorskip("pandas")
    rng = random.Random(7)
    words = [f"w{i}" for i in range(400)]
    base = [" ".join(rng.choice(words) for _ in range(120)) for _ in range(30)]
    rows = [{"id": f"doc-{i:02d}", "text": t, "owner": f"team-{i % 3}"} for i, t in enumerate(base)]
    rows += [
        {"id": f"copy-{i:02d}", "text": t + " edited", "owner": "copies"} for i, t in enumerate(base[:8])
    ]
    frame = pd.DataFrame(rows)
    settings = AuditSettings(threshold=0.7, candidates="lsh")
    local = dedup.audit(frame, settings)
    on_spark = dedup.audit(frame, settings, engine="spark", spark_session=spark)
    same = _same_outputs(local, on_spark, tmp_path)
    assert all(same.values()), same
    assert local.summary["clusters"] == 8
    assert on_spark.metadata["copy-03"] == {"owner": "copies"}


def test_a_spark_connect_session_is_refused_with_the_reason(monkeypatch):
    from dedup.engines.spark import session as sessions

    class ConnectLike:  # stands for pyspark.sql.connect.session.SparkSession
        pass

    ConnectLike.__module__ = "pyspark.sql.connect.session"
    with pytest.raises(dedup.SettingsError, match="Spark Connect"):
        sessions.own_session(ConnectLike())


@needs_spark
def test_uris_read_compressed_and_large_record_files_as_the_walk_does(spark, tmp_path):
    import gzip

    text = "Leaks in the street main are reported to the night desk, which sends a crew within the hour. "
    docs = tmp_path / "docs"
    docs.mkdir()
    (docs / "notes.txt.gz").write_bytes(gzip.compress((text * 4).encode("utf-8")))
    lines = [json.dumps({"id": f"r{i}", "text": text * 3 + f"case {i}"}) for i in range(30)]
    (docs / "records.jsonl").write_text("\n".join(lines) + "\n", encoding="utf-8")
    (docs / "records.jsonl.gz").write_bytes(gzip.compress(("\n".join(lines[:5]) + "\n").encode("utf-8")))
    items = [{"id": f"j{i}", "text": text * 3 + f"item {i}"} for i in range(20)]
    items[7]["text"] = text * 40  # over the limit: skipped with its item number
    (docs / "items.json").write_text(json.dumps(items, indent=1), encoding="utf-8")
    mails = [
        f"From a{i}@example.org Mon Jan  1 10:00:00 2024\nSubject: S{i}\n\n{text * 2}mail {i}\n"
        for i in range(12)
    ]
    (docs / "notes.mbox").write_text("".join(mails), encoding="utf-8")
    settings = AuditSettings(threshold=0.5, candidates="lsh", id_field="id", max_file_bytes=2000)
    local = dedup.audit([str(docs)], settings)
    on_spark = dedup.audit([docs.as_uri()], settings, engine="spark", spark_session=spark)
    same = _same_outputs(local, on_spark, tmp_path / "compared", skip_keys=("inputs",))
    assert all(same.values()), same
    statuses = {e.input: e.status for e in on_spark.ledger if not e.record}
    assert statuses.get("notes.txt.gz") == "read"
    assert sum(e.status == "read" for e in on_spark.ledger if e.input == "records.jsonl") == 30
    json_entries = [e for e in on_spark.ledger if e.input == "items.json"]
    assert [e.status for e in json_entries].count("read") == 19
    assert [e.record for e in json_entries if e.status == "skipped"] == ["item 8"]
    assert sum(e.status == "read" for e in on_spark.ledger if e.input == "notes.mbox") == 12


# -- when Spark fails partway -------------------------------------------------------------------


@needs_spark
def test_a_failed_spark_job_is_one_sentence_naming_the_step(spark, tmp_path, monkeypatch):
    from dedup.engines import EngineFailed
    from dedup.engines.spark import engine

    def failing_templates(*args, **kwargs):
        spark.sql("SELECT raise_error('the disk of executor 3 is full')").collect()

    monkeypatch.setattr(engine, "find_templates", failing_templates)
    persisted = spark.sparkContext._jsc.sc().getPersistentRDDs().size()
    docs = tmp_path / "docs"
    docs.mkdir()
    for k in range(3):
        (docs / f"{k}.txt").write_text(f"the pump station log of week {k} " * 20, encoding="utf-8")
    with pytest.raises(EngineFailed) as caught:
        dedup.audit([str(docs)], AuditSettings(), engine="spark", spark_session=spark)
    message = str(caught.value)
    assert message.startswith("the Spark engine failed in the templates step: ")
    assert "the disk of executor 3 is full" in message and "\n" not in message
    assert "memory" not in message  # not a memory problem: no advice about memory
    # The caller's session is left running, with nothing of the audit persisted in it.
    assert spark.range(3).count() == 3
    assert spark.sparkContext._jsc.sc().getPersistentRDDs().size() == persisted


def test_memory_running_out_is_said_with_what_to_change():
    from dedup.engines.spark.failures import as_engine_failure, is_spark_failure

    class Py4JJavaError(Exception):  # stands for py4j.protocol.Py4JJavaError
        pass

    Py4JJavaError.__module__ = "py4j.protocol"
    java = Py4JJavaError(
        "An error occurred while calling o509.getResult.\n: org.apache.spark.SparkException: Job aborted "
        "due to stage failure: Task 1 in stage 35.0 failed 1 times\nCaused by: java.lang.OutOfMemoryError: "
        "Java heap space\n\tat java.base/java.nio.HeapByteBuffer.<init>(HeapByteBuffer.java:64)"
    )
    gone = ConnectionRefusedError(111, "Connection refused")
    assert is_spark_failure(java) and is_spark_failure(gone) and not is_spark_failure(ValueError("ours"))
    local = str(as_engine_failure(java, "verifying", "1g", local=True))
    assert local == (
        "the Spark engine failed in the verifying step: java.lang.OutOfMemoryError: Java heap space; most "
        "often that is memory running out: in local mode the driver's JVM runs every task: give it more "
        "memory with SPARK_DRIVER_MEMORY (it had 1g)"
    )
    stopped = str(as_engine_failure(gone, "templates", "600m", local=True))
    assert stopped.startswith("the Spark engine failed in the templates step: its JVM stopped; most often")
    assert "spark.executor.memory" in str(as_engine_failure(java, "verifying", "4g", local=False))


def test_a_started_local_session_gets_memory_unless_the_user_chose_it(monkeypatch, tmp_path):
    from dedup.engines.spark import session as sessions

    for name in ("SPARK_DRIVER_MEMORY", "PYSPARK_SUBMIT_ARGS", "SPARK_CONF_DIR", "SPARK_HOME"):
        monkeypatch.delenv(name, raising=False)
    assert not sessions._memory_set_elsewhere()
    monkeypatch.setenv("SPARK_DRIVER_MEMORY", "3g")
    assert sessions._memory_set_elsewhere()
    monkeypatch.delenv("SPARK_DRIVER_MEMORY")
    (tmp_path / "spark-defaults.conf").write_text("spark.driver.memory   6g\n", encoding="utf-8")
    monkeypatch.setenv("SPARK_CONF_DIR", str(tmp_path))
    assert sessions._memory_set_elsewhere()
    (tmp_path / "spark-defaults.conf").write_text("spark.executor.memory 6g\n", encoding="utf-8")
    assert not sessions._memory_set_elsewhere()
    assert sessions.local_driver_memory(16 * 2**30) == "8g"

    def no_sysconf(name):
        raise ValueError(f"unrecognized configuration name {name}")

    monkeypatch.setattr(sessions.os, "sysconf", no_sysconf)
    assert sessions.local_driver_memory() is None  # Spark's own default then


def test_the_command_says_a_spark_failure_in_one_line_and_exits_3(monkeypatch, tmp_path, capsys):
    import dedup.api
    from dedup.cli import main
    from dedup.engines import EngineFailed

    def failing(*args, **kwargs):
        raise EngineFailed("the Spark engine failed in the verifying step: its JVM stopped")

    monkeypatch.setattr(dedup.api, "audit", failing)
    (tmp_path / "a.txt").write_text("a few words of text", encoding="utf-8")
    code = main(["audit", str(tmp_path / "a.txt"), "--out", str(tmp_path / "out"), "--engine", "spark", "-q"])
    err = capsys.readouterr().err
    assert code == 3
    assert err == "dedup: error: the Spark engine failed in the verifying step: its JVM stopped\n"
