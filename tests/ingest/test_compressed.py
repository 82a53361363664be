"""Single compressed files (.gz, .bz2, .xz, .zst): read in the format their name gives
before the suffix, bounded like archives, damage and bombs recorded with a reason."""

from __future__ import annotations

import bz2
import gzip
import io
import json
import lzma
import sys
import tracemalloc
import zipfile

import pytest

from dedup.ingest import iter_documents


def _zstd(data: bytes) -> bytes:
    zstandard = pytest.importorskip("zstandard")
    return zstandard.ZstdCompressor().compress(data)


COMPRESS = {".gz": gzip.compress, ".bz2": bz2.compress, ".xz": lzma.compress, ".zst": _zstd}
KINDS = {".gz": "gzip", ".bz2": "bzip2", ".xz": "xz", ".zst": "zstd"}

RECORDS = "".join(
    json.dumps({"id": f"r{n}", "text": f"Record {n} tells of the harbour and its ships, day {n}."}) + "\n"
    for n in range(6)
)
# One invented file of each kind of reader a compressed file can reach.
FILES = {
    "notes.txt": "Harbour notes\n\nThe ships came in at dawn and left before noon.",
    "guide.md": "# Harbour guide\n\nThe *north* pier is for ferries.",
    "page.html": "<html><head><title>Tides</title></head><body><p>High tide at six.</p></body></html>",
    "log.jsonl": RECORDS,
    "table.csv": 'id,text\n1,"first row, with a comma"\n2,second row\n',
    "table.tsv": "id\ttext\n1\tfirst tab row\n",
    "items.json": '[{"text": "an item of a JSON array"}, {"text": "another item"}]',
}


def _view(docs, ledger):
    return (
        [(d.id, d.text, d.title, d.format, d.record, d.encoding) for d in docs],
        [(e.input, e.status, e.reason, e.format, e.record, e.encoding, e.document_id) for e in ledger],
    )


@pytest.mark.parametrize("suffix", list(COMPRESS))
def test_each_format_reads_as_its_uncompressed_file_does(write_corpus, read, tmp_path, suffix):
    """Reference: the same files uncompressed, read by the same reader; ids keep the suffix."""
    compress = COMPRESS[suffix]
    plain_root = write_corpus(FILES)
    packed_root = tmp_path / "packed"
    packed_root.mkdir()
    for name, text in FILES.items():
        (packed_root / (name + suffix)).write_bytes(compress(text.encode()))
    plain_docs, plain_ledger, _ = read(plain_root, id_field="id")
    packed_docs, packed_ledger, _ = read(packed_root, id_field="id")
    expected_docs, expected_entries = _view(plain_docs, plain_ledger)
    got_docs, got_entries = _view(packed_docs, packed_ledger)
    renamed = {name: name + suffix for name in FILES}

    def rename(value: str) -> str:
        for name, packed in renamed.items():
            if value == name or value.startswith(name + "#"):
                return packed + value[len(name) :]
        return value

    assert got_docs == [(rename(i), *rest) for i, *rest in expected_docs]
    assert got_entries == [
        (rename(i), s, r, f, rec, enc, rename(d)) for i, s, r, f, rec, enc, d in expected_entries
    ]
    # Every file gave its documents; the JSON array's items have no "id" and are skipped.
    assert len(got_docs) == 12 and len(got_entries) == 14


def test_ids_keep_the_relative_path_with_the_suffix(write_corpus, read):
    root = write_corpus(
        {"a/b.txt.gz": gzip.compress(b"text in b"), "a/c.jsonl.xz": lzma.compress(RECORDS.encode())}
    )
    docs, _, _ = read(root)
    assert [d.id for d in docs][:3] == ["a/b.txt.gz", "a/c.jsonl.xz#line 1", "a/c.jsonl.xz#line 2"]


@pytest.mark.parametrize("suffix", list(COMPRESS))
def test_a_cut_off_file_is_recorded_as_damaged_after_its_whole_records(write_corpus, read, suffix):
    # Records that do not repeat, so that the compressed file is long enough to cut.
    # Two MB: more than one block of bzip2 (900 KB), cut near its end.
    lines = "".join(
        json.dumps({"text": f"line {n} " + format(n * 7919 % 104729, "x") * 5}) + "\n" for n in range(40_000)
    )
    packed = COMPRESS[suffix](lines.encode())
    root = write_corpus(
        {"cut.jsonl" + suffix: packed[: len(packed) * 9 // 10], "cut.txt" + suffix: packed[:40]}
    )
    docs, ledger, by_key = read(root)
    entry = by_key["cut.jsonl" + suffix]
    assert entry.status == "skipped"
    assert entry.reason.startswith(f"damaged {KINDS[suffix]} file: ")
    assert entry.reason.endswith("; rest of the file not read")
    records = [d for d in docs if d.id.startswith("cut.jsonl")]
    assert 0 < len(records) < 40_000
    texts = [json.loads(line)["text"] for line in lines.split("\n")[: len(records)]]
    assert [d.text for d in records] == texts
    text_entry = by_key["cut.txt" + suffix]
    assert text_entry.status == "skipped" and text_entry.reason.startswith(f"damaged {KINDS[suffix]} file: ")


@pytest.mark.parametrize("suffix", list(COMPRESS))
def test_bytes_that_are_not_compressed_are_recorded_as_damaged(write_corpus, read, suffix):
    if suffix == ".zst":
        pytest.importorskip("zstandard")
    root = write_corpus({"plain.txt" + suffix: b"these bytes were never compressed at all"})
    docs, _, by_key = read(root)
    assert docs == []
    assert by_key["plain.txt" + suffix].reason.startswith(f"damaged {KINDS[suffix]} file: ")


def test_a_compression_bomb_of_records_stops_at_the_ratio(write_corpus, read):
    line = b'{"text": "the same line again and again"}\n'
    bomb = gzip.compress(line * 200_000, 9)  # 8.4 MB from about 30 KB
    root = write_corpus({"bomb.jsonl.gz": bomb})
    tracemalloc.start()
    docs, _, by_key = read(root, max_archive_ratio=20)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    allowed = max(20 * len(bomb), 1_000_000)  # the ratio, and the floor of small files
    entry = by_key["bomb.jsonl.gz"]
    assert entry.status == "refused"
    assert entry.reason.startswith(
        f"rest of the file not read: it would expand beyond 20 times its size ({allowed:,} bytes"
    )
    assert "compression bomb" in entry.reason and "(raise --max-archive-ratio)" in entry.reason
    assert 0 < len(docs) <= allowed // len(line)
    assert peak < 40_000_000  # the documents read, not the 8.4 MB expanded at once


def test_a_compression_bomb_of_one_document_is_refused(write_corpus, read):
    bomb = gzip.compress(b"\0" * 20_000_000, 9)
    root = write_corpus({"bomb.txt.gz": bomb})
    docs, _, by_key = read(root, max_archive_ratio=50, max_file_bytes=100_000_000)
    assert docs == []
    entry = by_key["bomb.txt.gz"]
    assert entry.status == "refused" and entry.reason.startswith("not read: it would expand beyond 50 times")


def test_a_document_larger_than_the_file_limit_once_decompressed_is_skipped(write_corpus, read):
    root = write_corpus({"long.txt.xz": lzma.compress(b"word " * 10_000)})
    docs, _, by_key = read(root, max_file_bytes=20_000)
    assert docs == []
    assert by_key["long.txt.xz"].reason == (
        "file too large: more than 20000 bytes once decompressed (raise --max-file-bytes)"
    )


def test_without_zstandard_a_zst_file_says_what_to_install(write_corpus, read, monkeypatch):
    packed = _zstd(b"text")
    monkeypatch.setitem(sys.modules, "zstandard", None)
    root = write_corpus({"a.txt.zst": packed, "b.txt.gz": gzip.compress(b"still read")})
    docs, _, by_key = read(root)
    assert [d.id for d in docs] == ["b.txt.gz"]
    assert by_key["a.txt.zst"].status == "skipped"
    assert by_key["a.txt.zst"].reason == "install dedup[docs] to read .zst"


def test_a_compressed_member_of_an_archive_is_read_like_the_file(write_corpus, read):
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w") as archive:
        archive.writestr("in/notes.txt.gz", gzip.compress(b"member notes"))
        archive.writestr("in/log.jsonl.bz2", bz2.compress(RECORDS.encode()))
        archive.writestr("in/bad.txt.gz", b"not gzip")
    root = write_corpus({"pack.zip": buffer.getvalue()})
    docs, _, by_key = read(root)
    assert [d.id for d in docs][:3] == [
        "pack.zip!/in/notes.txt.gz",
        "pack.zip!/in/log.jsonl.bz2#line 1",
        "pack.zip!/in/log.jsonl.bz2#line 2",
    ]
    assert docs[0].text == "member notes"
    assert by_key["pack.zip!/in/bad.txt.gz"].reason.startswith("damaged gzip file: ")


def test_names_without_a_readable_format_say_why(write_corpus, read):
    root = write_corpus(
        {"scan.png.gz": gzip.compress(b"x"), "dump.gz": gzip.compress(b"x"), "a.tar.gz.txt": "t"}
    )
    docs, _, by_key = read(root)
    assert [d.id for d in docs] == ["a.tar.gz.txt"]
    assert by_key["scan.png.gz"].reason == "unsupported file type .png.gz"
    assert by_key["dump.gz"].reason == (
        "unsupported file type .gz (the format is told by the name before it, as in name.jsonl.gz)"
    )


def test_the_same_compressed_input_gives_the_same_ledger(write_corpus):
    root = write_corpus({name + ".gz": gzip.compress(text.encode()) for name, text in FILES.items()})
    runs = []
    for workers in (1, 2):
        ledger = []
        docs = list(iter_documents([str(root)], ledger=ledger, workers=workers))
        runs.append(([d.id for d in docs], [e.to_dict() for e in ledger]))
    assert runs[0] == runs[1] and runs[0][0]


def test_a_tar_archive_compressed_with_zstd_is_read_member_by_member(write_corpus, read):
    import tarfile

    buffer = io.BytesIO()
    with tarfile.open(fileobj=buffer, mode="w") as archive:
        data = b"a member of a zstd tar"
        info = tarfile.TarInfo("in/a.txt")
        info.size = len(data)
        archive.addfile(info, io.BytesIO(data))
    packed = _zstd(buffer.getvalue())
    root = write_corpus({"x.tar.zst": packed, "cut.tzst": packed[: len(packed) // 2], "y.zip.gz": b"x"})
    docs, _, by_key = read(root)
    assert [(d.id, d.text) for d in docs] == [("x.tar.zst!/in/a.txt", "a member of a zstd tar")]
    assert by_key["cut.tzst"].status == "skipped"
    assert by_key["y.zip.gz"].reason == "unsupported file type .zip.gz"
