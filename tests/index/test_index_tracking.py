"""``audit --index`` refreshes what ``dedup similar`` searches, in the transaction that records the audit."""

from __future__ import annotations

import pytest
from index_helpers import assert_same_as_fresh, edited, sqlite

import dedup
from dedup.index import build, open_index, similar, track_audit
from dedup.index import history as index_history
from dedup.index.tracking import refresh_settings


def _count(path, sql: str) -> int:
    with sqlite(path) as db:
        return db.execute(sql).fetchone()[0]


def test_an_audit_refreshes_the_documents_and_the_search(tmp_path, write_corpus, corpus_files, base_texts):
    root = write_corpus(corpus_files)
    index = str(tmp_path / "t.index")
    build([str(root)], index)
    (root / "new/fresh.txt").parent.mkdir()
    (root / "new/fresh.txt").write_text(base_texts[9], encoding="utf-8")
    (root / "lone/5.txt").unlink()
    (root / "c/two.txt").write_text(edited(base_texts[2], "pelican"), encoding="utf-8")
    result = dedup.audit([str(root)])
    delta, _ = track_audit(index, result)
    refreshed = delta["index"]
    assert refreshed["refreshed"] and refreshed["kind"] == "update" and refreshed["differ"] == 0
    assert (refreshed["added"], refreshed["changed"], refreshed["removed"]) == (1, 1, 1)
    with open_index(index) as opened:
        assert similar(opened, base_texts[9][:500], k=1)[0]["document_id"] == "new/fresh.txt"
        settings = refresh_settings(opened, result.settings)
    # What is stored is what a fresh build of the same corpus stores: texts, templates, statistics.
    assert_same_as_fresh(root, index, settings, tmp_path, "fresh")


def test_a_failed_record_leaves_the_documents_as_they_were(
    tmp_path, write_corpus, corpus_files, base_texts, monkeypatch
):
    root = write_corpus(corpus_files)
    index = str(tmp_path / "t.index")
    track_audit(index, dedup.audit([str(root)]))
    documents = _count(index, "SELECT count(*) FROM documents")
    (root / "lone/new.txt").write_text(base_texts[10], encoding="utf-8")
    result = dedup.audit([str(root)])

    def broken(*args, **kwargs):
        raise RuntimeError("disk full")

    monkeypatch.setattr("dedup.index.tracking.record_audit", broken)
    with pytest.raises(RuntimeError):
        track_audit(index, result)
    assert _count(index, "SELECT count(*) FROM documents") == documents
    assert (
        _count(index, "SELECT count(*) FROM audits") == 1 and _count(index, "SELECT count(*) FROM runs") == 1
    )
    monkeypatch.setattr("dedup.index.tracking.record_audit", index_history.record_audit)
    track_audit(index, result)
    assert _count(index, "SELECT count(*) FROM documents") == documents + 1


def test_the_index_keeps_its_own_sketch_settings(tmp_path, write_corpus, corpus_files):
    root = write_corpus(corpus_files)
    index = str(tmp_path / "t.index")
    build([str(root)], index, dedup.AuditSettings(num_perm=64))
    result = dedup.audit([str(root)], dedup.AuditSettings(threshold=0.7, keeper_policy="newest"))
    delta, _ = track_audit(index, result)
    assert delta["index"]["refreshed"] and delta["index"]["sketched"] == 0
    with open_index(index) as opened:
        assert opened.settings.num_perm == 64
