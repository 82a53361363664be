"""Review decisions: imported once, respected while the texts are unchanged, lapsing when they change."""

from __future__ import annotations

import json

import pytest
from index_helpers import edited

import dedup
from dedup.index import (
    DecisionsFileError,
    fails,
    import_decisions,
    load_decisions_file,
    open_index,
    track_audit,
)
from dedup.report.decisions import validate_decisions


def _export(result, decisions: list[tuple[str, list[str], str | None, str, str]]) -> dict:
    """A decisions file as the report exports it: (kind, document ids, decision, comment, time)."""
    hash_of = {d["id"]: d["content_hash"] for d in result.documents}
    cluster_of = {m["document_id"]: c["id"] for c in result.clusters for m in c["members"]}
    data = {
        "schema": "dedup-review-decisions",
        "schema_version": 1,
        "audit_id": result.audit_id,
        "exported_at": "2024-05-02T10:00:00.000Z",
        "decisions": [
            {
                "kind": kind,
                "cluster_id": cluster_of[ids[0]],
                "documents": [{"id": i, "content_hash": hash_of[i]} for i in ids],
                "decision": decision,
                "comment": comment,
                "decided_at": when,
            }
            for kind, ids, decision, comment, when in decisions
        ],
    }
    assert validate_decisions(data) == []  # Reference: the schema's own validator (dedup.report.decisions)
    return data


def _cluster_with(result, doc_id: str) -> dict:
    return next(c for c in result.clusters if any(m["document_id"] == doc_id for m in c["members"]))


def _import(path, data) -> dict:
    with open_index(str(path), create=True) as index:
        return import_decisions(index, data)


def test_import_is_idempotent_and_a_bad_file_is_refused(tmp_path, write_corpus, corpus_files):
    result = dedup.audit([str(write_corpus(corpus_files))])
    data = _export(
        result, [("pair", ["c/one.txt", "c/two.txt"], "keep-both", "two editions", "2024-05-01T09:00:00Z")]
    )
    index = tmp_path / "r.index"
    assert _import(index, data) == {"decisions": 1, "new": 1, "known": 0}
    assert _import(index, data) == {"decisions": 1, "new": 0, "known": 1}
    bad = tmp_path / "bad.json"
    bad.write_text(json.dumps({**data, "schema": "something-else"}))
    with pytest.raises(DecisionsFileError, match="schema is 'something-else'"):
        load_decisions_file(str(bad))
    bad.write_text("{not json")
    with pytest.raises(DecisionsFileError, match="not a JSON file"):
        load_decisions_file(str(bad))


def test_a_reviewed_pair_is_not_raised_again_until_a_text_changes(
    tmp_path, write_corpus, corpus_files, base_texts
):
    root = write_corpus(corpus_files)
    index = tmp_path / "r.index"
    first = dedup.audit([str(root)])
    track_audit(str(index), first)
    _import(
        index,
        _export(
            first,
            [
                (
                    "pair",
                    ["c/one.txt", "c/two.txt"],
                    "not-duplicate",
                    "translation",
                    "2024-05-01T09:00:00+02:00",
                )
            ],
        ),
    )

    second = dedup.audit([str(root)])
    delta, failed_any = track_audit(str(index), second, "any")
    c = _cluster_with(second, "c/one.txt")
    assert c["review"]["status"] == "reviewed" and c["review"]["comment"] == "translation"
    assert c["review"]["decided_at"] == "2024-05-01T07:00:00.000000Z"
    assert all(m["action"] == "keep" and "reviewed on 2024-05-01" in m["reason"] for m in c["members"])
    assert c["retire_documents"] == 0
    actions = {a["document_id"]: a["action"] for a in second.actions}
    assert actions["c/two.txt"] == "keep"
    assert second.summary["reviewed_clusters"] == 1
    assert second.summary["retire_documents"] == sum(1 for a in second.actions if a["action"] == "retire")
    assert delta["counts"]["reviewed"] == 1 and failed_any  # the other two clusters are still raised
    pair = next(p for p in second.pairs if {p["left"], p["right"]} == {"c/one.txt", "c/two.txt"})
    assert pair["review"]["status"] == "reviewed"

    (root / "c/two.txt").write_text(edited(base_texts[2], "beaver", 0.7), encoding="utf-8")
    third = dedup.audit([str(root)])
    delta, failed = track_audit(str(index), third, "grown")
    c = _cluster_with(third, "c/one.txt")
    assert c["review"]["status"] == "lapsed" and c["review"]["changed"] == ["c/two.txt"]
    assert c["review"]["decision"] == "not-duplicate"
    assert any(m["action"] == "retire" for m in c["members"])  # raised again
    entry = next(e for e in delta["clusters"] if e["cluster_id"] == c["id"])
    # A text changed, no member joined: "changed", which --fail-on changed catches and grown does not.
    assert entry["status"] == "changed" and entry["changed"] == ["c/two.txt"] and entry["added"] == []
    assert not failed and fails(delta, "changed")


def test_a_reviewed_cluster_that_gains_a_member_is_raised_again(
    tmp_path, write_corpus, corpus_files, base_texts
):
    root = write_corpus(corpus_files)
    index = tmp_path / "r.index"
    first = dedup.audit([str(root)])
    members = [m["document_id"] for m in _cluster_with(first, "a/one.txt")["members"]]
    _import(index, _export(first, [("cluster", members, "keep-both", "", "2024-05-01T09:00:00Z")]))
    second = dedup.audit([str(root)])
    track_audit(str(index), second)
    assert _cluster_with(second, "a/one.txt")["review"]["status"] == "reviewed"

    (root / "a/four.txt").write_text(edited(base_texts[0], "heron", 0.6), encoding="utf-8")
    third = dedup.audit([str(root)])
    delta, failed = track_audit(str(index), third, "grown")
    review = _cluster_with(third, "a/one.txt")["review"]
    assert review["status"] == "partly-reviewed" and review["pairs_reviewed"] < review["pairs"]
    assert failed


def test_decisions_follow_texts_not_names_and_the_latest_wins(tmp_path, write_corpus, corpus_files):
    root = write_corpus(corpus_files)
    index = tmp_path / "r.index"
    first = dedup.audit([str(root)])
    pair = ["c/one.txt", "c/two.txt"]
    _import(index, _export(first, [("pair", pair, "not-duplicate", "old", "2024-05-01T09:00:00Z")]))
    _import(index, _export(first, [("pair", pair, "confirmed-duplicate", "new", "2024-06-01T09:00:00Z")]))
    second = dedup.audit([str(root)])
    track_audit(str(index), second)
    review = _cluster_with(second, "c/one.txt")["review"]
    assert review["status"] == "confirmed" and review["comment"] == "new"
    assert any(m["action"] == "retire" for m in _cluster_with(second, "c/one.txt")["members"])

    _import(index, _export(first, [("pair", pair, "keep-both", "newest", "2024-07-01T09:00:00Z")]))
    (root / "c/two.txt").rename(root / "c/renamed.txt")  # same text, new name
    third = dedup.audit([str(root)])
    track_audit(str(index), third)
    review = _cluster_with(third, "c/one.txt")["review"]
    assert review["status"] == "reviewed" and review["comment"] == "newest"


def test_exact_copies_need_their_text_listed_twice(tmp_path, write_corpus, corpus_files):
    root = write_corpus(corpus_files)
    index = tmp_path / "r.index"
    first = dedup.audit([str(root)])
    # A decision naming the copies' text once (with another text) says nothing about the copies.
    _import(
        index, _export(first, [("pair", ["b/one.txt", "c/one.txt"], "keep-both", "", "2024-05-01T08:00:00Z")])
    )
    second = dedup.audit([str(root)])
    track_audit(str(index), second)
    assert _cluster_with(second, "b/one.txt")["review"] is None
    _import(
        index,
        _export(first, [("pair", ["b/copy.txt", "b/one.txt"], "keep-both", "", "2024-05-01T09:00:00Z")]),
    )
    third = dedup.audit([str(root)])
    track_audit(str(index), third)
    assert _cluster_with(third, "b/one.txt")["review"]["status"] == "reviewed"
    assert _cluster_with(third, "a/one.txt")["review"] is None


def test_no_decisions_leave_the_audit_as_it_was_and_fail_on_counts_everything(
    tmp_path, write_corpus, corpus_files
):
    root = write_corpus(corpus_files)
    plain = dedup.audit([str(root)])
    tracked = dedup.audit([str(root)])
    delta, failed = track_audit(str(tmp_path / "r.index"), tracked, "new")
    assert [a["action"] for a in tracked.actions] == [a["action"] for a in plain.actions]
    assert all(c["review"] is None for c in tracked.clusters) and failed
    assert not fails(delta, "none")


def test_a_near_copy_joining_a_kept_cluster_leaves_the_reviewed_members_kept(
    tmp_path, write_corpus, corpus_files, base_texts
):
    root = write_corpus(corpus_files)
    index = tmp_path / "r.index"
    first = dedup.audit([str(root)])
    pair = ["c/one.txt", "c/two.txt"]
    _import(index, _export(first, [("pair", pair, "keep-both", "two editions", "2024-05-01T09:00:00Z")]))
    track_audit(str(index), dedup.audit([str(root)]))
    (root / "c/zz-near.txt").write_text(edited(base_texts[2], "lynx", 0.4), encoding="utf-8")
    third = dedup.audit([str(root)])
    delta, failed = track_audit(str(index), third, "grown")
    c = _cluster_with(third, "c/one.txt")
    members = {m["document_id"]: m for m in c["members"]}
    assert all(members[d]["action"] == "keep" and members[d]["review"]["status"] == "reviewed" for d in pair)
    assert members["c/zz-near.txt"]["review"] == {"status": "unreviewed"}
    assert c["review"]["status"] == "partly-reviewed" and c["review"]["unreviewed"] == ["c/zz-near.txt"]
    assert c["retire_documents"] + c["merge_documents"] == sum(
        1 for m in c["members"] if m["action"] in ("retire", "merge-then-retire")
    )
    actions = {a["document_id"]: a["action"] for a in third.actions}
    assert actions["c/one.txt"] == actions["c/two.txt"] == "keep"
    entry = next(e for e in delta["clusters"] if e["cluster_id"] == c["id"])
    assert entry["status"] == "grown" and entry["added"] == ["c/zz-near.txt"] and failed


def test_an_exact_copy_joining_a_reviewed_cluster_is_raised_not_settled(tmp_path, write_corpus, corpus_files):
    root = write_corpus(corpus_files)
    index = tmp_path / "r.index"
    first = dedup.audit([str(root)])
    _import(
        index, _export(first, [("pair", ["c/one.txt", "c/two.txt"], "keep-both", "", "2024-05-01T09:00:00Z")])
    )
    track_audit(str(index), dedup.audit([str(root)]))
    (root / "c/zz-copy.txt").write_text((root / "c/one.txt").read_text(encoding="utf-8"), encoding="utf-8")
    third = dedup.audit([str(root)])
    delta, failed = track_audit(str(index), third, "grown")
    c = _cluster_with(third, "c/one.txt")
    assert c["review"]["status"] == "partly-reviewed" and c["review"]["unreviewed"] == ["c/zz-copy.txt"]
    assert failed and delta["counts"]["reviewed"] == 0


def test_a_changed_text_lapses_only_that_members_decisions(tmp_path, write_corpus, corpus_files, base_texts):
    root = write_corpus(corpus_files)
    index = tmp_path / "r.index"
    first = dedup.audit([str(root)])
    members = [m["document_id"] for m in _cluster_with(first, "a/one.txt")["members"]]
    assert len(members) == 3
    _import(index, _export(first, [("cluster", members, "keep-both", "", "2024-05-01T09:00:00Z")]))
    track_audit(str(index), dedup.audit([str(root)]))
    (root / "a/three.md").write_text(edited(edited(base_texts[0], "yak", 0.3), "emu", 0.8), encoding="utf-8")
    third = dedup.audit([str(root)])
    delta, _ = track_audit(str(index), third, "none")
    a = _cluster_with(third, "a/one.txt")
    status = {m["document_id"]: m["review"]["status"] for m in a["members"]}
    assert status == {"a/one.txt": "reviewed", "a/two.txt": "reviewed", "a/three.md": "lapsed"}
    assert a["review"]["status"] == "lapsed" and a["review"]["changed"] == ["a/three.md"]
    kept = {m["document_id"] for m in a["members"] if m["action"] == "keep"}
    assert {"a/one.txt", "a/two.txt"} <= kept
    entry = next(e for e in delta["clusters"] if e["cluster_id"] == a["id"])
    assert entry["status"] == "changed" and entry["changed"] == ["a/three.md"]
    assert fails(delta, "changed") and not fails(delta, "grown")
