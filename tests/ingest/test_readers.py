"""Reading inputs: every input ends in the ledger exactly once, with a reason when not read."""

from __future__ import annotations

import os

import pytest

from dedup.ingest import InputError, decode_text, iter_documents
from dedup.ingest.html_text import html_to_text


def _read(root, **kw):
    ledger = []
    docs = list(iter_documents([str(root)], ledger=ledger, **kw))
    return docs, ledger


def test_every_file_is_accounted_for(write_corpus):
    root = write_corpus(
        {
            "a.txt": "plain text",
            "b.md": "# Title\n\nbody",
            "c.html": "<html><head><title>Page</title><style>p{}</style></head><body><script>bad()</script><p>Hello</p></body></html>",
            "d.png": b"\x89PNG\r\n\x1a\n\x00\x00",
            "e.txt": b"\x00\x01\x02binary",
            "f.txt": b"caf\xe9 latin-1",
            ".hidden.txt": "secret",
            "sub/g.rst": "Section\n=======\n\ntext",
        }
    )
    docs, ledger = _read(root)
    assert sorted(d.id for d in docs) == ["a.txt", "b.md", "c.html", "sub/g.rst"]
    by_input = {e.input: e for e in ledger}
    assert len(by_input) == len(ledger) == 8
    assert by_input["d.png"].reason == "unsupported file type .png"
    assert by_input["e.txt"].reason.startswith("binary data: NUL byte at offset 0")
    assert "not UTF-8 text: byte 0xe9 at offset 3" in by_input["f.txt"].reason
    assert by_input[".hidden.txt"].reason.startswith("hidden file")
    html = next(d for d in docs if d.id == "c.html")
    assert "Hello" in html.text and "bad()" not in html.text and "p{}" not in html.text
    assert html.title == "Page"


def test_boms_are_decoded():
    for encoding in ("utf-8-sig", "utf-16", "utf-32"):
        text, _, problem = decode_text("Grüße".encode(encoding))
        assert text == "Grüße" and problem == ""


def test_jsonl_records_with_a_broken_line(write_corpus):
    root = write_corpus(
        {
            "r.jsonl": '{"id": "x1", "body": "first"}\n{broken\n\n{"id": "x2", "body": "second"}\n[1, 2]\n{"id": "x3"}\n{"id": "x1", "body": "again"}\n'
        }
    )
    docs, ledger = _read(root, id_field="id", text_fields=("body",))
    assert [d.id for d in docs] == ["r.jsonl#x1", "r.jsonl#x2"]
    skipped = {e.record: e.reason for e in ledger if e.status == "skipped"}
    assert skipped["line 2"].startswith("line 2: not valid JSON")
    assert "not an object" in skipped["line 5"]
    assert "no field 'body'" in skipped["line 6"]
    assert "repeats an earlier record" in skipped["line 7"]
    assert len(ledger) == 6  # the blank line is not an input


def test_csv_with_quoted_newlines_ragged_rows_and_missing_column(write_corpus):
    root = write_corpus(
        {
            "t.csv": 'id,text\n1,"line one\nline two"\n2,short\n3,too,many\n',
            "u.csv": "id,body\n1,hello\n",
        }
    )
    docs, ledger = _read(root, id_field="id")
    assert [d.id for d in docs] == ["t.csv#1", "t.csv#2"]
    assert docs[0].text == "line one\nline two"
    reasons = [e.reason for e in ledger if e.status == "skipped"]
    assert any("3 cells where the header has 2" in r for r in reasons)
    assert any(r.startswith("no column 'text' (columns: id, body)") for r in reasons)


def test_missing_path_is_an_input_error(tmp_path):
    with pytest.raises(InputError, match="no such file or folder"):
        list(iter_documents([str(tmp_path / "nope")], ledger=[]))


def test_unreadable_and_vanishing_files_are_recorded_skips(write_corpus, monkeypatch):
    # Permissions cannot be tested for real as root (root reads anything), so the failure is
    # injected where the reader opens files.
    from dedup.ingest import walk

    root = write_corpus({"locked.txt": "text", "gone.txt": "text", "fine.txt": "text"})
    real_open = walk._open_descriptor

    def fake_open(path):
        name = os.path.basename(path)
        if name == "locked.txt":
            raise PermissionError(13, "Permission denied")
        if name == "gone.txt":
            raise FileNotFoundError(2, "No such file or directory")
        return real_open(path)

    monkeypatch.setattr(walk, "_open_descriptor", fake_open)
    docs, ledger = _read(root)
    assert [d.id for d in docs] == ["fine.txt"]
    reasons = {e.input: e.reason for e in ledger}
    assert reasons["locked.txt"] == "cannot be read: Permission denied"
    assert reasons["gone.txt"] == "cannot be read: No such file or directory"


def test_symlink_loop_is_not_followed(write_corpus):
    root = write_corpus({"a.txt": "text"})
    os.symlink(root, root / "loop")
    docs, ledger = _read(root)
    assert [d.id for d in docs] == ["a.txt"]
    assert any(e.input == "loop" and "link to a folder" in e.reason for e in ledger)


def test_html_that_never_closes_head_still_has_a_body():
    text, title = html_to_text("<html><head><title>T</title><body><p>visible</p>")
    assert "visible" in text and title == "T"
