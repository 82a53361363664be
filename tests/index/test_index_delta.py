"""Scheduled audits: stable cluster ids across audits, the delta block and --fail-on."""

from __future__ import annotations

import pytest
from index_helpers import edited

import dedup
from dedup.index import compare_clusters, fails, track_audit
from dedup.index.lineage import Lineage, assign_stable_ids, mint


def _cluster(cid: str, *members: tuple[str, str]) -> dict:
    return {
        "id": cid,
        "keeper": members[0][0],
        "size": len(members),
        "kind": "near",
        "members": [[d, h, "duplicate"] for d, h in members],
        "review": None,
    }


def _members(records: list[dict]) -> list[list[tuple[str, str]]]:
    return [[(d, h) for d, h, _ in r["members"]] for r in records]


def _named(*audits: list[dict]) -> list[list[dict]]:
    """Give stable ids to successive audits as `record_audit` does: each with the ids of all before it."""
    pool: dict[str, Lineage] = {}
    for seq, records in enumerate(audits, 1):
        given = assign_stable_ids(
            _members(records), list(pool.values()), seq - 1 if seq > 1 else None, set(pool)
        )
        for record, ids in zip(records, given):
            record.update(ids)
            pool[ids["stable_id"]] = Lineage(
                ids["stable_id"], frozenset(d for d, _, _ in record["members"]), seq
            )
    return list(audits)


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
        _cluster("C00004", ("d1", "h8"), ("d2", "h99")),  # d2's text changed: changed, not grown
        _cluster("C00005", ("f1", "h13"), ("f2", "h14")),  # new
    ]  # C00005 of the previous audit is gone: resolved
    _named(previous, current)
    entries = compare_clusters(previous, current)
    assert _by_status(entries) == {
        "grown": [("C00001", "C00002")],
        "shrunk": [("C00002", "C00001")],
        "unchanged": [("C00003", "C00003")],
        "changed": [("C00004", "C00004")],
        "new": [("C00005", None)],
        "resolved": [(None, "C00005")],
    }
    by_id = {e["cluster_id"]: e for e in entries}
    assert by_id["C00001"]["added"] == ["b3"] and by_id["C00002"]["removed"] == ["a3"]
    assert by_id["C00004"]["changed"] == ["d2"] and by_id["C00004"]["added"] == []
    assert by_id[None]["removed"] == ["e1", "e2"] and by_id[None]["now_in"] == []
    # The delta names clusters by stable ids: the audit's C00002 became C00001, its stable id stayed.
    assert by_id["C00001"]["stable_id"] == previous[1]["stable_id"]
    assert by_id["C00002"]["stable_id"] == previous[0]["stable_id"]


def test_stable_ids_are_minted_from_the_smallest_content_hash_and_never_reused():
    first = [_cluster("C00001", ("a", "9f" * 16), ("b", "3c" * 16))]
    gone: list[dict] = []
    other = [_cluster("C00001", ("z", "3c" * 16), ("y", "ff" * 16))]  # another cluster, same smallest hash
    _named(first, gone, other)
    assert first[0]["stable_id"] == "S-3c3c3c3c" and first[0]["origin"] == "minted"
    assert other[0]["stable_id"] == "S-3c3c3c3c3" and other[0]["origin"] == "minted"
    every_prefix = {"S-" + ("3c" * 16)[:digits] for digits in range(8, 33)}
    assert mint(["3c" * 16], every_prefix) == "S-" + "3c" * 16 + "-2"


def test_a_cluster_keeps_its_id_while_it_changes_by_less_than_half_and_returns_with_it():
    audits = [
        [_cluster("C00001", ("a", "1"), ("b", "2"))],
        [_cluster("C00001", ("a", "1"), ("b", "2"), ("c", "3"))],  # grew by one: kept
        [
            _cluster("C00001", ("a", "1"), ("b", "2"), ("c", "3"), ("d", "4"), ("e", "5"), ("f", "6"))
        ],  # doubled
        [],  # gone
        [_cluster("C00001", ("a", "1"), ("b", "2"), ("c", "3"), ("d", "4"), ("e", "5"))],  # back: revived
    ]
    _named(*audits)
    ids = [a[0]["stable_id"] if a else None for a in audits]
    assert ids[0] == ids[1] != ids[2] and ids[4] == ids[2]
    assert [a[0]["origin"] for a in audits if a] == ["minted", "kept", "minted", "revived"]
    assert audits[2][0]["from"] == [ids[1]]


def test_a_split_keeps_the_id_on_the_larger_part_and_the_rest_is_new_from_it():
    previous = [_cluster("C00001", ("a", "1"), ("b", "2"), ("c", "3"), ("d", "4"), ("e", "5"))]
    current = [
        _cluster("C00001", ("a", "1"), ("b", "2"), ("c", "3")),
        _cluster("C00002", ("d", "4"), ("e", "5")),
    ]
    _named(previous, current)
    entries = compare_clusters(previous, current)
    assert [(e["status"], e["cluster_id"]) for e in entries] == [("shrunk", "C00001"), ("new", "C00002")]
    assert entries[0]["stable_id"] == previous[0]["stable_id"]
    assert (
        entries[1]["from_clusters"] == [previous[0]["stable_id"]]
        and current[1]["from"] == entries[1]["from_clusters"]
    )


def test_a_merge_says_which_ids_it_came_from():
    previous = [_cluster("C00001", ("a", "1"), ("b", "2")), _cluster("C00002", ("c", "3"), ("d", "4"))]
    current = [_cluster("C00001", ("a", "1"), ("b", "2"), ("c", "3"), ("d", "4"))]
    _named(previous, current)
    entries = compare_clusters(previous, current)
    old = sorted(r["stable_id"] for r in previous)
    assert [e["status"] for e in entries] == ["new", "resolved", "resolved"]
    assert entries[0]["from_clusters"] == old and {tuple(e["now_in"]) for e in entries[1:]} == {
        (current[0]["stable_id"],)
    }
    # Three and two merged: the three keep their id, the cluster grew, the two are resolved into it.
    previous = [
        _cluster("C00001", ("a", "1"), ("b", "2"), ("e", "5")),
        _cluster("C00002", ("c", "3"), ("d", "4")),
    ]
    current = [_cluster("C00001", ("a", "1"), ("b", "2"), ("c", "3"), ("d", "4"), ("e", "5"))]
    _named(previous, current)
    entries = compare_clusters(previous, current)
    assert [(e["status"], e["stable_id"]) for e in entries] == [
        ("grown", previous[0]["stable_id"]),
        ("resolved", previous[1]["stable_id"]),
    ]
    assert entries[0]["from_clusters"] == sorted(r["stable_id"] for r in previous)
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
