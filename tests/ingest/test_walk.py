"""Finding inputs: globs, hidden and version-control folders, standard input, links, limits."""

from __future__ import annotations

import io
import os
import subprocess
import sys
import time
import tracemalloc

import pytest

from dedup.ingest import iter_documents, summarize
from dedup.ingest import walk as walk_module


def test_hidden_files_and_vcs_folders_are_counted_not_read(write_corpus, read):
    root = write_corpus(
        {
            "a.txt": "text",
            ".env.txt": "hidden file",
            ".cache/b.txt": "hidden folder",
            ".git/HEAD.txt": "history",
            "sub/.svn/entries.txt": "history",
            "CVS/Root.txt": "history",
        }
    )
    docs, ledger, by_key = read(root)
    assert [d.id for d in docs] == ["a.txt"]
    assert len(ledger) == 6  # one entry per passed-over folder, not per file in it
    assert by_key[".env.txt"].reason == "hidden file (read it with --include-hidden)"
    assert by_key[".cache"].reason == "hidden folder (read it with --include-hidden)"
    for folder in (".git", "sub/.svn", "CVS"):
        assert by_key[folder].reason == "version-control folder (read it with --include-vcs)"
    docs, _, by_key = read(root, include_hidden=True)
    assert [d.id for d in docs] == [".env.txt", "a.txt", ".cache/b.txt"]  # a folder's files, then its folders
    assert ".git" in by_key  # hidden files do not open version-control folders
    docs, _, _ = read(root, include_hidden=True, include_vcs=True)
    assert len(docs) == 6


def test_include_and_exclude_globs(write_corpus, read):
    root = write_corpus(
        {
            "docs/a.md": "a",
            "docs/b.txt": "b",
            "docs/drafts/c.md": "c",
            "build/d.md": "d",
            "node_modules/pkg/e.md": "e",
        }
    )
    docs, ledger, by_key = read(root, include=["*.md"], exclude=["docs/drafts/*", "build/", "node_modules"])
    assert [d.id for d in docs] == ["docs/a.md"]
    assert by_key["docs/b.txt"].reason == "not matched by --include"
    assert by_key["docs/drafts"].reason == "excluded by --exclude 'docs/drafts/*'"  # the folder, once
    assert by_key["build"].reason == "excluded by --exclude 'build/'"
    assert by_key["node_modules"].reason == "excluded by --exclude 'node_modules'"
    assert summarize(ledger)["skipped"] == 4


def test_paths_from_standard_input(write_corpus, read):
    root = write_corpus({"a.txt": "one", "sub/b.md": "two", "c.txt": "three"})
    listed = f"{root / 'a.txt'}\n\n{root / 'sub'}\r\n{root / 'gone.txt'}\n"
    docs, _, by_key = read(["-"], stdin=io.StringIO(listed))
    assert [d.id for d in docs] == ["a.txt", "sub/b.md"]
    assert by_key["gone.txt"].reason == "no such file or folder (listed on standard input)"
    nul_separated = io.BytesIO(f"{root / 'c.txt'}\0{root / 'a.txt'}\0".encode())
    docs, _, _ = read(["-"], stdin=io.TextIOWrapper(nul_separated))
    assert [d.id for d in docs] == ["c.txt", "a.txt"]  # in the order listed


def test_symlink_loops_and_broken_links(write_corpus, read):
    root = write_corpus({"a.txt": "text", "sub/b.txt": "more"})
    os.symlink(root, root / "sub" / "up")  # a folder loop
    os.symlink(root / "self.txt", root / "self.txt")  # a link to itself
    os.symlink(root / "missing.txt", root / "dangling.txt")
    os.symlink(root / "a.txt", root / "alias.txt")
    docs, _, by_key = read(root)
    assert [d.id for d in docs] == ["a.txt", "sub/b.txt"]
    assert by_key["sub/up"].reason == "link to a folder, not followed"
    assert by_key["self.txt"].reason == "link loop, not followed"
    assert by_key["dangling.txt"].reason == "broken link (its target does not exist)"
    assert by_key["alias.txt"].reason == "same file as a.txt, read once"


def test_unreadable_files_and_folders(write_corpus, read, monkeypatch):
    # Tests run as root, who reads anything: the permission errors are injected.
    root = write_corpus({"ok.txt": "fine", "locked.zip": b"PK", "secret/x.txt": "x"})
    real_open, real_scandir = open, os.scandir

    def fake_open(path, *args, **kwargs):
        if os.path.basename(path) == "locked.zip":
            raise PermissionError(13, "Permission denied")
        return real_open(path, *args, **kwargs)

    def fake_scandir(path):
        if os.path.basename(path) == "secret":
            raise PermissionError(13, "Permission denied")
        return real_scandir(path)

    monkeypatch.setattr(walk_module, "open", fake_open, raising=False)
    monkeypatch.setattr(walk_module.os, "scandir", fake_scandir)
    docs, _, by_key = read(root)
    assert [d.id for d in docs] == ["ok.txt"]
    assert by_key["locked.zip"].reason == "cannot be read: Permission denied"
    assert by_key["secret"].reason == "folder cannot be read: Permission denied"


def test_a_path_that_vanishes_during_the_run(write_corpus):
    root = write_corpus({"a.txt": "first", "b.txt": "second", "sub/c.txt": "third", "z.txt": "last"})
    ledger = []
    documents = iter_documents([str(root)], ledger=ledger)
    assert next(documents).id == "a.txt"
    os.remove(root / "b.txt")  # listed already, gone before it is read
    for name in ("c.txt",):
        os.remove(root / "sub" / name)
    os.rmdir(root / "sub")  # listed as a folder, gone before it is walked
    rest = [d.id for d in documents]
    assert rest == ["z.txt"]
    reasons = {e.input: e.reason for e in ledger}
    assert reasons["b.txt"] == "cannot be read: No such file or directory"
    assert reasons["sub"] == "folder cannot be read: No such file or directory"


def test_empty_and_whitespace_only_files(write_corpus, read):
    root = write_corpus({"empty.txt": "", "blank.md": " \n\t\n", "nbsp.html": "<p>&nbsp;</p>", "ok.txt": "x"})
    docs, _, by_key = read(root)
    assert len(docs) == 4  # empty documents are still documents, so they get a proposed action
    for name in ("empty.txt", "blank.md", "nbsp.html"):
        assert (by_key[name].status, by_key[name].reason) == ("empty", "no text")
    assert by_key["ok.txt"].status == "read"


def test_binary_and_broken_text_files(write_corpus, read):
    png = b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR"
    root = write_corpus(
        {"image.txt": png, "nul.md": b"text\x00more", "bad.rst": b"ok \xc3\x28 not utf-8", "ok.md": "x"}
    )
    docs, _, by_key = read(root)
    assert [d.id for d in docs] == ["ok.md"]
    assert by_key["image.txt"].reason == "binary data: NUL byte at offset 8"
    assert by_key["nul.md"].reason == "binary data: NUL byte at offset 4"
    assert by_key["bad.rst"].reason.startswith("not UTF-8 text: byte 0xc3 at offset 3 cannot be decoded")


def test_a_200_mb_single_line_is_skipped_by_size_without_being_read(tmp_path, read):
    big = tmp_path / "line.txt"
    with open(big, "wb") as handle:
        handle.write(b"word " * 40_000_000)  # 200 MB, one line
    tracemalloc.start()
    started = time.perf_counter()
    docs, _, by_key = read(big)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    assert docs == [] and by_key["line.txt"].reason.startswith(
        "file too large: 200000000 bytes, limit 50000000"
    )
    assert peak < 5_000_000 and time.perf_counter() - started < 5


def test_a_very_long_line_is_read_and_truncated(tmp_path, read):
    line = ("lorem ipsum dolor sit amet " * 1_000_000)[:24_000_000]  # 24 MB, no line end
    for name in ("line.txt", "line.md", "line.jsonl"):
        (tmp_path / name).write_text(
            line if name != "line.jsonl" else f'{{"text": "{line}"}}', encoding="utf-8"
        )
    started = time.perf_counter()
    docs, _, by_key = read(tmp_path, max_text_chars=1_000_000)
    assert time.perf_counter() - started < 20
    assert [len(d.text) for d in docs] == [1_000_000] * 3
    for key in ("line.txt", "line.md", "line.jsonl#line 1"):
        assert by_key[key].status == "truncated"
        assert by_key[key].reason == "text cut to 1,000,000 of 24,000,000 characters (raise --max-text-chars)"


def test_file_names_that_are_not_utf8(tmp_path, read):
    os.mkdir(bytes(tmp_path) + b"/caf\xe9")
    with open(bytes(tmp_path) + b"/caf\xe9/n\xf6te.txt", "wb") as handle:
        handle.write(b"text")
    docs, ledger, _ = read(tmp_path)
    assert [d.id for d in docs] == ["caf\\xe9/n\\xf6te.txt"]
    for entry in ledger:
        entry.input.encode("utf-8")


def test_ids_that_collide_are_read_once(write_corpus, read):
    # A record id and a file name can spell the same document id.
    root = write_corpus({"r.jsonl": '{"id": "x.txt", "text": "record"}\n', "r.jsonl#x.txt": "file"})
    docs, _, by_key = read(root, id_field="id")
    assert [(d.id, d.text) for d in docs] == [("r.jsonl#x.txt", "record")]
    assert by_key["r.jsonl#x.txt"].reason == "id 'r.jsonl#x.txt' repeats an earlier document"


def test_same_input_gives_the_same_ledger_in_another_process(write_corpus):
    root = write_corpus(
        {f"d{n % 3}/f{n}.md": f"# Doc {n}\n\ntext {n}" for n in range(20)} | {"z.json": "[1]"}
    )
    script = (
        "import sys, json\nfrom dedup.ingest import iter_documents\nledger = []\n"
        "docs = [(d.id, d.text) for d in iter_documents([sys.argv[1]], ledger=ledger)]\n"
        "print(json.dumps([docs, [e.to_dict() for e in ledger]]))\n"
    )
    outputs = {
        subprocess.run(
            [sys.executable, "-c", script, str(root)],
            capture_output=True,
            text=True,
            check=True,
            env={**os.environ, "PYTHONHASHSEED": str(seed)},
        ).stdout
        for seed in (1, 2)
    }
    assert len(outputs) == 1


def test_reading_is_lazy(write_corpus, monkeypatch):
    root = write_corpus({f"f{n:02}.txt": f"text {n}" for n in range(30)})
    opened = []
    real_open = walk_module._open_descriptor

    def counting_open(path):
        opened.append(os.path.basename(path))
        return real_open(path)

    monkeypatch.setattr(walk_module, "_open_descriptor", counting_open)
    ledger = []
    documents = iter_documents([str(root)], ledger=ledger)
    first = next(documents)
    assert first.id == "f00.txt" and opened == ["f00.txt"] and len(ledger) == 1


@pytest.mark.parametrize(
    "bad", [{"max_file_bytes": 0}, {"max_text_chars": -1}, {"max_archive_ratio": 0.5}, {"text_fields": ()}]
)
def test_bad_limits_are_refused_before_reading(write_corpus, bad):
    root = write_corpus({"a.txt": "x"})
    with pytest.raises(ValueError):
        list(iter_documents([str(root)], ledger=[], **bad))


def test_reading_by_the_examined_size_still_finds_growth(tmp_path):
    """A file read by the size it had when examined: exact when unchanged, whole when it
    grew since, cut at limit + 1 when it grew past the limit."""
    from dedup.ingest.walk import _read_limited

    path = tmp_path / "a.txt"
    path.write_bytes(b"x" * 1000)
    assert _read_limited(str(path), 1000, 10_000) == b"x" * 1000
    assert _read_limited(str(path), 400, 10_000) == b"x" * 1000  # grew from 400 bytes
    assert _read_limited(str(path), 0, 10_000) == b"x" * 1000
    assert _read_limited(str(path), 400, 500) == b"x" * 501  # grew past the limit
    assert _read_limited(str(path), 1000, 1000) == b"x" * 1000
    path.write_bytes(b"")
    assert _read_limited(str(path), 0, 10) == b""
