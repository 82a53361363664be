"""A scheduled audit a pipeline can trust, end to end through the command line and its exit codes:
a baseline, no change, an edit to a keeper, a new copy into a reviewed cluster, a split, a lapsed decision."""

from __future__ import annotations

import json

from index_helpers import edited

from dedup.cli import main


def _files(t: list[str]) -> dict[str, str]:
    """Cluster A (two near-copies), B (three), C (five) and four lone documents."""
    return {
        "a/one.txt": t[0],
        "a/two.txt": edited(t[0], "zebra"),
        "b/one.txt": t[1],
        "b/two.txt": edited(t[1], "walrus"),
        "b/three.txt": edited(t[1], "otter", 0.3),
        **{f"c/{k}.txt": edited(t[2], f"heron{k}", 0.1 * k) for k in range(1, 6)},
        **{f"lone/{k}.txt": t[k] for k in range(4, 8)},
    }


class Scheduled:
    """``dedup audit ROOT --out OUT --index INDEX --json ...`` run after run, its JSON and audit.json kept."""

    def __init__(self, root, tmp_path, capsys) -> None:
        self.root, self.tmp, self.capsys = root, tmp_path, capsys
        self.index = str(tmp_path / "kb.index")
        self.runs = 0

    def audit(self, *extra: str) -> tuple[int, dict, dict]:
        self.runs += 1
        out = self.tmp / f"out{self.runs}"
        code = main(
            ["audit", str(self.root), "--out", str(out), "--index", self.index, "--json", "--quiet", *extra]
        )
        printed = json.loads(self.capsys.readouterr().out)
        assert printed["exit_code"] == code
        return code, printed["delta"], json.loads((out / "audit.json").read_text(encoding="utf-8"))

    def run(self, *argv: str) -> int:
        code = main(list(argv))
        self.capsys.readouterr()
        return code


def _cluster(audit: dict, member: str) -> dict:
    return next(c for c in audit["clusters"] if any(m["document_id"] == member for m in c["members"]))


def _entry_of(delta: dict, audit: dict, member: str) -> dict:
    cluster = _cluster(audit, member)
    return next(e for e in delta["clusters"] if e["cluster_id"] == cluster["id"])


def _decisions(audit: dict, member: str, decision: str) -> dict:
    """A decisions file as the report exports it: ``decision`` on the cluster holding ``member``."""
    cluster = _cluster(audit, member)
    hashes = {d["id"]: d["content_hash"] for d in audit["documents"]}
    return {
        "schema": "dedup-review-decisions",
        "schema_version": 1,
        "audit_id": audit["audit_id"],
        "exported_at": "2024-05-02T10:00:00Z",
        "decisions": [
            {
                "kind": "cluster",
                "cluster_id": cluster["id"],
                "documents": [
                    {"id": m["document_id"], "content_hash": hashes[m["document_id"]]}
                    for m in cluster["members"]
                ],
                "decision": decision,
                "comment": "one is for contractors",
                "decided_at": "2024-05-02T09:00:00Z",
            }
        ],
    }


def test_a_scheduled_audit_end_to_end(tmp_path, write_corpus, base_texts, capsys):
    root = write_corpus(_files(base_texts))
    s = Scheduled(root, tmp_path, capsys)

    # 1. The first audit, accepted as the baseline: today's clusters are the accepted state.
    code, delta, first = s.audit("--fail-on", "new", "--accept")
    assert code == 0 and delta["accepted"] and delta["counts"]["new"] == 3
    assert delta["index"]["refreshed"] and delta["index"]["differ"] == 0
    ids = {c["id"]: c["stable_id"] for c in first["clusters"]}

    # 2. Nothing changed: exit 0 whatever the level, every stable id the same.
    code, delta, second = s.audit("--fail-on", "changed")
    assert code == 0 and delta["basis"] == "baseline" and delta["counts"]["unchanged"] == 3
    assert {c["id"]: c["stable_id"] for c in second["clusters"]} == ids

    # 3. A line appended to B's keeper: "changed", not "grown".
    keeper = _cluster(second, "b/one.txt")["keeper"]
    with open(root / keeper, "a", encoding="utf-8") as handle:
        handle.write("\nOne more line, added after the audit.\n")
    code, delta, third = s.audit("--fail-on", "grown")
    b = _entry_of(delta, third, "b/one.txt")
    assert code == 0 and (b["status"], b["changed"], b["added"]) == ("changed", [keeper], [])
    assert b["stable_id"] == _cluster(second, "b/one.txt")["stable_id"]
    assert s.audit("--fail-on", "changed")[0] == 1  # still changed since the baseline: the check stays failed
    # Accepting today's state clears it.
    assert s.run("index", "baseline", "--index", s.index) == 0
    code, delta, fourth = s.audit("--fail-on", "changed")
    assert code == 0 and delta["counts"]["changed"] == 0

    # 4. A is reviewed "keep both"; an identical copy of one of its texts joins it.
    decisions = tmp_path / "decisions.json"
    decisions.write_text(json.dumps(_decisions(fourth, "a/one.txt", "keep-both")), encoding="utf-8")
    assert s.run("decisions", "import", str(decisions), "--index", s.index) == 0
    assert s.audit("--fail-on", "changed")[0] == 0  # the review settles A
    (root / "a/x-copy.txt").write_text(base_texts[0], encoding="utf-8")
    code, delta, fifth = s.audit("--fail-on", "grown")
    a = _entry_of(delta, fifth, "a/one.txt")
    assert code == 1 and a["status"] == "grown" and a["added"] == ["a/x-copy.txt"]
    assert a["review"]["status"] == "partly-reviewed" and a["review"]["unreviewed"] == ["a/x-copy.txt"]
    assert (a["review"]["decision"], a["review"]["comment"]) == ("keep-both", "one is for contractors")
    members = {m["document_id"]: m for m in _cluster(fifth, "a/one.txt")["members"]}
    assert members["a/one.txt"]["action"] == members["a/two.txt"]["action"] == "keep"  # the review holds
    assert members["a/x-copy.txt"]["review"]["status"] == "unreviewed"
    assert members["a/x-copy.txt"]["action"] in ("retire", "merge-then-retire")  # raised as new

    # 5. C splits: two of its five members become copies of another text.
    for k in (4, 5):
        (root / f"c/{k}.txt").write_text(edited(base_texts[3], f"crane{k}", 0.1 * k), encoding="utf-8")
    code, delta, sixth = s.audit("--fail-on", "new")
    c_old = _entry_of(delta, sixth, "c/1.txt")
    c_new = _entry_of(delta, sixth, "c/4.txt")
    assert code == 1 and (c_old["status"], c_old["removed"]) == ("shrunk", ["c/4.txt", "c/5.txt"])
    assert c_old["stable_id"] == ids[_cluster(first, "c/1.txt")["id"]]
    assert c_new["status"] == "new" and c_new["from_clusters"] == [c_old["stable_id"]]

    # 6. A text A's decision names changes: the decision lapses for it, and A is raised again.
    (root / "a/two.txt").write_text(
        edited(base_texts[0], "zebra") + "\nA new closing line.\n", encoding="utf-8"
    )
    code, delta, seventh = s.audit("--fail-on", "grown")
    a = _entry_of(delta, seventh, "a/one.txt")
    assert code == 1 and a["review"]["status"] == "lapsed" and a["review"]["changed"] == ["a/two.txt"]
    assert "a/two.txt" in a["changed"]
    members = {m["document_id"]: m for m in _cluster(seventh, "a/one.txt")["members"]}
    assert members["a/two.txt"]["review"]["status"] == "lapsed"
    assert all(m["action"] != "keep" or m["role"] == "keeper" for m in members.values())

    # Usage errors: one line, exit 2.
    assert s.run("audit", str(root), "--out", str(tmp_path / "x"), "--accept", "--quiet") == 2
