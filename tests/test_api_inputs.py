"""The Python API as notebooks and pipelines meet it: paths, rows and tables in, frames out.

Rows given in memory must give the audit that the same texts give as files (same ids,
pairs, scores, clusters, actions); every row is accounted for in the ledger; the frames
hold what the CSV files hold.
"""

from __future__ import annotations

import csv
import math
import os
from pathlib import Path

import pytest

import dedup
from dedup import AuditSettings

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "fixtures" / "demo" / "kb"

# Invented help-desk articles: two near-copies, one exact copy, one unrelated text.
LEAVE = (
    "To request annual leave open the staff portal, choose leave requests and pick the days. "
    "Your manager approves the request within three working days and the calendar is updated. "
    "Leave not taken by the end of March is carried over up to five days."
)
ARTICLES = {
    "hr/leave.txt": LEAVE,
    "hr/leave-copy.txt": LEAVE.replace("three working days", "two working days"),
    "old/leave.txt": LEAVE,
    "it/printer.txt": (
        "If the third floor printer jams, open the side panel, remove the stuck sheet and close the "
        "panel gently. Report repeated jams to the service desk with the printer's asset number."
    ),
}


def _comparable(result) -> dict:
    """What the audit found, without what says how it was given (inputs, sources, formats)."""
    return {
        "pairs": result.pairs,
        "clusters": result.clusters,
        "actions": result.actions,
        "exact_groups": result.exact_groups,
        "ids": [d["id"] for d in result.documents],
        "hashes": [d["content_hash"] for d in result.documents],
    }


@pytest.fixture(scope="module")
def as_files(tmp_path_factory) -> dedup.AuditResult:
    folder = tmp_path_factory.mktemp("articles")
    for name, text in ARTICLES.items():
        (folder / name).parent.mkdir(parents=True, exist_ok=True)
        (folder / name).write_text(text, encoding="utf-8")
    return dedup.audit(str(folder), AuditSettings(threshold=0.5))


def test_a_str_is_one_path_and_a_pathlike_too():
    given_list = dedup.audit([str(DEMO)]).to_dict()
    assert dedup.audit(str(DEMO)).to_dict() == given_list
    assert dedup.audit(DEMO).to_dict() == given_list


def test_pairs_give_the_audit_the_same_texts_give_as_files(as_files):
    result = dedup.audit(list(ARTICLES.items()), AuditSettings(threshold=0.5))
    assert result.summary["clusters"] >= 1 and result.pairs  # the check has something to compare
    assert _comparable(result) == _comparable(as_files)
    assert result.inputs == ["records given in Python"]
    assert {e.format for e in result.ledger} == {"record"}


def test_dicts_and_tables_give_the_same_audit(as_files):
    pd = pytest.importorskip("pandas")
    pa = pytest.importorskip("pyarrow")
    rows = [{"id": k, "text": v, "team": k.split("/")[0]} for k, v in ARTICLES.items()]
    settings = AuditSettings(threshold=0.5)
    expected = _comparable(as_files)
    assert _comparable(dedup.audit(rows, settings)) == expected
    frame = pd.DataFrame(rows)
    assert _comparable(dedup.audit(frame, settings)) == expected
    assert _comparable(dedup.audit(pa.Table.from_pandas(frame, preserve_index=False), settings)) == expected
    renamed = frame.rename(columns={"id": "path", "text": "body"})
    assert _comparable(dedup.audit(renamed, settings, id_col="path", text_col="body")) == expected


def test_a_frame_without_the_id_column_gives_its_index():
    pd = pytest.importorskip("pandas")
    frame = pd.DataFrame({"text": list(ARTICLES.values())}, index=[10, 11, 12, 13])
    result = dedup.audit(frame, AuditSettings(threshold=0.5))
    assert [d["id"] for d in result.documents] == ["10", "11", "12", "13"]


def test_every_row_is_accounted_for_with_its_reason():
    rows = [
        ("a", LEAVE),
        ("a", "another text under the same id"),
        {"id": None, "text": "no id"},
        {"id": float("nan"), "text": "no id either"},
        {"id": "b"},
        {"id": "c", "text": 42},
        {"id": "d", "text": "   "},
        7,
        ("e", b"bytes are read as UTF-8 text"),
    ]
    result = dedup.audit(rows)
    ledger = result.ledger
    assert len(ledger) == len(rows)
    assert [e.record for e in ledger] == [f"row {i}" for i in range(1, len(rows) + 1)]
    status = [e.status for e in ledger]
    assert status == [
        "read",
        "skipped",
        "skipped",
        "skipped",
        "skipped",
        "skipped",
        "empty",
        "skipped",
        "read",
    ]
    reasons = [e.reason for e in ledger]
    assert "repeats an earlier row" in reasons[1]
    assert "no value in id column 'id'" in reasons[2] and "no value in id column" in reasons[3]
    assert "no value in text column 'text'" in reasons[4]
    assert "int, not text" in reasons[5]
    assert "not an (id, text) pair or a mapping but int" in reasons[7]
    assert [d["id"] for d in result.documents] == ["a", "d", "e"]


def test_the_text_limit_applies_to_rows():
    result = dedup.audit([("long", "abcdefghij" * 40)], AuditSettings(max_text_chars=50))
    (entry,) = result.ledger
    assert entry.status == "truncated" and "50" in entry.reason
    assert result.documents[0]["characters"] == 50


def test_metadata_columns_reach_the_keeper_and_the_frames():
    pd = pytest.importorskip("pandas")
    frame = pd.DataFrame(
        {
            "id": ["old", "new", "other"],
            "text": [LEAVE, LEAVE + " Ask HR for exceptions.", ARTICLES["it/printer.txt"]],
            "updated": ["2021-03-01", "2025-06-30", "2024-01-01"],
            "owner": ["hr", "hr", "it"],
        }
    )
    settings = AuditSettings(threshold=0.5, keeper_policy="newest", date_field="updated")
    result = dedup.audit(frame, settings)
    actions = result.actions_frame().set_index("document_id")
    assert actions.loc["new", "action"] == "keep" and actions.loc["old", "in_favour_of"] == "new"
    assert actions.loc["other", "owner"] == "it" and actions.loc["old", "updated"] == "2021-03-01"
    documents = result.documents_frame()
    assert list(documents["owner"]) == ["hr", "hr", "it"]  # documents in id order: new, old, other
    assert "updated" not in result.to_dict()["documents"][0]  # audit.json stays as files give it


def test_frames_hold_what_the_csv_files_hold(tmp_path):
    pytest.importorskip("pandas")
    result = dedup.audit(str(DEMO), AuditSettings(threshold=0.8))
    result.write(str(tmp_path), report=False)
    for name in ("pairs", "clusters", "actions", "ledger", "passages"):
        frame = result.frame(name)
        with open(tmp_path / f"{name}.csv", newline="", encoding="utf-8") as handle:
            rows = list(csv.reader(handle))
        assert list(frame.columns) == rows[0], name
        assert len(frame) == len(rows) - 1, name
        first_column = [r[0] for r in rows[1:]]
        assert [str(v) for v in frame[frame.columns[0]]] == first_column, name
    scores = result.pairs_frame()["jaccard"]
    assert all(isinstance(v, float) and not math.isnan(v) for v in scores)


def test_frames_without_pandas_are_arrow_tables():
    pa = pytest.importorskip("pyarrow")
    result = dedup.audit(list(ARTICLES.items()), AuditSettings(threshold=0.5))
    table = result.pairs_frame(kind="arrow")
    assert isinstance(table, pa.Table) and table.num_rows == len(result.pairs)
    with pytest.raises(KeyError, match="no frame 'pair'"):
        result.frame("pair")
    with pytest.raises(ValueError, match="kind must be one of"):
        result.pairs_frame(kind="polars")


def test_repr_is_short_and_html_summary_escapes_text():
    result = dedup.audit(str(DEMO))
    assert len(repr(result)) < 120 and repr(result).startswith("AuditResult(")
    hostile = "<script>alert(1)</script>.txt"
    shown = dedup.audit([(hostile, LEAVE), ("b.txt", LEAVE)])._repr_html_()
    assert "<script>" not in shown and "&lt;script&gt;" in shown
    assert "not a verdict" in shown


def test_what_cannot_be_audited_says_what_can():
    with pytest.raises(TypeError, match="give paths, \\(id, text\\) pairs"):
        dedup.audit(b"bytes")
    with pytest.raises(dedup.InputError, match="give \\(id, text\\) pairs"):
        dedup.audit(["this is a sentence, not a path"])
    pd = pytest.importorskip("pandas")
    with pytest.raises(KeyError, match="no column 'text'"):
        dedup.audit(pd.DataFrame({"id": ["a"], "body": ["x"]}))


def test_the_index_object_builds_searches_and_audits(tmp_path):
    folder = tmp_path / "articles"
    for name, text in ARTICLES.items():
        (folder / name).parent.mkdir(parents=True, exist_ok=True)
        (folder / name).write_text(text, encoding="utf-8")
    index = dedup.Index.build([folder], tmp_path / "kb.index", AuditSettings(threshold=0.5))
    hits = index.similar("the printer on the third floor jams", k=2)
    assert hits[0]["document_id"] == "it/printer.txt"
    first = index.audit(settings=AuditSettings(threshold=0.5), accept=True)
    assert first.delta is not None and first.summary["clusters"] >= 1
    (folder / "it" / "printer-copy.txt").write_text(ARTICLES["it/printer.txt"] + " Thanks.", encoding="utf-8")
    second = index.audit([folder], AuditSettings(threshold=0.5))
    status = {c["keeper"]: c["status"] for c in second.delta["clusters"]}
    assert status == {"hr/leave.txt": "unchanged", "it/printer-copy.txt": "new"}
    summary = index.update([folder])
    assert os.path.exists(index.path) and summary is not None
    with pytest.raises(TypeError, match="give paths"):
        dedup.Index.build([("a", "text")], tmp_path / "rows.index")
