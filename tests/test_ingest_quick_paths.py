"""The quick paths of reading plain files give exactly what the general paths give.

Extensions are looked up rather than searched for, titles are found without splitting
the whole text, control characters are screened at the byte level before any regular
expression runs, files are examined once and read by their known size. Each test holds
the quick path to the plain rule it stands in for.
"""

from __future__ import annotations

import dataclasses
import os
import random

import pytest

from dedup.ingest import encoding, iter_documents
from dedup.ingest import walk as walk_module
from dedup.ingest.encoding import decode_text
from dedup.ingest.markup import first_line_title
from dedup.ingest.readers import FORMATS, format_of


def _format_by_scan(path: str) -> str | None:
    """The rule: the first extension of `FORMATS` (longest first) that the name ends with."""
    lower = path.lower().rsplit("/", 1)[-1]
    for extension, fmt in FORMATS.items():
        if lower.endswith(extension) and len(lower) > len(extension):
            return fmt
    return None


def _title_by_lines(text: str) -> str:
    """The rule: the first non-blank line of the first 8 KiB, without ``#`` markers."""
    for line in text[:8192].splitlines():
        stripped = line.strip()
        if stripped:
            return stripped.lstrip("#").strip()[:200]
    return ""


def test_format_lookup_matches_the_ordered_scan():
    names = ["", ".", "..", "a", "a.", ".txt", "..txt", "a..txt", "tar.gz", ".tar.gz", "a.tar.gz", "x.tgz"]
    names += ["A.TAR.GZ", "b.tar.gz.txt", "c.txt.gz", "d/e.f/g", "dir.txt/file", "dir/.md", "x.tar.bz2"]
    names += ["notes/Report.PDF", "a.b.c.json", "s.Markdown", "t.asc", "v.tar.xz", "w.gz", "n.tar"]
    names += ["k.MAR\u212aDOWN", "\u0130.TXT", "sigma\u03a3.txt"]  # case folding that changes a name
    names += [f"q{ext}" for ext in FORMATS] + [f"q{ext.upper()}" for ext in FORMATS] + list(FORMATS)
    rng = random.Random(1)
    pieces = ["a", ".", "/", "tar", "gz", "txt", "md", "T", "zip", "json", "\u212a", "\u0130"]
    names += ["".join(rng.choice(pieces) for _ in range(rng.randrange(1, 8))) for _ in range(3000)]
    for name in names:
        assert format_of(name) == _format_by_scan(name), name


@pytest.mark.parametrize(
    "text",
    [
        "",
        "   \n\t\n",
        "Title\nbody",
        "\n\n  ## Heading  \nbody",
        "### \n# real\n",
        "\x0b\x0bfirst\x0bsecond",
        "\x0c  \x0cpage\x0cnext",
        "\x1c\x1d\x1e x\x1cy",
        "\x1f\nafter unit separator",
        "\x85\u2028 \u2029line\u2028two",
        "\r\r  \rcr title\rnext",
        "\r\n\r\n crlf title \r\nnext",
        "\u00a0\u3000\n\u2003title\u00a0",
        "x" * 10_000,
        " " * 8191 + "abc",
        "\n" * 8190 + "\r\nabc",
        "#" * 5 + " " + "t" * 500,
    ],
)
def test_title_matches_the_line_rule(text):
    assert first_line_title(text) == _title_by_lines(text)


def test_title_matches_the_line_rule_on_random_text():
    rng = random.Random(2)
    alphabet = "ab #\t \n\r\x0b\x0c\x1c\x1d\x1e\x1f\x85\u2028\u2029\u00a0é"
    for _ in range(5000):
        text = "".join(rng.choice(alphabet) for _ in range(rng.randrange(0, 40)))
        assert first_line_title(text) == _title_by_lines(text), repr(text)


def _random_inputs() -> list[bytes]:
    rng = random.Random(3)
    samples = [b"", b"plain", b"a\x01b\x02", b"\x01" + b"a" * 150 + b"\x02", b"\x01" + b"a" * 250 + b"\x02"]
    samples += [b"a" * 65530 + b"\x01" * 10, b"a" * 65536 + b"\x01" * 100, "x\u0080y\u0085z".encode() * 5]
    samples += [("é" * 70_000 + "\x01\x02").encode(), ("\u00a0©°" * 50).encode(), b"\xef\xbb\xbf\x01\x02\x03"]
    samples += ["\ufeffé\x01\x02 ü".encode("utf-16-le") * 3, ("é" * 40 + "\x01\x02\x03").encode("latin-1")]
    pool = b"ab \n\t\x01\x08\x1b\x7f\x0b\x0c\x1c\x1f\r\xc2\x80\x85\x9f\xa0"
    for _ in range(3000):
        samples.append(bytes(rng.choice(pool) for _ in range(rng.randrange(0, 300))))
    chars = "aé\u0085\x80\x9f\x01 \n\u2028\x0c\U0001f600\u00a0"
    for _ in range(1000):
        samples.append("".join(rng.choice(chars) for _ in range(rng.randrange(0, 300))).encode())
    return samples


def test_the_control_screen_never_changes_a_decision(monkeypatch):
    samples = _random_inputs()
    screened = [decode_text(data) for data in samples]
    monkeypatch.setattr(encoding, "_without_controls", lambda sample, utf8: False)
    assert [decode_text(data) for data in samples] == screened
    assert any("control character" in problem for _, _, problem in screened)
    assert any(text and "\x01" in text for text, _, _ in screened)  # one stray control is text


@pytest.mark.parametrize("workers", [1, 2])
def test_each_file_is_examined_once(write_corpus, monkeypatch, workers):
    """One examination a file: by its path where the walk hands files to workers, through
    its open descriptor where they are read here (the path is looked up once)."""
    root = write_corpus({f"f{n:02}.txt": f"text {n}" for n in range(20)})
    by_path, by_descriptor = [], []
    real_stat, real_fstat = os.stat, os.fstat

    def counting_stat(path, *args, **kwargs):
        by_path.append(path)
        return real_stat(path, *args, **kwargs)

    def counting_fstat(fd):
        by_descriptor.append(fd)
        return real_fstat(fd)

    monkeypatch.setattr(walk_module.os, "stat", counting_stat)
    monkeypatch.setattr(walk_module.os, "fstat", counting_fstat)
    docs = list(iter_documents([str(root)], ledger=[], workers=workers))
    assert len(docs) == 20
    per_file = [p for p in by_path if str(p).endswith(".txt")]
    assert len(per_file) == len(set(per_file))
    if workers == 1:
        assert per_file == [] and len(by_descriptor) == 20
    else:
        assert len(per_file) == 20


def _changing_before_read(monkeypatch, path, content: bytes):
    """Give the file ``content`` just after it was examined, before it is read."""
    real_read = walk_module._read_descriptor

    def read_after_change(fd, size, limit):
        path.write_bytes(content)
        return real_read(fd, size, limit)

    monkeypatch.setattr(walk_module, "_read_descriptor", read_after_change)


def test_a_file_that_grows_past_the_limit_is_skipped(write_corpus, monkeypatch):
    root = write_corpus({"a.txt": "short"})
    _changing_before_read(monkeypatch, root / "a.txt", b"short" + b"g" * (200_000 - 5))
    ledger = []
    assert list(iter_documents([str(root)], ledger=ledger, max_file_bytes=100_000)) == []
    (entry,) = ledger
    assert entry.status == "skipped" and entry.size == 100_001
    assert entry.reason == "file too large: 100001 bytes, limit 100000 (raise --max-file-bytes)"


def test_a_file_that_grows_within_the_limit_is_read_whole(write_corpus, monkeypatch):
    root = write_corpus({"a.txt": "short"})
    _changing_before_read(monkeypatch, root / "a.txt", b"short" + b"g" * (150_000 - 5))
    ledger = []
    (doc,) = list(iter_documents([str(root)], ledger=ledger, max_file_bytes=200_000))
    assert doc.text == "short" + "g" * (150_000 - 5)
    assert doc.size == ledger[0].size == 150_000


def test_a_file_that_shrinks_is_read_as_it_is(write_corpus, monkeypatch):
    root = write_corpus({"a.txt": "a longer text than later"})
    _changing_before_read(monkeypatch, root / "a.txt", b"short")
    ledger = []
    (doc,) = list(iter_documents([str(root)], ledger=ledger))
    assert doc.text == "short" and ledger[0].size == 5


def test_workers_read_with_the_stat_taken_when_found(write_corpus):
    files = {f"d{n}/f{m}.txt": f"text {n} {m} é" for n in range(3) for m in range(5)}
    root = write_corpus({**files, "big.txt": "x" * 50, "ctrl.txt": b"\x01\x02\x03\x04"})
    alone, pooled = [], []
    docs_alone = list(iter_documents([str(root)], ledger=alone, max_file_bytes=40))
    docs_pooled = list(iter_documents([str(root)], ledger=pooled, max_file_bytes=40, workers=2))
    assert [dataclasses.asdict(d) for d in docs_alone] == [dataclasses.asdict(d) for d in docs_pooled]
    assert [e.to_dict() for e in alone] == [e.to_dict() for e in pooled]
    reasons = {e.input: e.reason for e in alone}
    assert reasons["big.txt"] == "file too large: 50 bytes, limit 40 (raise --max-file-bytes)"
    assert reasons["ctrl.txt"] == "binary data: control character 0x01 at offset 0"


def test_files_examined_by_descriptor_or_by_path_give_the_same_ledger(write_corpus, monkeypatch):
    """Reference: the walk that examines every file by its path (as it does for worker
    processes). Read here, a file to be read is opened first and examined through its
    descriptor; links, excluded and unreadable files must come out the same."""
    root = write_corpus(
        {
            "a.txt": "first text",
            "b.txt": "second text",
            "locked.txt": "cannot be opened",
            "notes.xyz": "an unsupported type",
            "skip/c.txt": "excluded by a pattern",
        }
    )
    os.symlink(root / "a.txt", root / "a-link.txt")  # the same file as a.txt
    os.link(root / "b.txt", root / "b-hard.txt")  # the same file under another name
    os.symlink(root / "notes.xyz", root / "notes-link.xyz")  # the same unsupported file
    os.symlink(root / "skip" / "c.txt", root / "c-link.txt")  # readable, but the same as an excluded file
    os.symlink(root / "locked.txt", root / "locked-link.txt")
    os.mkfifo(root / "pipe.txt")
    real_open = walk_module._open_descriptor

    def refusing(path):
        if os.path.basename(os.path.realpath(path)) == "locked.txt":
            raise PermissionError(13, "Permission denied")
        return real_open(path)

    monkeypatch.setattr(walk_module, "_open_descriptor", refusing)

    def read(**kwargs):
        ledger = []
        docs = list(iter_documents([str(root)], ledger=ledger, exclude=["skip/c.txt"], **kwargs))
        return [dataclasses.asdict(d) for d in docs], [e.to_dict() for e in ledger]

    # The order of examination: by path for all (a file examined by path is never opened first).
    with monkeypatch.context() as m:
        m.setattr(walk_module, "_opened", lambda path: (None, None, None))
        by_path = read()
    assert read() == by_path
    assert read(workers=2) == by_path  # examined in the walk, read by worker processes
    reasons = {e["input"]: e["reason"] for e in by_path[1]}
    # Walked in name order ("-" sorts before "."): the link comes first, then its target.
    assert reasons["a-link.txt"] == "" and reasons["a.txt"] == "same file as a-link.txt, read once"
    assert reasons["b-hard.txt"] == "" and reasons["b.txt"] == "same file as b-hard.txt, read once"
    assert reasons["notes-link.xyz"].startswith("unsupported file type")
    assert reasons["notes.xyz"] == "same file as notes-link.xyz, read once"
    assert reasons["locked-link.txt"] == "cannot be read: Permission denied"
    assert reasons["locked.txt"] == "same file as locked-link.txt, read once"
    assert reasons["c-link.txt"] == ""  # walked before the excluded file: it is read
    assert reasons["skip/c.txt"] == "same file as c-link.txt, read once"
    assert reasons["pipe.txt"] == "not a regular file (device, socket or pipe)"
