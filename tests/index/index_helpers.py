"""Helpers shared by the index tests."""

from __future__ import annotations

import contextlib
import sqlite3
from collections.abc import Iterator


def edited(text: str, word: str, where: float = 0.5) -> str:
    """The text with one word replaced (a near-duplicate: Jaccard about 0.97 for 2 KB)."""
    words = text.split(" ")
    words[int(len(words) * where)] = word
    return " ".join(words)


@contextlib.contextmanager
def sqlite(path) -> Iterator[sqlite3.Connection]:
    """A plain SQLite connection to an index file in autocommit mode, closed on leaving.

    (``with sqlite3.connect(...)`` commits but does not close, and a connection left open
    keeps locks and shared memory that other tests would see.)
    """
    connection = sqlite3.connect(str(path), isolation_level=None)
    try:
        yield connection
    finally:
        connection.close()


def copy_index(source, target) -> None:
    """Copy an index with SQLite's backup API (copying the file under open connections is unsafe)."""
    with sqlite(source) as a, sqlite(target) as b:
        a.backup(b)
