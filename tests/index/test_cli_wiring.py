"""`dedup audit --index` end to end: deltas, --fail-on new|grown, remembered decisions, bad index files."""

from __future__ import annotations

import json
import shutil

import pytest

from dedup.cli import main

ARGS = ["--id-field", "id", "--text-field", "body", "--quiet"]


@pytest.fixture
def kb(demo_path, tmp_path):
    root = tmp_path / "kb"
    shutil.copytree(demo_path, root)
    return root


def _audit(kb, tmp_path, out, *extra):
    return main(
        [
            "audit",
            str(kb),
            "--out",
            str(tmp_path / out),
            "--index",
            str(tmp_path / "idx.sqlite"),
            *ARGS,
            *extra,
        ]
    )


def test_second_audit_reports_a_grown_cluster_and_fails_on_grown(kb, tmp_path):
    assert _audit(kb, tmp_path, "o1", "--fail-on", "new") == 1  # every cluster is new the first time
    first = json.loads((tmp_path / "o1" / "audit.json").read_text())
    assert first["delta"]["previous"] is None
    assert _audit(kb, tmp_path, "o2", "--fail-on", "grown") == 0  # nothing changed
    shutil.copy(kb / "current/billing/payment-plans.md", kb / "drafts/another-copy.md")
    assert _audit(kb, tmp_path, "o3", "--fail-on", "grown") == 1
    third = json.loads((tmp_path / "o3" / "audit.json").read_text())["delta"]
    assert third["counts"]["grown"] == 1 and third["counts"]["new"] == 0
    assert third["documents"]["added"] == ["drafts/another-copy.md"]
    assert third["settings_changed"] == []
    # A grown cluster does not meet --fail-on new; a brand-new pair does.
    shutil.copy(kb / "current/it/laptop-encryption.md", kb / "drafts/laptop-copy.md")
    assert _audit(kb, tmp_path, "o4", "--fail-on", "new") == 1
    fourth = json.loads((tmp_path / "o4" / "audit.json").read_text())["delta"]
    assert fourth["counts"]["new"] == 1 and fourth["counts"]["grown"] == 0
    html = (tmp_path / "o3" / "report.html").read_text(encoding="utf-8")
    assert "Since last audit" in html and 'data-delta="grown">1<' in html


def test_not_duplicate_decision_is_remembered_until_a_text_changes(kb, tmp_path):
    assert _audit(kb, tmp_path, "o1") == 0
    data = json.loads((tmp_path / "o1" / "audit.json").read_text())
    cluster = next(c for c in data["clusters"] if c["keeper"].endswith("expense-claims.md"))
    hashes = {d["id"]: d["content_hash"] for d in data["documents"]}
    decisions = {
        "schema": "dedup-review-decisions",
        "schema_version": 1,
        "audit_id": data["audit_id"],
        "exported_at": "2026-12-01T10:00:00.000Z",
        "decisions": [
            {
                "kind": "cluster",
                "cluster_id": cluster["id"],
                "documents": [
                    {"id": m["document_id"], "content_hash": hashes[m["document_id"]]}
                    for m in cluster["members"]
                ],
                "decision": "keep-both",
                "comment": "one is for contractors",
                "decided_at": "2026-12-01T09:59:00.000Z",
            }
        ],
    }
    file = tmp_path / "decisions.json"
    file.write_text(json.dumps(decisions))
    assert main(["decisions", "import", str(file), "--index", str(tmp_path / "idx.sqlite")]) == 0
    assert _audit(kb, tmp_path, "o2", "--fail-on", "any") == 1  # other clusters remain
    again = json.loads((tmp_path / "o2" / "audit.json").read_text())
    reviewed = next(c for c in again["clusters"] if c["keeper"].endswith("expense-claims.md"))
    assert (
        reviewed["review"]["status"] == "reviewed"
        and reviewed["review"]["comment"] == "one is for contractors"
    )
    assert all(m["action"] == "keep" for m in reviewed["members"])
    # Change one text: the decision lapses and the cluster is raised again.
    member = next(m["document_id"] for m in reviewed["members"] if m["document_id"] != reviewed["keeper"])
    with open(kb / member, "a", encoding="utf-8") as handle:
        handle.write("\nOne more sentence added after the review was made.\n")
    assert _audit(kb, tmp_path, "o3") == 0
    third = json.loads((tmp_path / "o3" / "audit.json").read_text())
    lapsed = next(c for c in third["clusters"] if c["keeper"].endswith("expense-claims.md"))
    assert lapsed["review"]["status"] == "lapsed"
    assert any(m["action"] == "retire" for m in lapsed["members"])


def test_bad_index_and_fail_on_without_index_are_usage_errors(kb, tmp_path, capsys):
    bogus = tmp_path / "idx.sqlite"
    bogus.write_text("not a database at all")
    assert _audit(kb, tmp_path, "o1") == 2
    assert "Traceback" not in capsys.readouterr().err
    assert main(["audit", str(kb), "--out", str(tmp_path / "o2"), "--fail-on", "new", "--quiet"]) == 2
    assert "give --index FILE" in capsys.readouterr().err


def test_json_on_stdout_for_a_pipeline(kb, tmp_path, capsys):
    code = main(["audit", str(kb), "--out", str(tmp_path / "j1"), *ARGS, "--json", "--fail-on", "any"])
    printed = json.loads(capsys.readouterr().out)  # nothing else on stdout
    assert code == printed["exit_code"] == 1 and printed["delta"] is None
    assert printed["summary"]["clusters"] > 0 and printed["outputs"]["audit.json"].endswith("audit.json")
    assert printed["audit_id"] == json.loads((tmp_path / "j1" / "audit.json").read_text())["audit_id"]
    assert _audit(kb, tmp_path, "j2", "--json", "--accept", "--fail-on", "changed") == 0
    printed = json.loads(capsys.readouterr().out)
    assert (
        printed["delta"]["accepted"] and printed["delta"]["counts"]["new"] == printed["summary"]["clusters"]
    )
    for flags in (["--fail-on", "changed"], ["--accept"]):
        assert main(["audit", str(kb), "--out", str(tmp_path / "j3"), *ARGS, *flags]) == 2
        err = capsys.readouterr().err
        assert "give --index FILE" in err and err.count("\n") == 1
