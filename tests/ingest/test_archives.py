"""Archives read in place: members like files, unsafe paths refused, bombs stopped."""

from __future__ import annotations

import io
import os
import tarfile
import zipfile

import pytest


def make_zip(members: dict[str, bytes | str], *, compression=zipfile.ZIP_DEFLATED) -> bytes:
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w", compression) as archive:
        for name, data in members.items():
            info = zipfile.ZipInfo(name, date_time=(2024, 1, 2, 3, 4, 6))
            info.compress_type = compression
            archive.writestr(info, data)
    return buffer.getvalue()


def make_tar(
    members: dict[str, bytes | str], mode: str = "w:gz", links: dict[str, str] | None = None
) -> bytes:
    buffer = io.BytesIO()
    with tarfile.open(fileobj=buffer, mode=mode) as archive:
        for name, data in members.items():
            data = data.encode() if isinstance(data, str) else data
            info = tarfile.TarInfo(name)
            info.size, info.mtime = len(data), 1_700_000_000
            archive.addfile(info, io.BytesIO(data))
        for name, target in (links or {}).items():
            info = tarfile.TarInfo(name)
            info.type, info.linkname = tarfile.SYMTYPE, target
            archive.addfile(info)
    return buffer.getvalue()


def test_members_are_read_like_files_with_archive_ids(write_corpus, read):
    inner = make_tar({"n.md": "# Nested\n\ntext", "deeper.zip": make_zip({"d.txt": "deep"})})
    outer = make_zip(
        {"docs/a.txt": "member text", "r.jsonl": '{"text": "rec"}\n', "inner.tgz": inner, "pic.png": b"x"}
    )
    root = write_corpus({"bundle.zip": outer})
    docs, _, by_key = read(root)
    assert [d.id for d in docs] == [
        "bundle.zip!/docs/a.txt",
        "bundle.zip!/r.jsonl#line 1",
        "bundle.zip!/inner.tgz!/n.md",
    ]
    assert docs[0].mtime == 1704164646.0  # the member's own date, as UTC
    assert docs[2].text == "Nested\n\ntext" and docs[2].title == "Nested"
    assert "one level of nesting" in by_key["bundle.zip!/inner.tgz!/deeper.zip"].reason
    assert by_key["bundle.zip!/pic.png"].reason == "unsupported file type .png"


@pytest.mark.parametrize("kind", ["zip", "tar"])
def test_unsafe_member_paths_are_refused_and_nothing_is_written(tmp_path, read, kind):
    names = ["../escape.txt", "a/../../escape2.txt", "/etc/escape3.txt", "C:/escape4.txt", "..\\escape5.txt"]
    members = {name: "payload" for name in names} | {"safe.txt": "safe text"}
    data = make_zip(members) if kind == "zip" else make_tar(members, "w")
    corpus = tmp_path / "corpus"
    corpus.mkdir()
    (corpus / f"bad.{kind}").write_bytes(data)
    before = sorted(p for p in tmp_path.parent.rglob("*"))
    docs, _, by_key = read(corpus)
    assert sorted(p for p in tmp_path.parent.rglob("*")) == before
    assert [d.id for d in docs] == [f"bad.{kind}!/safe.txt"]
    refused = {k: e.reason for k, e in by_key.items() if e.status == "refused"}
    assert len(refused) == len(names)
    assert all(r.startswith("unsafe path in the archive") for r in refused.values())
    assert not any(os.path.exists(p) for p in ("/etc/escape3.txt", str(tmp_path.parent / "escape.txt")))


def test_zip_bomb_by_ratio_is_refused_member_by_member(write_corpus, read):
    bomb = make_zip({"a.txt": "small text", "b.txt": "a" * 3_000_000, "c.txt": "after the bomb"})
    root = write_corpus({"bomb.zip": bomb})
    docs, _, by_key = read(root)
    assert [d.id for d in docs] == ["bomb.zip!/a.txt"]
    for member in ("b.txt", "c.txt"):
        entry = by_key[f"bomb.zip!/{member}"]
        assert entry.status == "refused" and "times its size" in entry.reason and "zip bomb" in entry.reason


def test_tar_gz_bomb_stops_the_stream(write_corpus, read):
    bomb = make_tar({"a.txt": "first", "big.txt": b"\0" * 4_000_000, "after.txt": "never reached"})
    root = write_corpus({"bomb.tar.gz": bomb})
    docs, ledger, by_key = read(root)
    assert [d.id for d in docs] == ["bomb.tar.gz!/a.txt"]
    assert by_key["bomb.tar.gz!/big.txt"].status == "refused"
    assert by_key["bomb.tar.gz"].reason.startswith("rest of the archive not read: it would expand beyond")
    assert not any("after.txt" in e.input for e in ledger)


def test_total_expansion_limit_counts_nested_archives(write_corpus, read):
    inner = make_zip({f"i{n}.txt": f"inner text {n} " * 2_000 for n in range(5)})
    outer = make_zip({"first.txt": "x" * 30_000, "inner.zip": inner}, compression=zipfile.ZIP_STORED)
    root = write_corpus({"o.zip": outer})
    docs, _, by_key = read(root, max_archive_bytes=80_000)
    statuses = {k: e.status for k, e in by_key.items()}
    assert statuses["o.zip!/first.txt"] == "read"
    assert "refused" in {statuses[f"o.zip!/inner.zip!/i{n}.txt"] for n in range(5)}
    assert any("raise --max-archive-bytes" in e.reason for e in by_key.values())


@pytest.mark.filterwarnings("ignore:Duplicate name")
def test_encrypted_links_duplicates_hidden_and_oversized_members(write_corpus, read):
    data = bytearray(
        make_zip({"locked.txt": "secret", "dup.txt": "one", ".git/config": "x", "big.txt": "y" * 500})
    )
    # Mark the first member encrypted in its local and central headers (zipfile cannot write one).
    data[6] |= 1
    central = data.find(b"PK\x01\x02")
    data[central + 8] |= 1
    buffer = io.BytesIO(bytes(data))
    with zipfile.ZipFile(buffer, "a") as archive:
        archive.writestr("dup.txt", "two")
    root = write_corpus(
        {
            "z.zip": buffer.getvalue(),
            "t.tar": make_tar({"real.txt": "real"}, "w", links={"link.txt": "/etc/passwd"}),
        }
    )
    docs, _, by_key = read(root, max_file_bytes=400)
    assert [d.id for d in docs] == ["t.tar!/real.txt", "z.zip!/dup.txt"]
    assert by_key["z.zip!/locked.txt"].reason == "encrypted archive member: needs a password"
    assert by_key["z.zip!/.git/config"].reason == "version-control folder .git/ (read it with --include-vcs)"
    assert by_key["z.zip!/big.txt"].reason.startswith("file too large: 500 bytes, limit 400")
    assert by_key["t.tar!/link.txt"].reason == "link inside an archive, not followed"
    assert docs[1].text == "one"


@pytest.mark.filterwarnings("ignore:Duplicate name")
def test_duplicate_member_names_are_read_once(write_corpus, read):
    buffer = io.BytesIO(make_zip({"a.txt": "first"}))
    with zipfile.ZipFile(buffer, "a") as archive:
        archive.writestr("a.txt", "second")
    tar_buffer = io.BytesIO()
    with tarfile.open(fileobj=tar_buffer, mode="w") as archive:
        for text in (b"first", b"second"):
            info = tarfile.TarInfo("a.txt")
            info.size = len(text)
            archive.addfile(info, io.BytesIO(text))
    tar = tar_buffer.getvalue()
    root = write_corpus({"d.zip": buffer.getvalue(), "d.tar": tar})
    docs, ledger, _ = read(root)
    assert [(d.id, d.text) for d in docs] == [("d.tar!/a.txt", "first"), ("d.zip!/a.txt", "first")]
    repeats = [e for e in ledger if e.reason == "repeats an earlier member of the same name"]
    assert [(e.input, e.record) for e in repeats] == [("d.tar!/a.txt", "copy 2"), ("d.zip!/a.txt", "copy 2")]


def test_damaged_empty_and_fake_archives(write_corpus, read):
    good = make_tar({f"m{n}.txt": os.urandom(3000).hex() for n in range(6)})
    root = write_corpus(
        {
            "cut.tar.gz": good[: len(good) // 2],
            "fake.zip": b"this is not a zip",
            "fake.tgz": b"\x1f\x8b not really gzip",
            "empty.zip": make_zip({}),
            "dirs.tar": make_tar({}, "w"),
        }
    )
    docs, _, by_key = read(root)
    assert docs and all(d.id.startswith("cut.tar.gz!/") for d in docs)
    assert "rest not read" in by_key["cut.tar.gz"].reason
    assert by_key["fake.zip"].reason.startswith("not a readable zip archive")
    assert by_key["fake.tgz"].reason.startswith("not a readable tar archive")
    assert (
        by_key["empty.zip"].status == "empty" and by_key["empty.zip"].reason == "the archive holds no files"
    )


def test_archives_larger_than_the_file_limit_are_streamed(write_corpus, read):
    members = {f"m{n:03}.txt": f"member {n} " + os.urandom(1000).hex() for n in range(60)}
    root = write_corpus({"big.zip": make_zip(members), "big.tar.xz": make_tar(members, "w:xz")})
    docs, _, _ = read(root, max_file_bytes=10_000)
    assert len(docs) == 120
    assert [d.id for d in docs[:2]] == ["big.tar.xz!/m000.txt", "big.tar.xz!/m001.txt"]


def test_globs_apply_inside_archives(write_corpus, read):
    root = write_corpus(
        {"a.zip": make_zip({"keep/x.md": "# x", "keep/y.txt": "y", "node_modules/z.md": "z"})}
    )
    docs, _, by_key = read(root, include=["*.md"], exclude=["node_modules"])
    assert [d.id for d in docs] == ["a.zip!/keep/x.md"]
    assert by_key["a.zip!/keep/y.txt"].reason == "not matched by --include"
    assert (
        by_key["a.zip!/node_modules/z.md"].reason
        == "excluded by --exclude 'node_modules' (folder node_modules/)"
    )


@pytest.mark.parametrize("suffix", ["zip", "tar.gz"])
def test_archives_are_streamed_member_by_member(tmp_path, suffix):
    import tracemalloc

    from dedup.ingest import iter_documents

    members = {f"m{n:02}.txt": os.urandom(500_000).hex() for n in range(30)}  # 30 MB of text in all
    data = make_zip(members) if suffix == "zip" else make_tar(members)
    (tmp_path / f"big.{suffix}").write_bytes(data)
    del members, data
    ledger = []
    tracemalloc.start()
    count = sum(1 for _ in iter_documents([str(tmp_path)], ledger=ledger, max_archive_bytes=10**9))
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    assert count == 30 and {e.status for e in ledger} == {"read"}
    assert peak < 12_000_000  # a few members' worth, not the 30 MB of the whole archive
