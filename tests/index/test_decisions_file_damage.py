"""Decisions files that are damaged or hostile are refused in one line naming the file, the place and the problem.

Reference for times: Python's `datetime.fromisoformat` and `datetime.astimezone` (the standard library's
reading of ISO 8601 / RFC 3339 times), compared with the validator over a grid of field values.
"""

from __future__ import annotations

import itertools
import json
import sqlite3
from datetime import datetime, timezone

import pytest

from dedup.index import DecisionsFileError, import_decisions, load_decisions_file, open_index
from dedup.index.decisions_file import MAX_DEPTH, utc_time, validate_decisions

HASH_A, HASH_B = "0" * 31 + "a", "0" * 31 + "b"


def _valid() -> dict:
    """A valid file of two decisions (the second is the one the tests break)."""
    docs = [{"id": "notes/a.txt", "content_hash": HASH_A}, {"id": "notes/b.txt", "content_hash": HASH_B}]
    decision = {
        "kind": "pair",
        "cluster_id": "C00001",
        "documents": docs,
        "decision": "keep-both",
        "comment": "two editions",
        "decided_at": "2024-05-01T09:00:00Z",
    }
    return {
        "schema": "dedup-review-decisions",
        "schema_version": 1,
        "audit_id": "0123456789abcdef",
        "exported_at": "2024-05-02T10:00:00.000Z",
        "decisions": [dict(decision), dict(decision, decision=None, decided_at="2024-05-01T10:00:00+02:00")],
    }


def _second(key: str, value) -> dict:
    data = _valid()
    data["decisions"][1][key] = value
    return data


def _refused(tmp_path, content: str | bytes, pattern: str) -> str:
    """Write ``content`` as a decisions file; its refusal must match ``pattern`` and name the file, in one line."""
    path = tmp_path / "decisions.json"
    if isinstance(content, bytes):
        path.write_bytes(content)
    else:
        path.write_text(content, encoding="utf-8")
    with pytest.raises(DecisionsFileError, match=pattern) as caught:
        load_decisions_file(str(path))
    message = str(caught.value)
    assert str(path) in message and "\n" not in message
    return message


TIMES = [
    ("month 99", "2026-99-99T00:00:00Z", "there is no month 99"),
    ("month 00", "2026-00-10T00:00:00Z", "there is no month 00"),
    ("February 30", "2024-02-30T00:00:00Z", "month 02 of 2024 has no day 30"),
    ("February 29 of a common year", "2023-02-29T00:00:00Z", "month 02 of 2023 has no day 29"),
    ("day 00", "2024-01-00T00:00:00Z", "has no day 00"),
    ("hour 24", "2024-01-01T24:00:00Z", "hour must be below 24"),
    ("leap second", "2016-12-31T23:59:60Z", "second below 60"),
    ("offset +99:00", "2024-05-01T09:00:00+99:00", "zone offset \\+99:00"),
    ("offset minutes", "2024-05-01T09:00:00-01:75", "zone offset -01:75"),
    ("offset minute 60", "2024-05-01T09:00:00+05:60", "zone offset \\+05:60"),
    ("year 0000", "0000-01-01T00:00:00Z", "no year 0000"),
    ("before year 1 in UTC", "0001-01-01T00:00:00+01:00", "outside the years 0001 to 9999"),
    ("after year 9999 in UTC", "9999-12-31T23:30:00-01:00", "outside the years 0001 to 9999"),
]


@pytest.mark.parametrize("name, when, why", TIMES, ids=[t[0] for t in TIMES])
def test_a_time_that_is_not_real_is_refused_naming_the_decision(tmp_path, name, when, why):
    message = _refused(tmp_path, json.dumps(_second("decided_at", when)), f"decision 2: decided_at .*{why}")
    assert when in message


def test_an_exported_at_that_is_not_real_is_refused(tmp_path):
    data = _valid()
    data["exported_at"] = "2024-13-01T00:00:00Z"
    _refused(tmp_path, json.dumps(data), "exported_at .*no month 13")


@pytest.mark.parametrize("key", ["comment", "cluster_id"])
def test_an_unpaired_surrogate_in_a_text_is_refused(tmp_path, key):
    text = json.dumps(_second(key, "fine\ud800"))  # json writes it as the escape \ud800
    assert "\\ud800" in text
    _refused(tmp_path, text, f"decision 2: {key} holds an unpaired surrogate \\(U\\+D800 at character 5\\)")


def test_an_unpaired_surrogate_in_a_document_id_is_refused(tmp_path):
    data = _valid()
    data["decisions"][0]["documents"][1]["id"] = "\udcff.txt"
    _refused(tmp_path, json.dumps(data), "decision 1: document id .* holds an unpaired surrogate \\(U\\+DCFF")


def test_a_surrogate_pair_is_a_character_and_is_stored_as_written(tmp_path):
    """``\\ud83d\\ude00`` in JSON is one character (U+1F600): accepted, stored and read back unchanged."""
    data = _second("comment", "\U0001f600 same text")
    path = tmp_path / "decisions.json"
    path.write_text(json.dumps(data), encoding="utf-8")
    assert "\\ud83d\\ude00" in path.read_text(encoding="utf-8")
    loaded = load_decisions_file(str(path))
    index_path = str(tmp_path / "decisions.index")
    with open_index(index_path, create=True) as index:
        assert import_decisions(index, loaded)["new"] == 2
    connection = sqlite3.connect(index_path)
    try:
        comments = {row[0] for row in connection.execute("SELECT comment FROM decisions")}
    finally:
        connection.close()
    assert comments == {"two editions", "\U0001f600 same text"}


def test_2000_nested_arrays_are_refused_before_parsing(tmp_path):
    _refused(
        tmp_path,
        "[" * 2000 + "]" * 2000,
        f"nest deeper than {MAX_DEPTH} levels at line 1, column {MAX_DEPTH + 1}",
    )


def test_deep_nesting_inside_a_decision_names_its_line(tmp_path):
    text = json.dumps(_valid(), indent=1)
    at = text.index('"comment"')
    deep = text[:at] + '"extra": ' + "[" * 2000 + "]" * 2000 + ", " + text[at:]
    line = deep.count("\n", 0, at) + 1
    _refused(tmp_path, deep, f"nest deeper than {MAX_DEPTH} levels at line {line}, column")


def test_brackets_inside_strings_do_not_count_as_nesting(tmp_path):
    path = tmp_path / "decisions.json"
    path.write_text(json.dumps(_second("comment", '[{"\\' * 500)), encoding="utf-8")
    assert load_decisions_file(str(path))["decisions"][1]["comment"] == '[{"\\' * 500


def test_a_number_too_long_to_read_is_refused_with_its_place(tmp_path):
    text = json.dumps(_valid())
    text = text.replace('"schema_version": 1', '"schema_version": 1' + "0" * 5000)
    _refused(tmp_path, text, "a number at line 1, column \\d+ is too long to read")


def test_bytes_that_are_not_utf8_are_refused(tmp_path):
    _refused(tmp_path, json.dumps(_valid()).encode() + b"\xff", "not a JSON file: byte \\d+ is not UTF-8")


def test_the_validator_agrees_with_the_standard_library_on_which_times_are_real():
    """Every time the pattern admits is accepted exactly when Python reads it and can put it in UTC.

    Left out of the grid: hour 24 (ISO 8601's end of day; RFC 3339 section 5.6 stops at 23, and Python
    versions differ) and an offset minute of 60 (Python reads +05:60 as +06:00; RFC 3339 stops at 59):
    `TIMES` checks both are refused."""
    years, months, days = (
        ("0001", "2023", "2024", "9999"),
        ("00", "01", "02", "12", "13"),
        ("00", "28", "29", "31"),
    )
    clocks = ("00:00:00", "23:59:59", "12:60:00", "10:00:60")
    zones = ("Z", "+00:00", "+01:00", "-01:00", "+23:59", "-24:00")
    checked = 0
    for year, month, day, clock, zone in itertools.product(years, months, days, clocks, zones):
        when = f"{year}-{month}-{day}T{clock}.5{zone}"
        try:
            reference = datetime.fromisoformat(when.replace("Z", "+00:00")).astimezone(timezone.utc)
        except (ValueError, OverflowError):
            reference = None
        ours = validate_decisions(_second("decided_at", when))
        assert (ours == []) == (reference is not None), when
        if reference is not None:
            assert utc_time(when) == reference.strftime("%Y-%m-%dT%H:%M:%S.%fZ"), when
        checked += reference is not None
    assert checked > 100  # the grid holds real times too, not only refusals


def test_a_refused_file_leaves_the_index_as_it_was(tmp_path):
    index_path = tmp_path / "decisions.index"
    with open_index(str(index_path), create=True) as index:
        import_decisions(index, _valid())
    before = index_path.read_bytes()
    _refused(tmp_path, json.dumps(_second("decided_at", "2026-99-99T00:00:00Z")), "no month 99")
    with open_index(str(index_path)) as index, pytest.raises(DecisionsFileError, match="decision 2"):
        import_decisions(index, _second("decided_at", "2026-99-99T00:00:00Z"))
    assert index_path.read_bytes() == before


@pytest.mark.parametrize(
    "where, change",
    [
        ("decided_at", lambda d: d["decisions"][1].update(decided_at="2024-05-01T09:00:00Z\n")),
        ("audit_id", lambda d: d.update(audit_id="0123456789abcdef\n")),
        ("content_hash", lambda d: d["decisions"][0]["documents"][0].update(content_hash=HASH_A + "\n")),
    ],
)
def test_a_value_with_a_line_end_after_it_is_refused(tmp_path, where, change):
    """A pattern's ``$`` must not let a line end follow (JSON Schema's ``$`` does not)."""
    data = _valid()
    change(data)
    _refused(tmp_path, json.dumps(data), where)


def test_a_byte_order_mark_is_left_out(tmp_path):
    path = tmp_path / "decisions.json"
    path.write_bytes(b"\xef\xbb\xbf" + json.dumps(_valid()).encode())
    assert load_decisions_file(str(path)) == _valid()
