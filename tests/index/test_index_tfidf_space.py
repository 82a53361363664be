"""The index's TF-IDF space: hashed columns of its own, whatever an audit's default is.

An audit left to its default uses the exact vocabulary (``tfidf_features`` unset, read as
0). An index adds texts into the columns it recorded, so a setting left unset takes the
number it records, or 2**20 hashed columns for a new index; every index built before the
setting could be left unset records 2**20 and must keep taking default settings. A
number given explicitly still has to match the recorded one.
"""

from __future__ import annotations

import json

import pytest
from index_helpers import V1_CORPUS, sqlite

import dedup
from dedup import AuditSettings
from dedup.index import IndexFileError, IndexSettingsError, build, open_index, similar, track_audit, update
from dedup.index.store import index_choices
from dedup.settings import INDEX_TFIDF_FEATURES


def _stored_features(path) -> int:
    with sqlite(path) as db:
        return json.loads(db.execute("SELECT value FROM meta WHERE key = 'settings'").fetchone()[0])[
            "tfidf_features"
        ]


@pytest.fixture
def root(write_corpus, corpus_files):
    return write_corpus(corpus_files)


def test_a_new_index_left_to_its_default_hashes_into_2_to_the_20_columns(tmp_path, root):
    assert AuditSettings().tfidf_features is None and AuditSettings().to_dict()["tfidf_features"] == 0
    path = tmp_path / "new.index"
    build([str(root)], str(path))
    assert _stored_features(path) == INDEX_TFIDF_FEATURES == 2**20
    with open_index(str(path)) as index:
        assert index.settings.tfidf_features == 2**20


def test_an_index_made_by_an_audit_left_to_its_default_is_hashed_too(tmp_path, root):
    result = dedup.audit([str(root)])
    assert result.tfidf["n_features"] == 0  # the audit itself: the exact vocabulary
    path = tmp_path / "audited.index"
    track_audit(str(path), result)
    assert _stored_features(path) == 2**20


def test_an_index_of_the_old_default_takes_default_settings(v1_index, v1_corpus):
    """`v1_index.sql` was built by an older dedup with its default: 2**20 columns recorded."""
    assert _stored_features(v1_index) == 2**20
    summary = update([str(v1_corpus)], str(v1_index), AuditSettings())
    assert summary.sketched == summary.texts == 5
    again = dedup.Index(v1_index).update(settings=AuditSettings(threshold=0.5))
    assert again.kind == "update" and again.unchanged == 5 and again.sketched == 0
    with open_index(str(v1_index), AuditSettings()) as index:
        assert index.settings.tfidf_features == 2**20
        hit = similar(index, V1_CORPUS["pages/beta.txt"], k=1, ranking="tfidf")[0]
    assert hit["document_id"] == "pages/beta.txt" and hit["cosine"] == pytest.approx(1.0)
    assert _stored_features(v1_index) == 2**20
    # A scheduled audit over it with the audit's default settings refreshes it as well.
    result = dedup.audit([str(v1_corpus)], AuditSettings(threshold=0.5))
    delta, _ = track_audit(str(v1_index), result)
    assert delta["index"]["refreshed"] and _stored_features(v1_index) == 2**20


def test_an_explicit_number_that_differs_is_still_refused(tmp_path, root):
    path = str(tmp_path / "hashed.index")
    build([str(root)], path, AuditSettings(tfidf_features=4096))
    for given in (2**20, 0):
        with pytest.raises(IndexSettingsError) as caught:
            update(None, path, AuditSettings(tfidf_features=given))
        message = str(caught.value)
        assert f"tfidf_features 4096 (given {given})" in message and "build a new index" in message
    # Left unset, the setting takes the recorded number.
    assert update(None, path, AuditSettings()).kind == "update"
    assert _stored_features(path) == 4096


def test_an_old_default_index_refuses_an_explicit_exact_vocabulary(v1_index, v1_corpus):
    with pytest.raises(IndexSettingsError, match=r"tfidf_features 1048576 \(given 0\)"):
        update([str(v1_corpus)], str(v1_index), AuditSettings(tfidf_features=0))


def test_an_index_can_be_built_on_the_exact_vocabulary_when_asked(tmp_path, root, corpus_files):
    path = str(tmp_path / "exact.index")
    build([str(root)], path, AuditSettings(tfidf_features=0))
    assert _stored_features(path) == 0
    assert update(None, path, AuditSettings()).kind == "update"
    with open_index(path) as index:
        hit = similar(index, corpus_files["c/one.txt"], k=1, ranking="tfidf")[0]
    assert hit["document_id"] == "c/one.txt" and hit["cosine"] == pytest.approx(1.0)


def test_the_index_choice_leaves_a_given_number_alone():
    assert (
        index_choices(AuditSettings(tfidf_features=64), AuditSettings(tfidf_features=128)).tfidf_features
        == 64
    )
    assert index_choices(AuditSettings(), AuditSettings(tfidf_features=128)).tfidf_features == 128
    assert index_choices(AuditSettings()).tfidf_features == INDEX_TFIDF_FEATURES


def test_a_settings_row_without_a_number_of_columns_is_damage(tmp_path, root):
    path = tmp_path / "null.index"
    build([str(root)], str(path))
    with sqlite(path) as db:
        row = json.loads(db.execute("SELECT value FROM meta WHERE key = 'settings'").fetchone()[0])
        row["tfidf_features"] = None
        db.execute("UPDATE meta SET value = ? WHERE key = 'settings'", (json.dumps(row),))
    with pytest.raises(IndexFileError, match="damaged: its settings row holds tfidf_features = null"):
        open_index(str(path))
