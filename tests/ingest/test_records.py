"""Records files: JSONL, JSON arrays, CSV/TSV and Parquet, one document per record."""

from __future__ import annotations

import json

import pytest


def test_jsonl_broken_line_costs_only_that_line(write_corpus, read):
    lines = [json.dumps({"id": f"k{i}", "text": f"record {i}"}) for i in range(1, 6)]
    lines[2] = '{"id": "k3", "text": "unterminated'
    root = write_corpus({"r.jsonl": "\n".join(lines) + "\n"})
    docs, ledger, by_key = read(root, id_field="id")
    assert [d.id for d in docs] == ["r.jsonl#k1", "r.jsonl#k2", "r.jsonl#k4", "r.jsonl#k5"]
    broken = by_key["r.jsonl#line 3"]
    assert broken.status == "skipped" and broken.reason == (
        "line 3: not valid JSON (Unterminated string starting at line 1 column 22)"
    )
    assert len(ledger) == 5


def test_jsonl_line_separators_inside_strings_do_not_split_records(write_corpus, read):
    record = {"text": "one\u2028two\x85three\x0cfour"}
    root = write_corpus({"r.jsonl": json.dumps(record, ensure_ascii=False) + "\n"})
    docs, _, _ = read(root)
    assert [d.text for d in docs] == [record["text"]]


def test_json_hazards_are_reasons_not_crashes(write_corpus, read):
    root = write_corpus(
        {
            "deep.jsonl": "[" * 100_000 + "\n" + '{"text": "fine"}\n',
            "big.jsonl": '{"text": ' + "9" * 5000 + "}\n",
            "surrogate.jsonl": '{"text": "lone \\ud800 half", "id": "\\udfff"}\n',
        }
    )
    docs, _, by_key = read(root, id_field="id")
    assert "nested too deeply" in by_key["deep.jsonl#line 1"].reason
    assert (
        by_key["big.jsonl#line 1"].status == "skipped"
        and "not valid JSON" in by_key["big.jsonl#line 1"].reason
    )
    assert "no value in id field" in by_key["deep.jsonl#line 2"].reason
    (doc,) = docs
    assert doc.text == "lone \ufffd\ufffd\ufffd half"  # repaired so that it can be written out
    doc.id.encode("utf-8")


def test_json_array_item_by_item(write_corpus, read):
    items = [
        {"id": 1, "text": "first"},
        {"id": 2, "body": "no text field"},
        "a string",
        {"id": 3, "text": None},
    ]
    root = write_corpus(
        {
            "a.json": json.dumps(items, indent=1),
            "one.json": json.dumps({"text": "a single object"}),
            "num.json": "42",
            "empty.json": "[]",
            "broken.json": '[{"text": "kept"},\n {"text": broken}, {"text": "lost"}]',
            "trailing.json": '[{"text": "x"}] junk',
        }
    )
    docs, ledger, by_key = read(root, id_field="id")
    assert by_key["a.json#item 1"].document_id == "a.json#1"
    assert "no field 'text'" in by_key["a.json#item 2"].reason
    assert "a JSON string, not an object" in by_key["a.json#item 3"].reason
    assert by_key["a.json#item 4"].status == "empty"
    assert "no value in id field 'id'" in by_key["one.json#item 1"].reason
    assert by_key["num.json"].reason == "the file: a JSON number, not objects with fields"
    assert by_key["empty.json"].status == "empty" and by_key["empty.json"].reason == "no records"
    assert (
        "item 2: not valid JSON (Expecting value at line 2 column 11)" in by_key["broken.json#item 2"].reason
    )
    assert by_key["broken.json#item 2"].reason.endswith("rest of file not read")
    assert "extra data after the array at line 1 column 17" in by_key["trailing.json"].reason


def test_csv_quoted_newlines_ragged_rows_and_missing_columns(write_corpus, read):
    root = write_corpus(
        {
            "t.csv": 'id,title,text\n1,One,"line one\nline two"\n2,Two\n\n3,Three,"x",extra\n4,Four,plain\n',
            "u.csv": "id,body\n1,hello\n",
            "h.csv": "id,text\n",
        }
    )
    docs, _, by_key = read(root, id_field="id")
    assert [(d.id, d.text, d.title, d.record) for d in docs] == [
        ("t.csv#1", "line one\nline two", "One", "row 2"),
        ("t.csv#4", "plain", "Four", "row 7"),
    ]
    assert by_key["t.csv#row 4"].reason == "row 4: 2 cells where the header has 3"
    assert by_key["t.csv#row 6"].reason == "row 6: 4 cells where the header has 3"
    assert by_key["u.csv"].reason.startswith("no column 'text' (columns: id, body)")
    assert by_key["h.csv"].status == "empty"


def test_several_text_fields_are_joined_and_others_become_metadata(write_corpus, read):
    root = write_corpus({"t.tsv": "id\tsubject\tbody\tdate\nx\tHello\tWorld\t2024-01-02\n"})
    docs, _, _ = read(root, id_field="id", text_fields=("subject", "body"))
    assert [(d.id, d.text, d.metadata) for d in docs] == [
        ("t.tsv#x", "Hello\n\nWorld", {"id": "x", "date": "2024-01-02"})
    ]


def test_csv_fields_longer_than_the_csv_module_default(write_corpus, read):
    long_text = "word " * 60_000  # 300 kB, beyond csv's 128 KiB default field limit
    root = write_corpus({"t.csv": f'id,text\n1,"{long_text}"\n'})
    docs, _, _ = read(root, id_field="id")
    assert docs[0].text == long_text


def test_parquet_rows(tmp_path, read):
    pa = pytest.importorskip("pyarrow")
    pq = pytest.importorskip("pyarrow.parquet")
    table = pa.table(
        {
            "id": ["a", "b", "a", None],
            "text": ["first text", "second text", "repeat", "no id"],
            "when": pa.array([1_700_000_000, 1_700_000_100, 0, 0], pa.timestamp("s")),
        }
    )
    pq.write_table(table, tmp_path / "r.parquet", row_group_size=2)
    pq.write_table(pa.table({"body": ["x"]}), tmp_path / "nocol.parquet")
    (tmp_path / "fake.parquet").write_bytes(b"PAR1 not really")
    docs, _, by_key = read(tmp_path, id_field="id")
    assert [(d.id, d.record) for d in docs] == [("r.parquet#a", "row 1"), ("r.parquet#b", "row 2")]
    assert docs[0].metadata["when"] == "2023-11-14T22:13:20"
    assert "repeats an earlier record" in by_key["r.parquet#row 3"].reason
    assert "no value in id field" in by_key["r.parquet#row 4"].reason
    assert by_key["nocol.parquet"].reason.startswith("no column 'text' (columns: body)")
    assert by_key["fake.parquet"].reason.startswith("cannot be read as Parquet:")
