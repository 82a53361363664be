"""Roles, actions and reasons of clustered documents: data, with no words in them."""

from __future__ import annotations

import numpy as np
import pytest

from dedup import AuditSettings
from dedup.cluster import REASON_CODES, build_clusters, keeper_reason
from dedup.cluster.actions import ClusterInputs
from dedup.report.wording import describe_roles
from dedup.verify import PairScores

# Documents: 0 the keeper (preferred path), 1 its exact copy, 2 a duplicate mostly in
# the keeper, 3 a duplicate with text the keeper lacks, 4 alike only to 3.
IDS = ["current/k.md", "copy.md", "covered.md", "partial.md", "far.md"]
# member -> (Jaccard, containment in keeper, keeper's containment, cosine) to the keeper.
TO_KEEPER = {2: (0.9, 0.95, 0.9, 0.97), 3: (0.6, 0.7, 0.8, 0.5), 4: (0.2, 0.3, 0.25, 0.4)}
LEFT = np.array([0, 0, 0, 3])
RIGHT = np.array([1, 2, 3, 4])
EDGE_SCORE = {(0, 1): 1.0, (0, 2): 0.9, (0, 3): 0.6, (3, 4): 0.75}


def score_against(members: np.ndarray, keepers: np.ndarray) -> PairScores:
    assert (keepers == 0).all()
    rows = np.array([TO_KEEPER[m] for m in members.tolist()]).reshape(-1, 4)
    return PairScores(members, keepers, np.zeros(len(members), np.int64), *rows.T)


@pytest.fixture
def clustered():
    inputs = ClusterInputs(
        ids=IDS,
        lengths=[50, 50, 60, 70, 80],  # the keeper is not the longest: the preferred path wins
        sizes=[10, 10, 12, 14, 16],
        dates=[None] * 5,
        representative=np.array([0, 0, 2, 3, 4]),
    )
    settings = AuditSettings(measure="jaccard", threshold=0.5, retire_coverage=0.8, prefer=("current/**",))
    return build_clusters(inputs, LEFT, RIGHT, EDGE_SCORE, score_against, settings)


def test_roles_and_actions_follow_the_scores_to_the_keeper(clustered):
    clusters, roles = clustered
    assert [c["keeper"] for c in clusters] == ["current/k.md"]
    got = {IDS[m]: (r["role"], r["action"], r["in_favour_of"], r["linked_through"]) for m, r in roles.items()}
    assert got == {
        "current/k.md": ("keeper", "keep", None, None),
        "copy.md": ("exact-copy", "retire", "current/k.md", None),
        "covered.md": ("duplicate", "retire", "current/k.md", None),
        "partial.md": ("duplicate", "review", None, None),
        "far.md": ("linked-through", "review", None, "partial.md"),
    }
    assert clusters[0]["retire_documents"] == 2 and clusters[0]["retire_bytes"] == 22


def test_reasons_are_codes_with_figures(clustered):
    _, roles = clustered
    codes = {IDS[m]: (r["reason_code"], r["reason_figures"]) for m, r in roles.items()}
    scores = {"measure": "jaccard", "jaccard": 0.6, "containment_in_keeper": 0.7}
    # The only member under current/: the preferred path alone decided.
    assert codes["current/k.md"] == (
        "preferred-path",
        {"glob": "current/**", "then": "most-text", "matching": 1},
    )
    assert codes["copy.md"] == ("exact-copy", {"keeper": "current/k.md"})
    assert codes["covered.md"][0] == "covered"
    assert codes["partial.md"][0] == "not-covered"
    assert (
        codes["partial.md"][1].items() >= {**scores, "retire_coverage": 0.8, "keeper": "current/k.md"}.items()
    )
    assert codes["far.md"][0] == "linked-through"
    assert codes["far.md"][1].items() >= {"linked_through": "partial.md", "link_score": 0.75}.items()
    assert {code for code, _ in codes.values()} <= set(REASON_CODES)
    # Data only: no sentence anywhere in a role.
    assert all("reason" not in r for r in roles.values())


def test_the_member_records_keep_their_key_order_once_worded(clustered):
    clusters, roles = clustered
    describe_roles(roles)
    member = clusters[0]["members"][0]  # the same record as roles[0]
    assert member is roles[0]
    assert list(member) == [
        "document_id",
        "role",
        "similarity_to_keeper",
        "deciding_score",
        "linked_through",
        "action",
        "in_favour_of",
        "reason",
        "cluster_id",
    ]
    assert member["reason"] == "keeper: the only member matching preferred path 'current/**'"
    assert roles[4]["reason"].startswith("in this cluster because it resembles partial.md (jaccard 0.75)")


def test_keeper_reason_names_the_policy_or_the_preferred_path():
    assert keeper_reason("a/x.md", "longest", ()) == ("most-text", {})
    assert keeper_reason("a/x.md", "shortest-path", ("b/**",)) == ("shortest-path", {})
    assert keeper_reason("a/x.md", "oldest", ("b/**", "a/*", "a/**")) == (
        "preferred-path",
        {"glob": "a/*", "then": "oldest"},
    )
