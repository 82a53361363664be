"""A damaged index is refused in one line, and nothing is ever written into it.

Reference for page damage: SQLite's own ``PRAGMA integrity_check`` (what ``dedup index info --check`` runs),
asked on the damaged file before each refusal is checked.
"""

from __future__ import annotations

import json
import os
import sqlite3
import subprocess
import sys
from pathlib import Path

import pytest
from index_helpers import copy_index, sqlite

import dedup
from dedup.index import (
    IndexFileError,
    accept_latest,
    build,
    import_decisions,
    open_index,
    similar,
    track_audit,
    update,
)
from dedup.index.store import SKETCH_KEYS

ROOT = Path(__file__).resolve().parents[2]


@pytest.fixture(scope="module")
def sound(tmp_path_factory, base_texts):
    """A corpus, its audit and an index of it with that audit recorded and one decision imported."""
    root = tmp_path_factory.mktemp("damage")
    corpus = root / "corpus"
    for n, text in enumerate(base_texts[:6]):
        (corpus / f"f{n % 2}").mkdir(parents=True, exist_ok=True)
        (corpus / f"f{n % 2}" / f"{n}.txt").write_text(text, encoding="utf-8")
    (corpus / "f0" / "copy.txt").write_text(base_texts[0] + " one more line", encoding="utf-8")
    path = str(root / "sound.index")
    build([str(corpus)], path)
    result = dedup.audit([str(corpus)])
    track_audit(path, result)
    with open_index(path) as index:
        import_decisions(index, _decisions(result))
    return {"corpus": str(corpus), "index": path, "result": result}


def _decisions(result) -> dict:
    hash_of = {d["id"]: d["content_hash"] for d in result.documents}
    members = [m["document_id"] for m in result.clusters[0]["members"]][:2]
    return {
        "schema": "dedup-review-decisions",
        "schema_version": 1,
        "audit_id": result.audit_id,
        "exported_at": "2024-05-02T10:00:00Z",
        "decisions": [
            {
                "kind": "pair",
                "cluster_id": result.clusters[0]["id"],
                "documents": [{"id": d, "content_hash": hash_of[d]} for d in members],
                "decision": "keep-both",
                "comment": "later",
                "decided_at": "2024-05-03T10:00:00Z",
            }
        ],
    }


@pytest.fixture
def copy(sound, tmp_path):
    """A copy of the sound index (its write-ahead log folded in), to damage."""
    path = tmp_path / "copy.index"
    copy_index(sound["index"], path)
    with sqlite(path) as connection:
        connection.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    return path


def _writes(sound, path: Path):
    """Every kind of write to the index, each a callable."""
    result, corpus = sound["result"], sound["corpus"]

    def import_():
        with open_index(str(path)) as index:
            import_decisions(index, _decisions(result))

    def accept():
        with open_index(str(path)) as index:
            accept_latest(index)

    return {
        "update": lambda: update(None, str(path)),
        "update paths": lambda: update([corpus], str(path)),
        "audit": lambda: track_audit(str(path), result, "any"),
        "import decisions": import_,
        "accept baseline": accept,
    }


def _refused_unchanged(sound, path: Path, pattern: str) -> None:
    """Each write raises a one-line `IndexFileError` matching ``pattern``, and the file's bytes stay."""
    before = path.read_bytes()
    for name, write in _writes(sound, path).items():
        with pytest.raises(IndexFileError, match=pattern) as caught:
            write()
        message = str(caught.value)
        assert "\n" not in message and str(path) in message and "dedup index build" in message, name
        assert path.read_bytes() == before, name
        wal = Path(f"{path}-wal")
        assert not wal.exists() or wal.stat().st_size == 0, name


# -- the settings row and the schema version ------------------------------------------------------


def _set_meta(path: Path, key: str, value) -> None:
    with sqlite(path) as connection:
        connection.execute("UPDATE meta SET value = ? WHERE key = ?", (value, key))


def _execute(path: Path, statement: str) -> None:
    with sqlite(path) as connection:
        connection.execute(statement)


def _set_setting(path: Path, key: str, value) -> None:
    with sqlite(path) as connection:
        stored = json.loads(connection.execute("SELECT value FROM meta WHERE key = 'settings'").fetchone()[0])
        stored[key] = value
        connection.execute("UPDATE meta SET value = ? WHERE key = 'settings'", (json.dumps(stored),))


SETTINGS_DAMAGE = [
    ("not JSON", lambda p: _set_meta(p, "settings", "{not json"), "its settings row is not JSON"),
    ("a list", lambda p: _set_meta(p, "settings", "[1, 2]"), "not a JSON object"),
    ("null", lambda p: _set_meta(p, "settings", "null"), "not a JSON object"),
    ("deep", lambda p: _set_meta(p, "settings", "[" * 100_000), "its settings row is not JSON"),
    ("missing", lambda p: _execute(p, "DELETE FROM meta WHERE key = 'settings'"), "no settings row"),
    ("lacks a sketch setting", lambda p: _drop_setting(p, "num_perm"), "lacks num_perm"),
    ("text for a number", lambda p: _set_setting(p, "num_perm", "x"), 'num_perm = "x", which is not int'),
    ("a bool for a number", lambda p: _set_setting(p, "seed", True), "seed = true, which is not int"),
    (
        "a number for a bool",
        lambda p: _set_setting(p, "sublinear_tf", 0),
        "sublinear_tf = 0, which is not bool",
    ),
    ("text for a list", lambda p: _set_setting(p, "text_fields", "body"), "text_fields"),
    ("a refused value", lambda p: _set_setting(p, "num_perm", -3), "setting dedup refuses: num_perm"),
    (
        "not UTF-8",
        lambda p: _execute(p, "UPDATE meta SET value = CAST(x'fffe' AS TEXT) WHERE key = 'settings'"),
        "a stored text is not UTF-8",
    ),
    ("schema version text", lambda p: _set_meta(p, "schema_version", "3x"), "no schema version"),
    ("schema version digit", lambda p: _set_meta(p, "schema_version", "\u0663"), "no schema version"),
]


def _drop_setting(path: Path, key: str) -> None:
    with sqlite(path) as connection:
        stored = json.loads(connection.execute("SELECT value FROM meta WHERE key = 'settings'").fetchone()[0])
        del stored[key]
        connection.execute("UPDATE meta SET value = ? WHERE key = 'settings'", (json.dumps(stored),))


@pytest.mark.parametrize("name, damage, why", SETTINGS_DAMAGE, ids=[d[0] for d in SETTINGS_DAMAGE])
def test_a_damaged_settings_row_or_version_is_refused_when_opened(sound, copy, name, damage, why):
    damage(copy)
    with pytest.raises(IndexFileError, match=f"{copy} is damaged: .*{why}"):
        open_index(str(copy))
    _refused_unchanged(sound, copy, f"is damaged: .*{why}")


def test_every_sketch_setting_is_required(sound, copy):
    for key in SKETCH_KEYS:
        copy_index(sound["index"], copy)
        _drop_setting(copy, key)
        with pytest.raises(IndexFileError, match=f"settings row lacks {key}"):
            open_index(str(copy))


def test_the_sound_index_opens_and_takes_every_write(sound, copy):
    """The control of the tests above: the same writes on the undamaged copy succeed."""
    for write in _writes(sound, copy).values():
        write()
    with sqlite(copy) as connection:
        assert connection.execute("PRAGMA integrity_check").fetchall() == [("ok",)]


# -- damaged pages --------------------------------------------------------------------------------


def _page_size(path: Path) -> int:
    with sqlite(path) as connection:
        return connection.execute("PRAGMA page_size").fetchone()[0]


def _root_page(path: Path, table: str) -> int:
    with sqlite(path) as connection:
        return connection.execute("SELECT rootpage FROM sqlite_master WHERE name = ?", (table,)).fetchone()[0]


def _scramble(path: Path, start: int, length: int) -> None:
    data = bytearray(path.read_bytes())
    for i in range(start, start + length):
        data[i] = (i * 131 + 7) % 256
    path.write_bytes(bytes(data))


def _sqlite_calls_it_damaged(path: Path) -> bool:
    """Reference: SQLite's integrity check (a file too damaged to check counts as damaged)."""
    try:
        with sqlite(path) as connection:
            return connection.execute("PRAGMA integrity_check").fetchall() != [("ok",)]
    except sqlite3.DatabaseError:
        return True


@pytest.mark.parametrize("table", ["documents", "decisions", "postings", "sketches", "audits", "cluster_ids"])
def test_a_damaged_table_page_is_refused_before_any_write(sound, copy, table):
    """The b-tree page header of each table's root overwritten: every write refuses, the bytes stay."""
    page = _root_page(copy, table)
    _scramble(copy, (page - 1) * _page_size(copy), 64)
    assert _sqlite_calls_it_damaged(copy)
    _refused_unchanged(sound, copy, "is damaged: ")


def test_bytes_overwritten_in_the_middle_of_the_file_are_refused(sound, copy):
    size, page = copy.stat().st_size, _page_size(copy)
    middle = (size // page // 2) * page
    _scramble(copy, middle, page // 2)
    assert _sqlite_calls_it_damaged(copy)
    _refused_unchanged(sound, copy, "is damaged: ")


def test_a_search_of_a_damaged_file_is_a_one_line_error(copy):
    _scramble(copy, (_root_page(copy, "meta") - 1) * _page_size(copy), 64)
    with pytest.raises(IndexFileError, match="is damaged: ") as caught, open_index(str(copy)) as index:
        similar(index, "words to look for")
    assert "\n" not in str(caught.value)


# -- stored JSON that does not parse ---------------------------------------------------------------

JSON_DAMAGE = [
    ("paths of the last run", "UPDATE runs SET roots = '[\"a\", ' WHERE run = (SELECT max(run) FROM runs)"),
    ("paths not a list", "UPDATE runs SET roots = '{\"a\": 1}' WHERE run = (SELECT max(run) FROM runs)"),
    ("recorded clusters", "UPDATE audits SET clusters = 'not json'"),
    ("decision documents", "UPDATE decisions SET documents = '[[\"a\", '"),
]


@pytest.mark.parametrize("name, statement", JSON_DAMAGE, ids=[d[0] for d in JSON_DAMAGE])
def test_stored_json_that_does_not_parse_is_damage_and_the_write_is_rolled_back(sound, copy, name, statement):
    with sqlite(copy) as connection:
        connection.execute(statement)
        connection.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    before = copy.read_bytes()
    write = _writes(sound, copy)["update" if name.startswith("paths") else "audit"]
    with pytest.raises(IndexFileError, match=f"{copy} is damaged: .*dedup index build") as caught:
        write()
    assert "\n" not in str(caught.value)
    assert copy.read_bytes() == before


# -- the command line --------------------------------------------------------------------------------


def _dedup(*args: str) -> subprocess.CompletedProcess:
    env = dict(os.environ)
    env.pop("DEDUP_DEBUG", None)
    return subprocess.run(
        [sys.executable, "-m", "dedup", *args], cwd=ROOT, capture_output=True, text=True, env=env, timeout=300
    )


def _usage_error(run: subprocess.CompletedProcess, *words: str) -> None:
    """Exit code 2 and one line on stderr, ``dedup: error: …``, holding ``words``."""
    assert run.returncode == 2, run.stderr
    lines = run.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("dedup: error: "), run.stderr
    assert all(word in lines[0] for word in words), lines[0]


def test_the_commands_exit_2_on_a_damaged_index_and_leave_it_as_it_was(sound, copy, tmp_path):
    decisions = tmp_path / "decisions.json"
    decisions.write_text(json.dumps(_decisions(sound["result"])), encoding="utf-8")
    _scramble(copy, (_root_page(copy, "documents") - 1) * _page_size(copy), 64)
    before = copy.read_bytes()
    runs = {
        "update": _dedup("index", "update", "--index", str(copy), "--quiet"),
        "import": _dedup("decisions", "import", str(decisions), "--index", str(copy)),
        "audit": _dedup(
            "audit", sound["corpus"], "--out", str(tmp_path / "out"), "--index", str(copy), "--quiet"
        ),
    }
    for name, run in runs.items():
        _usage_error(run, str(copy), "is damaged")
        assert copy.read_bytes() == before, name
    copy_index(sound["index"], copy)  # a sound file again, then its settings row damaged
    _set_meta(copy, "settings", "{not json")
    _usage_error(_dedup("index", "update", "--index", str(copy), "--quiet"), "settings row is not JSON")


def test_the_import_exits_2_naming_the_file_and_the_decision(sound, copy, tmp_path):
    data = _decisions(sound["result"])
    data["decisions"][0]["decided_at"] = "2026-99-99T00:00:00Z"
    path = tmp_path / "decisions.json"
    path.write_text(json.dumps(data), encoding="utf-8")
    before = copy.read_bytes()
    _usage_error(_dedup("decisions", "import", str(path), "--index", str(copy)), str(path), "decision 1")
    path.write_text("[" * 2000 + "]" * 2000, encoding="utf-8")
    _usage_error(_dedup("decisions", "import", str(path), "--index", str(copy)), str(path), "nest deeper")
    assert copy.read_bytes() == before
