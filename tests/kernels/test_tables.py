"""Character tables kept on disk are the tables built from Python's Unicode database."""

from __future__ import annotations

import os

import numpy as np
import pytest

from dedup.features import tokenize
from dedup.kernels import tables
from dedup.normalize import canonical_bytes


@pytest.mark.parametrize(
    "name, build",
    [
        ("word-table", tokenize._build_word_table),
        ("fold-table", canonical_bytes._build_fold_table),
        ("nfkc-table", canonical_bytes._build_nfkc_table),
    ],
)
def test_a_kept_table_reads_back_as_built(tmp_path, monkeypatch, name, build):
    """Reference: the table built again from `str.isalnum`, `str.casefold`, `unicodedata.normalize`."""
    monkeypatch.setenv("DEDUP_CACHE_DIR", str(tmp_path))
    calls = []

    def counted():
        calls.append(1)
        return build()

    first = tables.stored_table(name, 1, counted)
    again = tables.stored_table(name, 1, counted)
    assert calls == [1]  # built once, then read from the folder
    assert again.dtype == first.dtype and np.array_equal(again, first)
    assert np.array_equal(again, build())


def test_an_unwritable_cache_folder_only_means_building_again(tmp_path, monkeypatch):
    blocked = tmp_path / "file-not-folder"
    blocked.write_text("x")
    monkeypatch.setenv("DEDUP_CACHE_DIR", str(blocked))
    built = tables.stored_table("t", 1, lambda: np.arange(5, dtype=np.int32))
    assert built.tolist() == [0, 1, 2, 3, 4]
    assert blocked.read_text() == "x"


def test_a_damaged_file_is_built_again(tmp_path, monkeypatch):
    monkeypatch.setenv("DEDUP_CACHE_DIR", str(tmp_path))
    tables.stored_table("t", 2, lambda: np.arange(3, dtype=np.int64))
    (kept,) = [p for p in os.listdir(tmp_path) if p.endswith(".npy")]
    (tmp_path / kept).write_bytes(b"not a table")
    assert tables.stored_table("t", 2, lambda: np.arange(4, dtype=np.int64)).tolist() == [0, 1, 2, 3]
