"""An index written by the dedup of schema version 1 is migrated, not lost.

`v1_index.sql` is a dump (``sqlite3 .iterdump``) of a real version-1 index of `V1_CORPUS`,
built by that dedup, with one audit recorded and one review decision imported. Version 1
sketched whole texts and kept neither line hashes nor canonical forms, so the migration
keeps documents, audits and decisions, drops the sketches, and the next update sketches
every text again.
"""

from __future__ import annotations

import json

import pytest
from index_helpers import V1_CORPUS, assert_same_as_fresh, sqlite

import dedup
from dedup import AuditSettings
from dedup.index import IndexFileError, open_index, similar, track_audit, update
from dedup.index import schema as index_schema


def _count(path, table: str) -> int:
    with sqlite(path) as db:
        return db.execute(f"SELECT count(*) FROM {table}").fetchone()[0]


def test_opening_migrates_and_keeps_documents_audits_and_decisions(v1_index, cli):
    with open_index(str(v1_index)) as index:
        assert index.meta("schema_version") == str(index_schema.SCHEMA_VERSION)
        assert index.meta(index_schema.NEEDS_UPDATE)
        with pytest.raises(IndexFileError, match="run 'dedup index update' once"):
            similar(index, "gamma rays from the lab")
    assert (_count(v1_index, "documents"), _count(v1_index, "audits"), _count(v1_index, "decisions")) == (
        5,
        1,
        1,
    )
    assert _count(v1_index, "texts") == _count(v1_index, "postings") == 0
    code, out, err = cli("similar", "gamma rays", "--index", str(v1_index))
    assert (
        code == 2
        and err.startswith("dedup: error: ")
        and "dedup index update" in err
        and err.count("\n") == 1
    )


def test_the_update_after_sketches_every_text_as_a_fresh_build(v1_index, v1_corpus, tmp_path):
    settings = AuditSettings(threshold=0.5)
    summary = update([str(v1_corpus)], str(v1_index), settings)
    # Same content hashes as version 1 computed: every document is unchanged, every text is sketched.
    assert (summary.added, summary.changed, summary.removed, summary.unchanged) == (0, 0, 0, 5)
    assert summary.sketched == summary.texts == 5 and summary.template_lines == 2
    assert_same_as_fresh(v1_corpus, v1_index, settings, tmp_path, "fresh")
    with open_index(str(v1_index)) as index:
        assert index.meta(index_schema.NEEDS_UPDATE) is None
        assert similar(index, V1_CORPUS["pages/beta.txt"], k=1)[0]["document_id"] == "pages/beta.txt"
    with sqlite(v1_index) as db:
        assert db.execute("SELECT min(added_run), max(added_run) FROM documents").fetchone() == (1, 1)


def test_decisions_made_before_the_migration_still_hold(v1_index, v1_corpus):
    update([str(v1_corpus)], str(v1_index))
    result = dedup.audit([str(v1_corpus)], AuditSettings(threshold=0.5))
    delta, failed = track_audit(str(v1_index), result, "any")
    assert delta["review"]["clusters"]["reviewed"] == 1 and not failed
    assert delta["previous"] is not None and delta["counts"]["unchanged"] == 1


def _as_version_2(path) -> None:
    """Turn a version-3 index into what version 2 wrote: no stable ids, no search statistics."""
    with sqlite(path) as db:
        db.execute("DROP TABLE cluster_ids")
        db.execute("ALTER TABLE tfidf DROP COLUMN search_norms")
        db.execute("ALTER TABLE tfidf DROP COLUMN lengths")
        for seq, clusters in db.execute("SELECT seq, clusters FROM audits").fetchall():
            records = [
                {k: v for k, v in r.items() if k not in ("stable_id", "origin", "from")}
                for r in json.loads(clusters)
            ]
            db.execute("UPDATE audits SET clusters = ? WHERE seq = ?", (json.dumps(records), seq))
        db.execute("DELETE FROM meta WHERE key IN ('baseline', 'baseline_accepted_at')")
        db.execute("UPDATE meta SET value = '2' WHERE key = 'schema_version'")


def test_a_version_2_index_gets_stable_ids_and_search_statistics(tmp_path, v1_corpus):
    path = str(tmp_path / "v2.index")
    settings = AuditSettings(threshold=0.5)
    first = dedup.audit([str(v1_corpus)], settings)
    track_audit(path, first)
    ids = [c["stable_id"] for c in first.clusters]
    query = V1_CORPUS["pages/gamma.txt"]
    with open_index(path) as index:
        before = similar(index, query, k=3)
    _as_version_2(path)
    with open_index(path) as index:
        assert index.meta("schema_version") == str(index_schema.SCHEMA_VERSION)
        assert similar(index, query, k=3) == before
    second = dedup.audit([str(v1_corpus)], settings)
    delta, _ = track_audit(path, second, "any")
    assert [c["stable_id"] for c in second.clusters] == ids and delta["counts"]["unchanged"] == len(ids)
