"""Record files larger than the file limit are read a record at a time: the limit
applies to each record, and every other record reads as in a file read whole."""

from __future__ import annotations

import csv
import dataclasses
import io
import json
import tracemalloc

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from dedup.ingest import iter_documents
from dedup.ingest.document import Item
from dedup.ingest.options import ReadOptions
from dedup.ingest.readers import read_bytes, read_stream

TOO_LARGE = "record too large: more than 2,000 bytes (raise --max-file-bytes)"
TOO_LARGE_1MB = "record too large: more than 1,000,000 bytes (raise --max-file-bytes)"


def _records(count: int, long_at: int) -> list[dict]:
    """Records d1..dN with short texts, but record ``long_at``'s of about 6 KB; their
    tags hold brackets, braces and quotes (for JSON read in pieces)."""
    return [
        {
            "id": f"d{n}",
            "text": "a long account of the harbour " * 200 if n == long_at else f"the harbour on day {n}",
            "tags": ["]", "}", '"quoted"', {"x": [n]}],
        }
        for n in range(1, count + 1)
    ]


def _jsonl(count: int, long_at: int) -> str:
    return "".join(json.dumps(record) + "\n" for record in _records(count, long_at))


@pytest.mark.parametrize("name,label", [("big.jsonl", "line"), ("big.json", "item")])
def test_a_record_file_larger_than_the_limit_is_read_with_the_long_record_skipped(
    name, label, write_corpus, read, monkeypatch
):
    import dedup.ingest.record_stream as record_stream

    monkeypatch.setattr(record_stream, "_CHUNK", 97)  # JSON pieces that cut items, strings and escapes
    records = _records(200, long_at=37)
    content = _jsonl(200, long_at=37) if name.endswith(".jsonl") else json.dumps(records, indent=1)
    assert len(content) > 10_000
    root = write_corpus({name: content})
    docs, ledger, by_key = read(root, max_file_bytes=2_000, id_field="id")
    assert [d.id for d in docs] == [f"{name}#d{n}" for n in range(1, 201) if n != 37]
    assert by_key[f"{name}#{label} 37"].status == "skipped"
    assert by_key[f"{name}#{label} 37"].reason == f"{label} 37: {TOO_LARGE}"
    assert docs[40].text == "the harbour on day 42" and docs[40].record == f"{label} 42"
    assert len(ledger) == 200


def test_a_csv_row_over_the_limit_is_skipped_and_the_rows_after_it_keep_their_lines(write_corpus, read):
    long_field = 'a quoted field over lines, with ""quotes""\n' * 80  # about 3.5 KB, 80 lines
    rows = ["id,text"] + [f"{n},row {n}" for n in range(1, 300)]
    rows.insert(5, f'long,"{long_field}"')
    root = write_corpus({"big.csv": "\r\n".join(rows) + "\r\n", "big.tsv": "id\ttext\n1\tone\n" * 1})
    docs, _, by_key = read(root, max_file_bytes=2_000, id_field="id")
    assert by_key["big.csv#row 6"].reason == f"row 6: {TOO_LARGE}"
    # The long row spans lines 6 to 86; the row after it starts on line 87.
    assert by_key["big.csv#row 87"].document_id == "big.csv#5"
    csv_docs = [d for d in docs if d.id.startswith("big.csv")]
    assert [d.text for d in csv_docs] == [f"row {n}" for n in range(1, 300)]


def _passed_over_without_being_held(read, path, record: str) -> None:
    """``path`` holds a record "before", a record over 1 MB and a record "after": read
    with a 1 MB limit, the long one is skipped with its reason, the others read, and the
    memory allocated while reading (tracemalloc) stays under 10 MB."""
    tracemalloc.start()
    try:
        docs, _, by_key = read(path, max_file_bytes=1_000_000)
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert [d.text for d in docs] == ["before", "after"]
    assert by_key[f"{path.name}#{record}"].reason == f"{record}: {TOO_LARGE_1MB}"
    assert peak < 10_000_000


def test_a_line_longer_than_the_limit_is_passed_over_without_being_held(tmp_path, read):
    path = tmp_path / "huge.jsonl"
    with open(path, "w", encoding="utf-8") as handle:
        handle.write('{"text": "before"}\n')
        handle.write('{"text": "' + "x" * 30_000_000 + '"}\n')  # 30 MB on one line
        handle.write('{"text": "after"}\n')
    _passed_over_without_being_held(read, path, "line 2")


def test_text_longer_than_the_text_limit_is_cut_as_in_a_file_read_whole(write_corpus, read):
    content = _jsonl(40, long_at=3)
    root = write_corpus({"r.jsonl": content})
    whole = read(root, max_text_chars=100)
    streamed = read(root, max_text_chars=100, max_file_bytes=len(content) - 1)
    assert [e.to_dict() for e in whole[1]] == [e.to_dict() for e in streamed[1]]
    assert whole[2]["r.jsonl#line 3"].status == "truncated"


def test_a_large_legacy_encoded_file_records_its_guess(write_corpus, read):
    lines = [
        json.dumps({"text": f"Le comité s'est réuni à l'été {n}, près du marché."}, ensure_ascii=False)
        for n in range(300)
    ]
    root = write_corpus({"fr.jsonl": ("\n".join(lines) + "\n").encode("cp1252")})
    docs, ledger, _ = read(root, max_file_bytes=1_000)
    assert len(docs) == 300 and docs[7].text == "Le comité s'est réuni à l'été 7, près du marché."
    assert {e.encoding for e in ledger} == {"guessed cp1252"}


def test_a_line_that_is_not_in_the_files_encoding_costs_only_itself(write_corpus, read):
    good = "".join(
        json.dumps({"text": f"line {n} é"}, ensure_ascii=False) + "\n" for n in range(100)
    ).encode()
    root = write_corpus({"mixed.jsonl": good + b'{"text": "caf\xe9"}\n' + good})
    docs, _, by_key = read(root, max_file_bytes=1_000)
    assert len(docs) == 200
    assert by_key["mixed.jsonl#line 101"].reason == (
        "line 101: not utf-8 text: byte 0xe9 at offset 13 of the line cannot be decoded"
    )


def test_utf16_record_files_are_streamed_too(write_corpus, read):
    content = "id,text\n" + "".join(f"{n},Grüße {n}\n" for n in range(50))
    root = write_corpus({"w.csv": content.encode("utf-16")})
    docs, ledger, _ = read(root, max_file_bytes=100, id_field="id")
    assert [d.text for d in docs] == [f"Grüße {n}" for n in range(50)]
    assert {e.encoding for e in ledger} == {"utf-16-le"}


def test_a_large_record_file_gives_the_same_ledger_with_workers(write_corpus):
    root = write_corpus({"big.jsonl": _jsonl(100, long_at=10), "small.txt": "a small text"})
    runs = []
    for workers in (1, 2):
        ledger = []
        docs = list(iter_documents([str(root)], ledger=ledger, workers=workers, max_file_bytes=2_000))
        runs.append(([dataclasses.asdict(d) for d in docs], [e.to_dict() for e in ledger]))
    assert runs[0] == runs[1]


# -- streamed and whole readings agree -----------------------------------------------------------
def _outcomes(outcomes):
    return [
        (
            None if doc is None else (doc.id, doc.text, doc.title, doc.record, doc.encoding, doc.metadata),
            entry.to_dict(),
        )
        for doc, entry in outcomes
    ]


_LINE = st.one_of(
    st.builds(lambda t: json.dumps({"text": t}), st.text(max_size=30)),
    st.builds(lambda t, i: json.dumps({"text": t, "id": i}), st.text(max_size=10), st.integers(0, 3)),
    st.sampled_from(["", "   ", "[1, 2]", '{"text": ', "null", '{"title": "t", "text": "x"}', "\r"]),
)
_CELL = st.one_of(st.text(alphabet='ab ,"é\n\r\t', max_size=8), st.sampled_from(["", "x y"]))


@settings(max_examples=150, deadline=None)
@given(
    lines=st.lists(_LINE, max_size=12),
    ending=st.sampled_from(["\n", "\r\n"]),
    last=st.booleans(),
    bom=st.booleans(),
)
def test_streamed_jsonl_reads_as_the_whole_file(lines, ending, last, bom):
    text = ending.join(lines) + (ending if last else "")
    data = (b"\xef\xbb\xbf" if bom else b"") + text.encode("utf-8")
    _compare(data, "jsonl")


_ITEM = st.one_of(
    st.builds(lambda t: {"text": t}, st.text(alphabet='ab "\\]}{[,é\n', max_size=30)),
    st.builds(lambda t, i: {"text": t, "id": i}, st.text(max_size=10), st.integers(0, 3)),
    st.sampled_from([None, 1.5, [1, 2], "]", {"title": "t", "text": "x"}, {"text": "y", "n": [{"a": "}"}]}]),
)
_JSON_TAIL = st.sampled_from(["", " ", "\n", "x", ",", "]", ' {"text": 1}', "[", '"a', "\\", "1e999"])


@settings(max_examples=200, deadline=None)
@given(
    items=st.lists(_ITEM, max_size=8),
    indent=st.sampled_from([None, 1]),
    cut=st.integers(0, 400),
    tail=_JSON_TAIL,
    piece=st.integers(1, 9),
    bom=st.booleans(),
)
def test_streamed_json_reads_as_the_whole_file(items, indent, cut, tail, piece, bom):
    """Arrays and single objects, whole or cut short, with what may follow; read from
    pieces of a few bytes, so that every item, string and escape is cut somewhere."""
    import dedup.ingest.record_stream as record_stream

    value = items if len(items) != 1 else items[0]
    text = json.dumps(value, indent=indent, ensure_ascii=False)
    text = text[: len(text) - cut % (len(text) + 1)] + tail
    data = (b"\xef\xbb\xbf" if bom else b"") + text.encode("utf-8")
    before = record_stream._CHUNK
    record_stream._CHUNK = piece
    try:
        _compare(data, "json")
    finally:
        record_stream._CHUNK = before


@settings(max_examples=150, deadline=None)
@given(
    rows=st.lists(st.lists(_CELL, min_size=1, max_size=3), max_size=8),
    ending=st.sampled_from(["\n", "\r\n", "\r"]),
    delimiter=st.sampled_from([",", "\t"]),
)
def test_streamed_csv_reads_as_the_whole_file(rows, ending, delimiter):
    buffer = io.StringIO(newline="")
    writer = csv.writer(buffer, delimiter=delimiter, lineterminator=ending)
    writer.writerow(["text", "id"][: max(1, max((len(r) for r in rows), default=1))])
    writer.writerows(rows)
    _compare(buffer.getvalue().encode("utf-8"), "csv" if delimiter == "," else "tsv")


def _compare(data: bytes, fmt: str) -> None:
    """Reference: the reader of a whole file (`read_bytes`), on the same bytes."""
    opts = ReadOptions(max_file_bytes=1_000_000)
    item = Item("f." + fmt, "f." + fmt, fmt, len(data))
    whole = _outcomes(read_bytes(data, item, opts))
    streamed = _outcomes(read_stream(io.BytesIO(data), item, opts))
    assert streamed == whole


def test_a_json_item_longer_than_the_limit_is_passed_over_without_being_held(tmp_path, read):
    path = tmp_path / "huge.json"
    with open(path, "w", encoding="utf-8") as handle:
        handle.write('[{"text": "before"},\n')
        handle.write(
            '{"text": "' + 'x \\" ] } [ { , ' * 3_000_000 + '", "more": [[1], {"a": "]"}]},\n'
        )  # 45 MB
        handle.write('{"text": "after"}]\n')
    _passed_over_without_being_held(read, path, "item 2")


def test_bytes_not_in_the_encoding_end_a_large_json_file_with_the_reason(write_corpus, read):
    items = ",".join(json.dumps({"text": f"entry {n} é"}, ensure_ascii=False) for n in range(200))
    data = ("[" + items + ",").encode() + b'{"text": "caf\xe9"}, {"text": "after"}]'
    root = write_corpus({"bad.json": data})
    docs, ledger, _ = read(root, max_file_bytes=500)
    assert [d.text for d in docs] == [f"entry {n} é" for n in range(200)]
    problem = [e for e in ledger if e.status == "skipped"]
    assert len(problem) == 1 and len(ledger) == 201
    offset = data.index(b"\xe9", data.index(b"caf"))
    assert problem[0].reason == (
        f"item 201: not utf-8 text: byte 0xe9 at offset {offset} cannot be decoded; rest of file not read"
    )


def test_utf16_json_files_are_streamed_too(write_corpus, read):
    content = json.dumps([{"id": n, "text": f"Grüße {n}"} for n in range(50)], ensure_ascii=False)
    root = write_corpus({"w.json": content.encode("utf-16")})
    docs, ledger, _ = read(root, max_file_bytes=100, id_field="id")
    assert [d.text for d in docs] == [f"Grüße {n}" for n in range(50)]
    assert {e.encoding for e in ledger} == {"utf-16-le"}


def test_the_csv_field_limit_is_put_back_after_reading(tmp_path):
    import csv

    import dedup

    before = csv.field_size_limit()
    (tmp_path / "rows.csv").write_text("id,text\na," + "word " * 40_000 + "\n", encoding="utf-8")
    dedup.audit([str(tmp_path)])
    assert csv.field_size_limit() == before


# -- mailboxes larger than the file limit: a message at a time ---------------------------------


def _message(n: int, body: str) -> bytes:
    head = f"From sender{n}@example.org Mon Jan  1 10:00:00 2024\nSubject: Note {n}\n\n"
    return (head + body + "\n").encode("utf-8")


def test_a_mailbox_larger_than_the_limit_is_read_message_by_message(write_corpus, read):
    messages = [_message(n, f"the harbour on day {n}\n>From the pier") for n in range(1, 101)]
    messages[36] = _message(37, "a long account of the harbour\n" * 200)
    root = write_corpus({"big.mbox": b"".join(messages)})
    docs, ledger, by_key = read(root, max_file_bytes=2_000)
    assert [d.id for d in docs] == [f"big.mbox#message {n}" for n in range(1, 101) if n != 37]
    assert by_key["big.mbox#message 37"].reason == f"message 37: {TOO_LARGE}"
    assert docs[40].text == "the harbour on day 42\nFrom the pier" and docs[40].title == "Note 42"
    assert len(ledger) == 100


def test_a_message_longer_than_the_limit_is_passed_over_without_being_held(tmp_path, read):
    path = tmp_path / "huge.mbox"
    with open(path, "wb") as handle:
        handle.write(_message(1, "before"))
        handle.write(_message(2, ("x" * 70 + "\n") * 400_000 + "y" * 3_000_000))  # 31 MB
        handle.write(_message(3, "after"))
    _passed_over_without_being_held(read, path, "message 2")


def test_a_large_file_that_is_no_mailbox_is_skipped_as_when_read_whole(write_corpus, read):
    body = b"Subject: no From line\n\n" + b"a line of text\n" * 500
    binary = _message(1, "fine") + b"\x00" + _message(2, "x" * 5000)
    root = write_corpus({"not.mbox": body, "binary.mbox": binary, "blank.mbox": b"\n" * 3000})
    _, ledger, by_key = read(root, max_file_bytes=1_000)
    assert by_key["not.mbox"].reason == "not an mbox mailbox: it does not start with a 'From ' line"
    nul = binary.index(b"\x00")
    assert by_key["binary.mbox"].reason == f"binary data: NUL byte at offset {nul}"
    assert (by_key["blank.mbox"].status, by_key["blank.mbox"].reason) == ("empty", "no messages")
    assert len(ledger) == 3


_MAIL_LINE = st.sampled_from(
    ["", "plain words here", "From the start of a line", ">From quoted", "Subject: inner", "From x", "\r"]
)


@settings(max_examples=150, deadline=None)
@given(
    preamble=st.sampled_from(["", "\n", "junk\n"]),
    bodies=st.lists(st.lists(_MAIL_LINE, max_size=5), max_size=5),
    last=st.booleans(),
)
def test_streamed_mailboxes_read_as_the_whole_file(preamble, bodies, last):
    text = preamble + "".join(
        f"From a{n}@example.org Mon Jan  1 10:00:00 2024\nSubject: S{n}\n\n" + "\n".join(body) + "\n"
        for n, body in enumerate(bodies)
    )
    data = (text if last else text.rstrip("\n")).encode("utf-8")
    _compare(data, "mbox")
