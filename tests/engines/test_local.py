"""The local engine gives the same audit however the corpus is cut into chunks or threads.

The reference for each check is the one-shot computation over the whole corpus at once
(`fit_tfidf`, `find_boilerplate` / `without_boilerplate` over Python strings, MinHash over
sorted unique shingle sets), whose own checks against scikit-learn and datasketch live in
tests/sketch.
"""

from __future__ import annotations

import json
import os
import random

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import dedup
from dedup import AuditSettings
from dedup.engines import local, reading, sketching, threads
from dedup.features.shingles import features_from_buffer, pack_bytes, pack_texts
from dedup.normalize import batch as normalize_batch
from dedup.normalize.boilerplate import BoilerplateCounter, find_boilerplate, without_boilerplate
from dedup.sketch import fit_tfidf, minhash_signatures
from dedup.sketch.tfidf import DocumentFrequency

WORDS = [
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
    "card",
]


def _bytes(path: str) -> bytes:
    with open(path, "rb") as handle:
        return handle.read()


def _corpus(seed: int, n: int = 60) -> dict[str, str]:
    rng = random.Random(seed)
    footer = "Printed copies are not controlled documents; check the intranet before acting on them."
    bases = [" ".join(rng.choice(WORDS) for _ in range(rng.randint(30, 90))) for _ in range(n // 3)]
    files = {}
    for k in range(n):
        words = bases[k % len(bases)].split()
        if k >= len(bases):  # an edited copy
            words[rng.randrange(len(words))] = "edited"
        body = "\n".join(" ".join(words[i : i + 12]) for i in range(0, len(words), 12))
        files[f"kb/a{k:03d}.txt"] = body + ("\n" + footer if k % 2 else "")
    files["kb/empty.txt"] = ""
    files["kb/punct.txt"] = "-- ... !!"
    files["kb/same.txt"] = files["kb/a001.txt"]
    return files


@pytest.mark.parametrize("candidates", ["lsh", "exhaustive"])
def test_tiny_chunks_give_byte_identical_outputs(write_corpus, tmp_path, monkeypatch, candidates):
    root = write_corpus(_corpus(3))
    s = AuditSettings(candidates=candidates, threshold=0.7, boilerplate_min_texts=3)
    whole = dedup.audit([str(root)], s).write(str(tmp_path / "whole"))
    for module, name, value in [
        (reading, "BATCH_DOCUMENTS", 2),
        (reading, "CHUNK_TEXTS", 3),
        (reading, "CHUNK_BYTES", 50),
        (sketching, "CHUNK_TEXTS", 3),
        (sketching, "CHUNK_BYTES", 50),
    ]:
        monkeypatch.setattr(module, name, value)
    cut = dedup.audit([str(root)], s).write(str(tmp_path / "cut"))
    for name in ("audit.json", "pairs.csv", "clusters.csv", "actions.csv", "ledger.csv"):
        assert _bytes(whole[name]) == _bytes(cut[name]), name
    data = json.loads(_bytes(whole["audit.json"]))
    assert data["summary"]["clusters"] > 0 and data["boilerplate"]["lines"] >= 1


def test_work_folder_is_removed_or_kept(write_corpus, tmp_path):
    root = write_corpus(_corpus(4, 12))
    work = tmp_path / "work"
    dedup.audit([str(root)], AuditSettings(candidates="lsh"), work_dir=str(work))
    assert not work.exists()
    dedup.audit([str(root)], AuditSettings(candidates="lsh"), work_dir=str(work), keep_work=True)
    assert {"originals.bin", "canonical.bin", "signatures.u32"} <= set(os.listdir(work))


def test_cli_work_folder_is_under_the_output_and_removed(write_corpus, tmp_path):
    from dedup.cli import main

    root = write_corpus(_corpus(5, 12))
    out = tmp_path / "out"
    assert main(["audit", str(root), "--out", str(out), "--quiet"]) == 0
    assert ".dedup-work" not in os.listdir(out)
    assert main(["audit", str(root), "--out", str(out), "--quiet", "--keep-work"]) == 0
    assert "originals.offsets.npy" in os.listdir(out / ".dedup-work")


@settings(max_examples=60, deadline=None)
@given(
    st.lists(st.lists(st.integers(0, 40), max_size=30), min_size=1, max_size=25),
    st.integers(1, 7),
    st.sampled_from([64, 2**30]),
)
def test_document_frequency_in_chunks_equals_fit_tfidf(docs, chunk, n_features):
    """Reference: `fit_tfidf` over all documents at once (itself checked against scikit-learn)."""
    hashes = np.asarray([t * 0x9E3779B97F4A7C15 % 2**64 for d in docs for t in d], dtype=np.uint64)
    offsets = np.zeros(len(docs) + 1, np.int64)
    np.cumsum([len(d) for d in docs], out=offsets[1:])
    ref = fit_tfidf(hashes, offsets, n_features=n_features)
    df = DocumentFrequency(n_features)
    for start in range(0, len(docs), chunk):
        stop = min(start + chunk, len(docs))
        df.add(hashes[offsets[start] : offsets[stop]], offsets[start : stop + 1] - offsets[start])
    model = df.model(hashes, offsets)
    assert model.rows.shape == ref.rows.shape
    assert abs(model.rows - ref.rows).max() < 1e-12 if ref.rows.nnz else model.rows.nnz == 0
    assert model.columns.tolist() == ref.columns.tolist()
    assert np.allclose(model.column_idf, ref.column_idf)


def test_minhash_of_repeated_shingles_equals_minhash_of_the_set():
    """A minimum does not change when values repeat (common practice, no source)."""
    texts = ["a b c d e f a b c d e f a b c d e f", "x y z", "one two three four five six seven"]
    buf, offsets = pack_texts(texts)
    sets = features_from_buffer(buf, offsets)
    raw = features_from_buffer(buf, offsets, distinct=False)
    assert raw.shingles.shape[0] > sets.shingles.shape[0]
    a = minhash_signatures(sets.shingles, sets.shingle_offsets).values
    b = minhash_signatures(raw.shingles, raw.shingle_offsets).values
    assert np.array_equal(a, b)


@settings(max_examples=60, deadline=None)
@given(
    st.lists(
        st.lists(
            st.sampled_from(["notice", "footer two", "x", "é ß"])
            | st.text("abc ", min_size=1, max_size=6).map(lambda s: " ".join(s.split()) or "w"),
            min_size=1,
            max_size=6,
        ),
        min_size=1,
        max_size=30,
    ),
    st.integers(1, 9),
    st.floats(0.3, 0.7),
)
def test_compiled_boilerplate_equals_the_string_rules(texts, chunk, max_share):
    """Reference: `find_boilerplate` and `without_boilerplate` over Python strings.

    The chunks are counted in two counters by turns (two partitions), then merged."""
    ref, limit = find_boilerplate(texts, share=0.05, min_texts=2, known=["x", "never seen"])
    counters = [BoilerplateCounter(), BoilerplateCounter()]
    for k, start in enumerate(range(0, len(texts), chunk)):
        counters[k % 2].add(*pack_bytes(["\n".join(t).encode() for t in texts[start : start + chunk]]))
    counter = counters[0].merge(counters[1])
    assert counter.texts == len(texts)
    found = counter.find(share=0.05, min_texts=2, known=["x", "never seen"])
    out, out_offsets, discounted, _ = found.strip(
        *pack_bytes(["\n".join(t).encode() for t in texts]), max_share
    )
    assert found.limit == limit
    for k, lines in enumerate(texts):
        text, was = without_boilerplate(lines, ref, max_share)
        assert bytes(out[out_offsets[k] : out_offsets[k + 1]]).decode() == text
        assert bool(discounted[k]) == was
    assert sorted((r["text"], r["texts"]) for r in found.top(1000)) == sorted(ref.items())


def test_worker_processes_give_byte_identical_outputs(write_corpus, tmp_path):
    files = _corpus(6, 90)
    files["kb/records.jsonl"] = "\n".join(
        json.dumps({"id": f"r{k}", "text": files[f"kb/a{k:03d}.txt"]}) for k in range(5)
    )
    files["kb/bad.txt"] = b"\xff\xfe\x00\x00broken"
    root = write_corpus(files)
    s = AuditSettings(candidates="lsh", threshold=0.7)
    one = dedup.audit([str(root)], s, workers=1).write(str(tmp_path / "one"))
    two = dedup.audit([str(root)], s, workers=2).write(str(tmp_path / "two"))
    for name in ("audit.json", "pairs.csv", "clusters.csv", "actions.csv", "ledger.csv"):
        assert _bytes(one[name]) == _bytes(two[name]), name
    summary = json.loads(_bytes(one["audit.json"]))["summary"]
    assert summary["inputs"]["files"] == len(files) and summary["clusters"] > 0


def test_cli_rejects_a_bad_worker_count(write_corpus, tmp_path, capsys):
    from dedup.cli import main

    root = write_corpus(_corpus(7, 6))
    with pytest.raises(SystemExit) as stop:
        main(["audit", str(root), "--out", str(tmp_path / "o"), "--workers", "0"])
    assert stop.value.code == 2
    assert "must be at least 1" in capsys.readouterr().err


def test_cli_unusable_work_folder_is_a_clear_error(write_corpus, tmp_path, capsys):
    from dedup.cli import main

    root = write_corpus(_corpus(8, 6))
    blocker = tmp_path / "file-not-folder"
    blocker.write_text("x")
    code = main(
        ["audit", str(root), "--out", str(tmp_path / "o"), "--quiet", "--work-dir", str(blocker / "w")]
    )
    assert code == 2
    err = capsys.readouterr().err
    assert err.startswith("dedup: error: cannot use the work folder") and "Traceback" not in err


def test_workers_with_many_small_windows_keep_walk_order(write_corpus, tmp_path, monkeypatch):
    # Windows of three files: the pool holds several bundles at once and this process
    # takes them in walk order, with the ledger entries of the walk in their place.
    from dedup.ingest import walk

    files = _corpus(8, 40)
    files["kb/.hidden.txt"] = "not read: hidden"
    files["kb/notes.bin"] = b"\x00\x01"
    root = write_corpus(files)
    s = AuditSettings(candidates="lsh", threshold=0.7)
    one = dedup.audit([str(root)], s, workers=1).write(str(tmp_path / "one"))
    monkeypatch.setattr(walk, "WINDOW_FILES", 3)
    two = dedup.audit([str(root)], s, workers=2).write(str(tmp_path / "two"))
    for name in ("audit.json", "pairs.csv", "ledger.csv"):
        assert _bytes(one[name]) == _bytes(two[name]), name


def test_kept_word_hashes_give_the_same_audit_as_reading_the_texts_again(write_corpus, tmp_path, monkeypatch):
    # The reference is the audit that tokenizes the compared texts a second time.
    root = write_corpus(_corpus(9, 60))
    for candidates in ("lsh", "exhaustive"):
        s = AuditSettings(candidates=candidates, threshold=0.6)
        kept = dedup.audit([str(root)], s).write(str(tmp_path / f"kept-{candidates}"))
        with monkeypatch.context() as m:
            m.setattr(local, "from_word_hashes", lambda settings: False)
            again = dedup.audit([str(root)], s).write(str(tmp_path / f"again-{candidates}"))
        for name in ("audit.json", "pairs.csv", "clusters.csv"):
            assert _bytes(kept[name]) == _bytes(again[name]), (candidates, name)
        assert json.loads(_bytes(kept["audit.json"]))["summary"]["clusters"] > 0


@pytest.mark.parametrize("candidates", ["lsh", "exhaustive", "auto"])
@pytest.mark.parametrize("sets_limit", [2**30, 0, 3000])
def test_sketching_while_reading_gives_byte_identical_outputs(
    write_corpus, tmp_path, monkeypatch, candidates, sets_limit
):
    """Reference: the same audit with the sketch pass after the read pass (no thread).

    Tiny chunks make many hand-overs to the sketching thread (and make it wait); the
    sets limit keeps every text's sets, none, or gives them up halfway.
    """
    root = write_corpus(_corpus(5, 90))
    s = AuditSettings(candidates=candidates, threshold=0.6, boilerplate=False)
    with monkeypatch.context() as m:
        m.setattr(local, "OVERLAP_SKETCH", False)
        after = dedup.audit([str(root)], s).write(str(tmp_path / "after"))
    monkeypatch.setattr(reading, "OVERLAP_CHUNK_TEXTS", 4)
    monkeypatch.setattr(reading, "OVERLAP_CHUNK_BYTES", 500)
    monkeypatch.setattr(local, "KEEP_SETS_TEXT_BYTES", sets_limit)
    made = []
    real = sketching.ChunkSketcher.compute

    def counted(self, buf, offsets, release=None):
        made.append(offsets.shape[0] - 1)
        return real(self, buf, offsets, release)

    monkeypatch.setattr(sketching.ChunkSketcher, "compute", counted)
    during = dedup.audit([str(root)], s).write(str(tmp_path / "during"))
    assert len(made) > 10 and max(made) <= 4  # the texts went over in many small chunks
    for name in ("audit.json", "pairs.csv", "clusters.csv", "actions.csv", "ledger.csv"):
        assert _bytes(after[name]) == _bytes(during[name]), name
    assert json.loads(_bytes(after["audit.json"]))["summary"]["clusters"] > 0


def _fail_third_call(monkeypatch, owner, name: str, message: str) -> list:
    """Make ``owner.name`` raise RuntimeError(message) on its third call; returns the calls."""
    calls = []
    real = getattr(owner, name)

    def failing(*args, **kwargs):
        calls.append(1)
        if len(calls) == 3:
            raise RuntimeError(message)
        return real(*args, **kwargs)

    monkeypatch.setattr(owner, name, failing)
    return calls


def test_an_error_while_sketching_reaches_the_caller(write_corpus, monkeypatch):
    import threading

    root = write_corpus(_corpus(6, 60))
    monkeypatch.setattr(reading, "OVERLAP_CHUNK_TEXTS", 4)
    _fail_third_call(monkeypatch, sketching.ChunkSketcher, "compute", "sketch failed")
    with pytest.raises(RuntimeError, match="sketch failed"):
        dedup.audit([str(root)], AuditSettings(boilerplate=False))
    assert not [t for t in threading.enumerate() if t.name.startswith("dedup-sketch")]


def _gated_background(fail_at=None):
    """A `_Background` whose first chunk holds its thread until the caller computes the last."""
    import threading

    started, gate = threading.Event(), threading.Event()
    computed, committed = [], []

    def compute(x):
        computed.append((x, threading.current_thread().name))
        if x == 0:
            started.set()
            assert gate.wait(timeout=30)
        if x == fail_at:
            gate.set()
            raise RuntimeError(f"chunk {x} failed")
        if x == 2:
            gate.set()
        return x

    background = threads.Background(compute, committed.append)
    background.submit(0)
    assert started.wait(timeout=30)
    background.submit(1)
    background.submit(2)
    return background, computed, committed


def test_chunks_not_begun_are_computed_by_the_caller_at_close():
    import threading

    background, computed, committed = _gated_background()
    background.close()
    assert committed == [0, 1, 2]  # in submission order, whoever computed them
    by_thread = dict(computed)
    assert by_thread[0].startswith("dedup-sketch")
    assert by_thread[2] == threading.current_thread().name  # taken from the back
    assert by_thread[1] in (by_thread[0], by_thread[2])
    assert not [t for t in threading.enumerate() if t.name.startswith("dedup-sketch")]


def test_an_error_in_a_chunk_computed_at_close_reaches_the_caller():
    import threading

    background, _, committed = _gated_background(fail_at=1)
    with pytest.raises(RuntimeError, match="chunk 1 failed"):
        background.close()
    assert 1 not in committed and 2 not in committed
    assert not [t for t in threading.enumerate() if t.name.startswith("dedup-sketch")]


def test_term_counts_weighed_later_equal_the_model():
    """`DocumentFrequency.weigh` of rows counted early equals `model` of the same texts."""
    rng = np.random.default_rng(4)
    hashes = rng.integers(0, 50, 400).astype(np.uint64) * np.uint64(0x9E3779B97F4A7C15)
    offsets = np.array([0, 90, 90, 200, 400])
    df = DocumentFrequency(2**10, sublinear_tf=True)
    df.add(hashes, offsets)
    counts = df.counts(hashes, offsets)
    assert counts.data.sum() == 400  # raw counts until weighed
    picked = np.array([3, 0])
    early = df.weigh(counts[picked]).rows
    direct = df.model(np.concatenate([hashes[200:400], hashes[0:90]]), np.array([0, 200, 290])).rows
    assert abs(early - direct).max() < 1e-15


def test_without_a_thread_safe_kernel_layer_the_sketch_waits_for_the_reading(write_corpus, tmp_path):
    """numba's `workqueue` layer ends a process whose threads launch kernels together
    (numba documentation, "The Threading Layers"): there the audit must not overlap them."""
    import subprocess
    import sys

    root = write_corpus(_corpus(7, 60))
    code = (
        "import sys, dedup\n"
        "from dedup.engines import reading, threads\n"
        "assert not threads.kernels_thread_safe()\n"
        "reading.OVERLAP_CHUNK_TEXTS = 4\n"
        "r = dedup.audit([sys.argv[1]], dedup.AuditSettings(boilerplate=False, threshold=0.6))\n"
        "print(len(r.pairs))\n"
    )
    env = {**os.environ, "NUMBA_THREADING_LAYER": "workqueue"}
    done = subprocess.run(
        [sys.executable, "-c", code, str(root)], env=env, capture_output=True, text=True, timeout=600
    )
    assert done.returncode == 0, done.stderr
    assert int(done.stdout) > 0


@pytest.mark.parametrize("n_features", [64, 2**30])
def test_frequencies_from_term_counts_equal_those_from_tokens(n_features):
    """Reference: `DocumentFrequency.add` from the tokens alone (checked against `fit_tfidf` above)."""
    rng = np.random.default_rng(2)
    hashes = rng.integers(0, 90, 3000).astype(np.uint64) * np.uint64(0x9E3779B97F4A7C15)
    offsets = np.array([0, 400, 400, 1700, 3000])
    plain, counted = DocumentFrequency(n_features), DocumentFrequency(n_features)
    for a, b in [(0, 2), (2, 4)]:
        part, off = hashes[offsets[a] : offsets[b]], offsets[a : b + 1] - offsets[a]
        plain.add(part, off)
        counted.add(part, off, counted.counts(part, off))
    for x, y in zip(plain._columns_and_df(), counted._columns_and_df()):
        assert x.tolist() == y.tolist()
    assert plain.collision_stats() == counted.collision_stats()
    assert (plain.n_docs, plain.tokens) == (counted.n_docs, counted.tokens) == (4, 3000)


def test_growing_array_equals_the_joined_parts():
    """Reference: numpy.concatenate of the same parts (empty ones and ones larger than the room too)."""
    rng = np.random.default_rng(9)
    parts = [rng.integers(0, 2**63, int(n), dtype=np.uint64) for n in (0, 5, 70_000, 0, 1, 200_000, 3)]
    grown = sketching.Growing(np.uint64)
    for k, part in enumerate(parts):
        grown.append(part)
        assert np.array_equal(grown.array(), np.concatenate(parts[: k + 1]))
    assert grown.array().dtype == np.uint64


@pytest.mark.parametrize("boilerplate", [True, False])
def test_normalizing_in_a_thread_gives_byte_identical_outputs(
    write_corpus, tmp_path, monkeypatch, boilerplate
):
    """Reference: the same audit normalized batch by batch in this thread (no thread at all).

    Batches of three documents make the normalizing thread run many batches one behind
    the reading, reusing its two output arrays again and again (texts of every length,
    so an array sometimes has to grow); some texts need Python's NFKC or case folding.
    """
    import threading

    files = _corpus(7, 60)
    files["kb/fold.txt"] = "Die STRASSE und die Straße: ﬁle ﬂow " * 5
    files["kb/compose.txt"] = "Cafe\u0301 au lait, cafe\u0301 noir " * 5
    files["kb/long.txt"] = " ".join(WORDS * 40)
    root = write_corpus(files)
    s = AuditSettings(threshold=0.6, boilerplate=boilerplate, boilerplate_min_texts=3)
    with monkeypatch.context() as m:
        m.setattr(local, "OVERLAP_SKETCH", False)
        alone = dedup.audit([str(root)], s).write(str(tmp_path / "alone"))
    monkeypatch.setattr(reading, "BATCH_DOCUMENTS", 3)
    threads = []
    real = normalize_batch.PreparedBatch.compiled

    def recorded(self, *args):
        threads.append(threading.current_thread().name)
        return real(self, *args)

    monkeypatch.setattr(normalize_batch.PreparedBatch, "compiled", recorded)
    threaded = dedup.audit([str(root)], s).write(str(tmp_path / "threaded"))
    assert len(threads) > 15 and all(name.startswith("dedup-normalize") for name in threads)
    for name in ("audit.json", "pairs.csv", "clusters.csv", "actions.csv", "ledger.csv"):
        assert _bytes(alone[name]) == _bytes(threaded[name]), name
    assert json.loads(_bytes(alone["audit.json"]))["summary"]["clusters"] > 0


def test_an_error_while_normalizing_reaches_the_caller(write_corpus, monkeypatch):
    import threading

    root = write_corpus(_corpus(8, 60))
    monkeypatch.setattr(reading, "BATCH_DOCUMENTS", 4)
    calls = _fail_third_call(monkeypatch, normalize_batch.PreparedBatch, "compiled", "normalizing failed")
    for boilerplate in (True, False):
        calls.clear()
        with pytest.raises(RuntimeError, match="normalizing failed"):
            dedup.audit([str(root)], AuditSettings(boilerplate=boilerplate))
        assert not [
            t for t in threading.enumerate() if t.name.startswith(("dedup-normalize", "dedup-sketch"))
        ]
