"""Building and updating an index: what is stored, what an update re-sketches, statistics."""

from __future__ import annotations

import numpy as np
import pytest
from datasketch import MinHash
from index_helpers import sqlite

import dedup
from dedup import AuditSettings
from dedup.features import shingle_strings
from dedup.index import build, open_index, update
from dedup.index import indexing as index_indexing
from dedup.index import postings as index_postings
from dedup.index import texts as index_texts
from dedup.index.blobs import unpack_array
from dedup.ingest import iter_documents
from dedup.normalize import canonical_text, token_text


def _documents(path: str) -> dict[str, tuple[str, str]]:
    with sqlite(path) as connection:
        return {
            r[0]: (r[1], r[2])
            for r in connection.execute("SELECT doc_id, content_hash, status FROM documents")
        }


def _statistics(path: str):
    with open_index(path) as index, index.reading() as db:
        stats = index_postings.load_statistics(db)
        hashes = dict(db.execute("SELECT text_id, content_hash FROM texts"))
    return stats, hashes


def test_documents_and_hashes_equal_the_audit(tmp_path, write_corpus, corpus_files):
    """Reference: `dedup.audit` on the same folder (ids and content hashes of its documents)."""
    root = write_corpus(corpus_files)
    path = str(tmp_path / "i.index")
    summary = build([str(root)], path)
    audited = dedup.audit([str(root)])
    assert {d["id"]: d["content_hash"] for d in audited.documents} == {
        k: v[0] for k, v in _documents(path).items()
    }
    assert summary.documents == len(corpus_files) and summary.added == len(corpus_files)
    # b/one.txt and b/copy.txt are one text.
    assert summary.sketched == len(corpus_files) - 1 == summary.texts


def test_stored_signatures_equal_datasketch(tmp_path, write_corpus, corpus_files):
    """Reference: datasketch.MinHash(num_perm, seed) over the shingle strings (SHA-1 scheme)."""
    root = write_corpus(corpus_files)
    path = str(tmp_path / "i.index")
    build([str(root)], path, AuditSettings(hash_scheme="datasketch-sha1", num_perm=64, seed=7))
    with sqlite(path) as connection:
        stored = {
            h: unpack_array(s, "<u4")
            for h, s in connection.execute(
                "SELECT t.content_hash, s.signature FROM texts t JOIN sketches s ON s.text_id = t.text_id"
            )
        }
    for text in list(corpus_files.values())[:4]:
        canonical = canonical_text(text)
        reference = MinHash(num_perm=64, seed=7)
        for shingle in shingle_strings(token_text(canonical), 5):
            reference.update(shingle.encode("utf-8"))
        assert stored[dedup.normalize.content_hash(canonical)].tolist() == reference.hashvalues.tolist()


def test_update_sketches_only_new_and_changed_texts(
    tmp_path, write_corpus, corpus_files, base_texts, monkeypatch
):
    root = write_corpus(corpus_files)
    path = str(tmp_path / "i.index")
    build([str(root)], path)
    with sqlite(path) as connection:
        before_rows = dict(connection.execute("SELECT content_hash, text_id FROM texts"))
    (root / "lone/3.txt").write_text(base_texts[8], encoding="utf-8")  # changed
    (root / "lone/new.txt").write_text(base_texts[9], encoding="utf-8")  # added
    (root / "lone/4.txt").unlink()  # removed
    (root / "lone/copy-of-5.txt").write_text(base_texts[5], encoding="utf-8")  # added, text already stored
    sketched: list[int] = []
    original = index_texts._Writer.add

    def spy(self, ids, buf, offsets):
        sketched.extend(ids)
        return original(self, ids, buf, offsets)

    monkeypatch.setattr(index_texts._Writer, "add", spy)
    summary = update([str(root)], path)
    assert (summary.added, summary.changed, summary.removed) == (2, 1, 1)
    assert summary.unchanged == len(corpus_files) - 2
    expected = {dedup.normalize.content_hash(canonical_text(base_texts[k])) for k in (8, 9)}
    with sqlite(path) as connection:
        hash_of = dict(connection.execute("SELECT text_id, content_hash FROM texts"))
    assert {hash_of[i] for i in sketched} == expected and len(sketched) == summary.sketched == 2
    assert summary.resketched == 0
    docs = _documents(path)
    assert docs["lone/4.txt"][1] == "removed"
    with sqlite(path) as connection:
        after_rows = dict(connection.execute("SELECT content_hash, text_id FROM texts"))
    gone = {dedup.normalize.content_hash(canonical_text(base_texts[k])) for k in (3, 4)}
    assert not gone & set(after_rows)
    # Texts kept are the same rows: never re-sketched.
    assert all(after_rows[h] == before_rows[h] for h in set(before_rows) - gone)
    # A removed document that comes back counts as added and is present again.
    (root / "lone/4.txt").write_text(base_texts[4], encoding="utf-8")
    again = update(None, path)
    assert again.added == 1 and _documents(path)["lone/4.txt"][1] == "present"


def test_unchanged_update_changes_nothing(tmp_path, write_corpus, corpus_files):
    root = write_corpus(corpus_files)
    path = str(tmp_path / "i.index")
    build([str(root)], path)
    stats_before, _ = _statistics(path)
    summary = update(None, path)
    assert (summary.added, summary.changed, summary.removed, summary.sketched) == (0, 0, 0, 0)
    stats_after, _ = _statistics(path)
    assert stats_after.norms.tolist() == stats_before.norms.tolist()


@pytest.mark.parametrize("sublinear", [False, True])
def test_statistics_after_updates_equal_scikit_learn_over_the_final_texts(
    tmp_path, write_corpus, corpus_files, base_texts, monkeypatch, sublinear
):
    """Reference: sklearn.feature_extraction.text.TfidfVectorizer(smooth_idf=True, norm=None) fitted on the
    distinct texts of the final state: its idf per term and the norm of each unnormalized row. With 2**32
    hashed columns no two of these terms share a column. Updates go through segments and a merge
    (MAX_SEGMENTS lowered to 2), and must give what a fit from scratch gives."""
    from sklearn.feature_extraction.text import TfidfVectorizer

    monkeypatch.setattr(index_postings, "MAX_SEGMENTS", 2)
    root = write_corpus(corpus_files)
    path = str(tmp_path / "i.index")
    settings = AuditSettings(tfidf_features=2**32, sublinear_tf=sublinear)
    build([str(root)], path, settings)
    for k, name in ((8, "lone/3.txt"), (9, "extra/9.txt"), (10, "extra/10.txt"), (11, "a/two.txt")):
        target = root / name
        target.parent.mkdir(exist_ok=True)
        target.write_text(base_texts[k], encoding="utf-8")
        (root / "lone/5.txt").unlink(missing_ok=True)
        summary = update(None, path)
    assert summary.statistics["segments"] <= 2
    stats, hashes = _statistics(path)
    texts = sorted({canonical_text(d.text) for d in iter_documents([str(root)], ledger=[])})
    by_hash = {dedup.normalize.content_hash(t): token_text(t) for t in texts}
    assert set(hashes.values()) == set(by_hash)
    reference = TfidfVectorizer(analyzer=str.split, smooth_idf=True, norm=None, sublinear_tf=sublinear)
    ordered = [by_hash[hashes[int(i)]] for i in stats.text_ids]
    rows = reference.fit_transform(ordered)
    np.testing.assert_allclose(stats.norms, np.sqrt(rows.multiply(rows).sum(axis=1)).A1, rtol=1e-12)
    from dedup.features import build_features

    vocabulary = reference.get_feature_names_out()
    columns = (build_features([" ".join(vocabulary)], shingle_size=1).token_hashes % np.uint64(2**32)).astype(
        np.int64
    )
    np.testing.assert_allclose(stats.idf(columns), reference.idf_, rtol=1e-12)
    assert stats.n_texts == len(texts) and stats.columns.shape[0] == len(vocabulary)


def test_bad_inputs_are_recorded_skips_and_sources_are_never_modified(
    tmp_path, write_corpus, corpus_files, snapshot
):
    files = dict(corpus_files)
    files["bad/binary.txt"] = b"\x00\x01\x02 binary"
    files["bad/empty.txt"] = ""
    files["bad/image.png"] = b"\x89PNG"
    root = write_corpus(files)
    before = snapshot(root)
    path = str(tmp_path / "i.index")
    summary = build([str(root)], path)
    update(None, path)
    assert snapshot(root) == before
    assert summary.inputs["skipped"] >= 2
    assert "bad/binary.txt" not in _documents(path)


def test_update_of_a_missing_index_or_path_is_a_clear_error(tmp_path, write_corpus, corpus_files):
    from dedup import InputError
    from dedup.index import IndexFileError

    with pytest.raises(IndexFileError, match="no index"):
        update([str(tmp_path)], str(tmp_path / "none.index"))
    path = str(tmp_path / "i.index")
    build([str(write_corpus(corpus_files))], path)
    with pytest.raises(InputError, match="no such file or folder"):
        update([str(tmp_path / "gone")], path)
    assert update(None, path).unchanged == len(corpus_files)  # the failed update left it whole


def test_update_trusts_old_modification_times_and_reads_recent_ones(
    tmp_path, write_corpus, corpus_files, monkeypatch
):
    """Like make and rsync (common practice, no source): a file whose modification time is the one
    stored, and older than the last run, is not read again; a file with a new time is."""
    import os

    root = write_corpus(corpus_files)
    old = 1_600_000_000.0  # files last touched long before the index was built
    for name in corpus_files:
        os.utime(root / name, (old, old))
    path = str(tmp_path / "i.index")
    build([str(root)], path)
    reads = []
    real = index_indexing.prepare_documents

    def spy(documents, *args, **kwargs):
        reads.extend(doc.id for doc in documents)
        return real(documents, *args, **kwargs)

    monkeypatch.setattr(index_indexing, "prepare_documents", spy)
    summary = update(None, path)
    assert reads == [] and summary.unchanged == len(_documents(path))
    assert (summary.added, summary.changed, summary.removed) == (0, 0, 0)
    first = sorted(corpus_files)[0]
    (root / first).write_text(
        "A completely new text for this file, written after the build.", encoding="utf-8"
    )
    summary = update(None, path)
    assert len(reads) == 1 and summary.changed == 1
    assert summary.inputs["read"] == len(_documents(path))
