"""The sentences of the cluster stage's reason codes.

The expected sentences are written out in full: they are the wording of audit.json,
actions.csv and the report, which must not change when the reasons' data does not.
"""

from __future__ import annotations

import pytest

from dedup.cluster import REASON_CODES
from dedup.report.wording import describe_member, describe_roles, reason_sentence

SCORES = {"jaccard": 0.6049, "containment_in_keeper": 0.7, "keeper_containment": 0.8251, "cosine": 0.5}
WORDS = "Jaccard 0.60, containment 0.70 / 0.83, cosine 0.50 (deciding: containment)"

CASES = {
    "most-text": ({}, "keeper: it has the most text"),
    "newest": ({}, "keeper: it is the newest"),
    "oldest": ({}, "keeper: it is the oldest"),
    "shortest-path": ({}, "keeper: it has the shortest path"),
    "preferred-path": (
        {"glob": "current/**", "then": "oldest"},
        "keeper: matches preferred path 'current/**'; among those, it is the oldest",
    ),
    "exact-copy": ({"keeper": "k.md"}, "exact copy of k.md (same text after normalization)"),
    "covered": (
        {"keeper": "k.md", "measure": "containment", **SCORES, "retire_coverage": 0.5},
        f"near-duplicate of k.md: {WORDS}",
    ),
    "not-covered": (
        {"keeper": "k.md", "measure": "containment", **SCORES, "retire_coverage": 0.8},
        f"similar to k.md ({WORDS}), but only 70% of its text is in the keeper: "
        "merge what is missing before retiring it",
    ),
    "linked-through": (
        {
            "keeper": "k.md",
            "linked_through": "m.md",
            "link_score": 0.9349,
            "measure": "containment",
            **SCORES,
        },
        f"in this cluster because it resembles m.md (containment 0.93), not the keeper k.md ({WORDS}); "
        "decide separately",
    ),
}


def test_every_code_of_the_cluster_stage_has_a_case_here():
    assert sorted(CASES) == sorted(REASON_CODES)


@pytest.mark.parametrize("code", sorted(CASES))
def test_each_reason_code_renders_its_sentence(code):
    figures, sentence = CASES[code]
    assert reason_sentence(code, figures) == sentence


def test_a_link_without_a_score_names_only_the_document():
    figures = {**CASES["linked-through"][0], "link_score": None}
    assert reason_sentence("linked-through", figures) == (
        f"in this cluster because it resembles m.md, not the keeper k.md ({WORDS}); decide separately"
    )


def test_an_unknown_code_is_refused():
    with pytest.raises(ValueError, match="unknown reason code 'made-up'"):
        reason_sentence("made-up", {})


def test_the_sentence_takes_the_place_of_the_data_in_the_key_order():
    entry = {
        "document_id": "a.md",
        "action": "retire",
        "reason_code": "exact-copy",
        "reason_figures": {"keeper": "k.md"},
        "cluster_id": "C00001",
    }
    same = describe_member(entry)
    assert same is entry
    assert list(entry.items()) == [
        ("document_id", "a.md"),
        ("action", "retire"),
        ("reason", "exact copy of k.md (same text after normalization)"),
        ("cluster_id", "C00001"),
    ]
    # Worded once: a second pass changes nothing.
    assert describe_member(entry) == same


def test_describe_roles_words_every_role_in_place():
    keeper = {"document_id": "k.md", "reason_code": "most-text", "reason_figures": {}}
    copy = {"document_id": "a.md", "reason_code": "exact-copy", "reason_figures": {"keeper": "k.md"}}
    roles = {0: keeper, 3: copy}
    assert describe_roles(roles) is roles
    assert roles[0] is keeper and roles[3] is copy
    assert keeper == {"document_id": "k.md", "reason": "keeper: it has the most text"}
    assert copy == {"document_id": "a.md", "reason": "exact copy of k.md (same text after normalization)"}
