"""The bundled demo corpus: the audit finds every planted relationship and nothing else.

The ground truth is fixtures/demo/manifest.json, written with the corpus.
"""

from __future__ import annotations

import json
from itertools import combinations

import pytest

import dedup
from dedup import AuditSettings

# The settings the README's demo command uses.
DEMO_SETTINGS = AuditSettings(
    measure="containment",
    threshold=0.9,
    prefer=("current/**",),
    id_field="id",
    text_fields=("body",),
)


@pytest.fixture(scope="module")
def demo(demo_path):
    manifest = json.loads((demo_path.parent / "manifest.json").read_text())
    return manifest, dedup.audit([str(demo_path)], DEMO_SETTINGS)


def _cluster_of(result):
    return {m["document_id"]: c for c in result.clusters for m in c["members"]}


def _member(result, doc_id):
    return next(m for c in result.clusters for m in c["members"] if m["document_id"] == doc_id)


def test_every_input_is_accounted_for(demo, demo_path):
    _, result = demo
    files = sorted(p.relative_to(demo_path).as_posix() for p in demo_path.rglob("*") if p.is_file())
    assert sorted({e.input for e in result.ledger}) == files
    counts = result.summary["inputs"]
    assert counts["entries"] == counts["read"] + counts["empty"] + counts["skipped"]


def test_exact_groups(demo):
    manifest, result = demo
    assert sorted(sorted(g["members"]) for g in result.exact_groups) == sorted(
        sorted(g) for g in manifest["exact_groups"]
    )


def test_planted_near_pairs_share_a_cluster_and_unrelated_ones_do_not(demo):
    manifest, result = demo
    cluster = _cluster_of(result)
    together = [p[:2] for p in manifest["near_pairs"]] + [manifest["header_footer_pair"]]
    for family in manifest["near_families"]:
        together += [[family["original"], e] for e in family["edited_copies"]]
    together += [[manifest["merged"]["merged"], s] for s in manifest["merged"]["sources"]]
    together += list(combinations(manifest["chain"], 2))
    for a, b in together:
        assert a in cluster and b in cluster and cluster[a]["id"] == cluster[b]["id"], (a, b)
    for a, b in manifest["similar_topic_unrelated"]:
        assert not (a in cluster and b in cluster and cluster[a]["id"] == cluster[b]["id"]), (a, b)
    for doc in manifest["ordinary_unrelated"]:
        assert doc not in cluster, doc
    # The shared confidentiality notice alone does not make documents duplicates.
    files = manifest["boilerplate"]["files"]
    assert len({cluster[f]["id"] for f in files if f in cluster}) == len([f for f in files if f in cluster])


def test_merged_article_is_kept_and_its_sources_retired_in_its_favour(demo):
    manifest, result = demo
    merged = manifest["merged"]["merged"]
    for source in manifest["merged"]["sources"]:
        member = _member(result, source)
        assert member["action"] == "retire" and member["in_favour_of"] == merged
        assert member["similarity_to_keeper"]["jaccard"] < 0.6  # only containment finds it


def test_chain_end_is_linked_through_the_middle(demo):
    manifest, result = demo
    first, middle, last = manifest["chain"]
    assert _member(result, last)["role"] == "keeper"  # current/** wins
    assert _member(result, middle)["role"] == "duplicate"
    assert _member(result, first)["role"] == "linked-through"
    assert _member(result, first)["linked_through"] == middle


def test_empty_documents_and_records_are_reported(demo):
    manifest, result = demo
    status = {e.document_id or e.input: e.status for e in result.ledger}
    for doc in manifest["empty"] + manifest["empty_records"]:
        assert status[doc] == "empty", doc
    actions = {a["document_id"]: a for a in result.actions}
    for doc in manifest["empty"] + manifest["empty_records"]:
        assert actions[doc]["action"] == "review" and actions[doc]["reason"] == "document has no text"


def test_keepers_prefer_current(demo):
    _, result = demo
    for cluster in result.clusters:
        members = [m["document_id"] for m in cluster["members"]]
        if any(m.startswith("current/") for m in members):
            assert cluster["keeper"].startswith("current/"), cluster["id"]
