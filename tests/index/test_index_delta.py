"""Scheduled audits: clusters matched across audits, the delta block and --fail-on."""

from __future__ import annotations

import pytest
from index_helpers import edited

import dedup
from dedup.index import compare_clusters, fails, track_audit


def _cluster(cid: str, *members: tuple[str, str]) -> dict:
    return {
        "id": cid,
        "keeper": members[0][0],
        "size": len(members),
        "kind": "near",
        "members": [[d, h, "duplicate"] for d, h in members],
        "review": None,
    }


def _by_status(entries: list[dict]) -> dict[str, list[tuple]]:
    out: dict[str, list[tuple]] = {}
    for e in entries:
        out.setdefault(e["status"], []).append((e["cluster_id"], e["previous_cluster_id"]))
    return out


def test_each_state_by_the_matching_rule():
    previous = [
        _cluster("C00001", ("a1", "h1"), ("a2", "h2"), ("a3", "h3")),
        _cluster("C00002", ("b1", "h4"), ("b2", "h5")),
        _cluster("C00003", ("c1", "h6"), ("c2", "h7")),
        _cluster("C00004", ("d1", "h8"), ("d2", "h9")),
        _cluster("C00005", ("e1", "h10"), ("e2", "h11")),
    ]
    current = [
        _cluster("C00001", ("b1", "h4"), ("b2", "h5"), ("b3", "h12")),  # grown: b3 joined
        _cluster("C00002", ("a1", "h1"), ("a2", "h2")),  # shrunk: a3 left
        _cluster("C00003", ("c1", "h6"), ("c2", "h7")),  # unchanged
        _cluster("C00004", ("d1", "h8"), ("d2", "h99")),  # d2's text changed: grown
        _cluster("C00005", ("f1", "h13"), ("f2", "h14")),  # new
    ]  # C00005 of the previous audit is gone: resolved
    entries = compare_clusters(previous, current)
    assert _by_status(entries) == {
        "grown": [("C00001", "C00002"), ("C00004", "C00004")],
        "shrunk": [("C00002", "C00001")],
        "unchanged": [("C00003", "C00003")],
        "new": [("C00005", None)],
        "resolved": [(None, "C00005")],
    }
    by_id = {e["cluster_id"]: e for e in entries}
    assert by_id["C00001"]["added"] == ["b3"] and by_id["C00002"]["removed"] == ["a3"]
    assert by_id["C00004"]["changed"] == ["d2"] and by_id["C00004"]["added"] == []
    assert by_id[None]["removed"] == ["e1", "e2"] and by_id[None]["now_in"] == []


def test_a_split_pairs_the_larger_part_and_the_rest_is_new_from_it():
    previous = [_cluster("C00001", ("a", "1"), ("b", "2"), ("c", "3"), ("d", "4"), ("e", "5"))]
    current = [
        _cluster("C00001", ("a", "1"), ("b", "2"), ("c", "3")),
        _cluster("C00002", ("d", "4"), ("e", "5")),
    ]
    entries = compare_clusters(previous, current)
    assert [(e["status"], e["cluster_id"]) for e in entries] == [("shrunk", "C00001"), ("new", "C00002")]
    assert entries[1]["from_clusters"] == ["C00001"]


def test_a_merge_resolves_one_side_into_the_other_and_ties_go_to_the_earlier_cluster():
    previous = [_cluster("C00001", ("a", "1"), ("b", "2")), _cluster("C00002", ("c", "3"), ("d", "4"))]
    current = [_cluster("C00001", ("a", "1"), ("b", "2"), ("c", "3"), ("d", "4"))]
    entries = compare_clusters(previous, current)
    assert [(e["status"], e["previous_cluster_id"]) for e in entries] == [
        ("grown", "C00001"),
        ("resolved", "C00002"),
    ]
    assert entries[1]["now_in"] == ["C00001"]
    assert compare_clusters(previous, current) == entries  # deterministic


def _delta(path, root, **settings):
    result = dedup.audit([str(root)], dedup.AuditSettings(**settings))
    return track_audit(str(path), result, "none")[0], result


def test_scheduled_audits_end_to_end(tmp_path, write_corpus, corpus_files, base_texts):
    root = write_corpus(corpus_files)
    index = tmp_path / "audits.index"
    first, result = _delta(index, root)
    assert first["previous"] is None and first["documents"] is None
    assert first["counts"]["new"] == len(result.clusters) == 3
    assert fails(first, "new") and fails(first, "grown") and fails(first, "any") and not fails(first, "none")

    second, _ = _delta(index, root)
    assert second["previous"]["audit_id"] == result.audit_id and second["previous"]["clusters"] == 3
    assert second["counts"]["unchanged"] == 3 and second["documents"] == {
        "added": [],
        "changed": [],
        "removed": [],
    }
    assert not fails(second, "new") and not fails(second, "grown") and fails(second, "any")

    (root / "c/three.txt").write_text(edited(base_texts[2], "otter"), encoding="utf-8")  # c grows
    (root / "a/three.md").unlink()  # a shrinks
    (root / "b/copy.txt").unlink()  # b is resolved
    (root / "lone/4-copy.txt").write_text(base_texts[4], encoding="utf-8")  # a new cluster
    third, now = _delta(index, root)
    states = {e["keeper"]: e["status"] for e in third["clusters"]}
    c_keeper = next(
        c["keeper"] for c in now.clusters if any(m["document_id"] == "c/one.txt" for m in c["members"])
    )
    assert states[c_keeper] == "grown"
    assert sorted(e["status"] for e in third["clusters"]) == ["grown", "new", "resolved", "shrunk"]
    assert third["documents"] == {
        "added": ["c/three.txt", "lone/4-copy.txt"],
        "changed": [],
        "removed": ["a/three.md", "b/copy.txt"],
    }
    assert fails(third, "new") and fails(third, "grown")

    fourth, _ = _delta(index, root, threshold=0.9)
    assert fourth["settings_changed"] == ["threshold"]


def test_fail_on_names_are_checked():
    with pytest.raises(ValueError, match="fail_on"):
        fails({"clusters": []}, "sometimes")
