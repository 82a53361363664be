"""Recognising an index file: what is refused, with which message, and the schema migrations."""

from __future__ import annotations

from pathlib import Path

import pytest
from index_helpers import sqlite

from dedup import AuditSettings
from dedup.index import IndexFileError, IndexSettingsError, build, open_index, similar, update
from dedup.index import schema as index_schema


@pytest.fixture
def built(tmp_path, write_corpus, corpus_files):
    path = str(tmp_path / "corpus.index")
    build([str(write_corpus(corpus_files))], path)
    return path


def test_a_new_index_is_marked_as_ours_and_in_wal_mode(built):
    """Reference: SQLite's own PRAGMAs (application_id, journal_mode, integrity_check)."""
    with sqlite(built) as connection:
        _check_marks(connection)


def _check_marks(connection) -> None:
    assert connection.execute("PRAGMA application_id").fetchone()[0] == int.from_bytes(b"DDUP", "big")
    assert connection.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
    assert connection.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    meta = dict(connection.execute("SELECT key, value FROM meta"))
    assert meta["format"] == "dedup-index" and meta["schema_version"] == str(index_schema.SCHEMA_VERSION)


def test_missing_index_names_the_command_that_creates_one(tmp_path):
    with pytest.raises(IndexFileError, match="no index at .*dedup index build"):
        open_index(str(tmp_path / "none.index"))


def test_a_text_file_is_not_an_index(tmp_path):
    path = tmp_path / "notes.index"
    path.write_text("just some notes, long enough to have a header" * 4)
    with pytest.raises(IndexFileError, match="not a dedup index \\(not an SQLite file\\)"):
        open_index(str(path))


def test_another_programs_sqlite_file_is_not_an_index(tmp_path):
    path = str(tmp_path / "other.sqlite")
    with sqlite(path) as connection:
        connection.execute("CREATE TABLE things (x)")
    with pytest.raises(IndexFileError, match="SQLite file but not a dedup index"):
        open_index(path)
    with pytest.raises(IndexFileError, match="SQLite file but not a dedup index"):
        open_index(path, create=True)


def test_a_newer_schema_is_refused(built):
    with sqlite(built) as connection:
        connection.execute("UPDATE meta SET value = '99' WHERE key = 'schema_version'")
    with pytest.raises(IndexFileError, match="newer dedup \\(schema version 99"):
        open_index(built)


def test_a_damaged_file_gives_a_one_line_error_not_a_traceback(built):
    with sqlite(built) as connection:
        connection.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    target = Path(built)
    data = bytearray(target.read_bytes())
    # Keep the 100-byte SQLite header, scramble every page after the first.
    page = int.from_bytes(data[16:18], "big") or 65536
    for i in range(page, len(data)):
        data[i] = (i * 131 + 7) % 256
    target.write_bytes(bytes(data))
    with pytest.raises(IndexFileError) as caught, open_index(built) as index:
        similar(index, "some words to search for")
    message = str(caught.value)
    assert "\n" not in message and built in message


def test_sketch_settings_cannot_be_mixed(built, write_corpus, corpus_files):
    with pytest.raises(IndexSettingsError, match="num_perm 128 \\(given 64\\).*build a new index"):
        update(None, built, AuditSettings(num_perm=64))
    with pytest.raises(IndexSettingsError, match="shingle_size 5 \\(given 3\\)"):
        open_index(built, AuditSettings(shingle_size=3))
    # Reading options may change: they are recorded.
    summary = update(None, built, AuditSettings(include_hidden=True))
    assert summary.kind == "update"
    with open_index(built) as index:
        assert index.settings.include_hidden is True


def test_building_over_an_index_is_refused(built, write_corpus, corpus_files):
    with pytest.raises(IndexFileError, match="already holds an index"):
        build([str(write_corpus(corpus_files))], built)


def test_an_older_schema_is_migrated_in_one_step(built, monkeypatch):
    def add_notes(connection):
        connection.execute("CREATE TABLE notes (text TEXT)")

    version = index_schema.SCHEMA_VERSION
    monkeypatch.setattr(index_schema, "SCHEMA_VERSION", version + 1)
    monkeypatch.setattr(index_schema, "MIGRATIONS", {version: add_notes})
    with open_index(built) as index:
        assert index.meta("schema_version") == str(version + 1)
        tables = {
            r[0] for r in index.connection.execute("SELECT name FROM sqlite_master WHERE type = 'table'")
        }
        assert "notes" in tables


def test_a_failed_migration_leaves_the_file_as_it_was(built, monkeypatch):
    def broken(connection):
        connection.execute("CREATE TABLE half_done (x)")
        raise RuntimeError("migration failed")

    version = index_schema.SCHEMA_VERSION
    monkeypatch.setattr(index_schema, "SCHEMA_VERSION", version + 1)
    monkeypatch.setattr(index_schema, "MIGRATIONS", {version: broken})
    with pytest.raises(RuntimeError):
        open_index(built)
    with sqlite(built) as connection:
        stored = connection.execute("SELECT value FROM meta WHERE key = 'schema_version'").fetchone()[0]
        assert stored == str(version)
        assert not connection.execute("SELECT name FROM sqlite_master WHERE name = 'half_done'").fetchall()


def test_an_interrupted_first_build_leaves_a_file_a_new_build_can_use(tmp_path, write_corpus, corpus_files):
    path = tmp_path / "empty.index"
    path.write_bytes(b"")
    with pytest.raises(IndexFileError, match="empty"):
        open_index(str(path))
    summary = build([str(write_corpus(corpus_files))], str(path))
    assert summary.documents == len(corpus_files)
