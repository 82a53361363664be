"""Fixtures of the index tests: small corpora with known near-duplicates, and the CLI."""

from __future__ import annotations

import argparse
from pathlib import Path

import pytest
from index_helpers import V1_CORPUS, edited, sqlite

from benchmarks.corpus import synthetic_documents


@pytest.fixture(scope="session")
def base_texts() -> list[str]:
    """Twelve distinct synthetic documents of about 2 KB."""
    return [text for _, text in synthetic_documents(12, seed=21, doc_bytes=2048)]


@pytest.fixture
def corpus_files(base_texts) -> dict[str, str]:
    """Three clusters (a: three members, b and c: two) and five lone documents."""
    t = base_texts
    return {
        "a/one.txt": t[0],
        "a/two.txt": edited(t[0], "zebra"),
        "a/three.md": edited(t[0], "yak", 0.3),
        "b/one.txt": t[1],
        "b/copy.txt": t[1],
        "c/one.txt": t[2],
        "c/two.txt": edited(t[2], "walrus"),
        **{f"lone/{k}.txt": t[k] for k in range(3, 8)},
    }


@pytest.fixture
def cli(capsys):
    """Run ``dedup index|decisions|similar`` through `dedup.cli_index` with a parser made here."""
    from dedup import cli_index

    def run(*argv: str) -> tuple[int, str, str]:
        parser = argparse.ArgumentParser(prog="dedup")
        commands = parser.add_subparsers(dest="command")
        cli_index.register(commands)
        code = cli_index.run(parser.parse_args(list(argv)))
        out = capsys.readouterr()
        return code, out.out, out.err

    return run


# A dump (``sqlite3 .iterdump``) of a real version-1 index of `V1_CORPUS`, built by that dedup
# with its defaults (see `test_index_migration`).
V1_DUMP = Path(__file__).with_name("v1_index.sql")


@pytest.fixture
def v1_index(tmp_path) -> Path:
    """The version-1 index, restored into a file of its own."""
    from dedup.index import schema as index_schema

    path = tmp_path / "v1.index"
    with sqlite(path) as db:
        db.execute(f"PRAGMA page_size = {16384}")
        db.executescript(V1_DUMP.read_text(encoding="utf-8"))
        db.execute(f"PRAGMA application_id = {index_schema.APPLICATION_ID}")
        db.execute("PRAGMA journal_mode = WAL")
        assert db.execute("SELECT value FROM meta WHERE key = 'schema_version'").fetchone() == ("1",)
    return path


@pytest.fixture
def v1_corpus(write_corpus) -> Path:
    """The files the version-1 index was built from."""
    return write_corpus(V1_CORPUS)
