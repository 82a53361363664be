"""Migration exports: redirects, the merge worklist and the documents kept, checked against
the clusters and texts by plain Python."""

from __future__ import annotations

import csv
import json
import re
import unicodedata

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from dedup import AuditSettings
from dedup.cluster import align_members, build_clusters, settle_actions
from dedup.cluster.actions import ClusterInputs
from dedup.report.migration import (
    KEEP_COLUMNS,
    MERGE_COLUMNS,
    REDIRECT_COLUMNS,
    document_url,
    keep_records,
    merge_worklist_records,
    redirect_records,
    write_migration,
)
from dedup.verify import PairScores

BASE = "https://wiki.example.org/kb/"


def member(doc_id: str, role: str, action: str, keeper: str | None) -> dict:
    return {"document_id": doc_id, "role": role, "action": action, "in_favour_of": keeper}


CLUSTERS = [
    {
        "id": "C00001",
        "keeper": "current/a.md",
        "members": [
            member("archive/a.md", "duplicate", "merge-then-retire", "current/a.md"),
            member("current/a.md", "keeper", "keep", None),
            member("drafts/a v2.md", "exact-copy", "retire", "current/a.md"),
            member("drafts/a-far.md", "linked-through", "review", None),
        ],
    },
    {
        "id": "C00002",
        "keeper": "faq.jsonl#1",
        "members": [
            member("faq.jsonl#1", "keeper", "keep", None),
            member("old.zip!/faq.md", "duplicate", "retire", "faq.jsonl#1"),
        ],
    },
]
DOCUMENTS = [
    {"id": "archive/a.md", "source": "archive/a.md"},
    {"id": "current/a.md", "source": "current/a.md"},
    {"id": "drafts/a v2.md", "source": "drafts/a v2.md"},
    {"id": "drafts/a-far.md", "source": "drafts/a-far.md"},
    {"id": "drafts/empty.md", "source": "drafts/empty.md"},
    {"id": "faq.jsonl#1", "source": "faq.jsonl"},
    {"id": "lonely.md", "source": "lonely.md"},
    {"id": "old.zip!/faq.md", "source": "old.zip!/faq.md"},
]


def actions_of(clusters: list[dict], documents: list[dict]) -> list[dict]:
    """The actions of the audit's records, in id order (empty and unclustered as records.py has them)."""
    by_id = {m["document_id"]: (m, c["id"]) for c in clusters for m in c["members"]}
    rows = []
    for rec in documents:
        m, cluster = by_id.get(rec["id"], (None, None))
        if m is not None:
            rows.append({"document_id": rec["id"], "action": m["action"], "cluster_id": cluster})
        elif "empty" in rec["id"]:
            rows.append({"document_id": rec["id"], "action": "review", "cluster_id": None})
        else:
            rows.append({"document_id": rec["id"], "action": "keep", "cluster_id": None})
    return rows


def test_redirects_lead_every_retired_member_to_its_keeper():
    assert redirect_records(CLUSTERS, DOCUMENTS, BASE) == [
        {
            "from_id": "archive/a.md",
            "to_id": "current/a.md",
            "action": "merge-then-retire",
            "cluster_id": "C00001",
            "from_url": BASE + "archive/a.md",
            "to_url": BASE + "current/a.md",
        },
        {
            "from_id": "drafts/a v2.md",
            "to_id": "current/a.md",
            "action": "retire",
            "cluster_id": "C00001",
            "from_url": BASE + "drafts/a%20v2.md",
            "to_url": BASE + "current/a.md",
        },
        # A member of an archive and a record of a records file are no pages: no URL.
        {
            "from_id": "old.zip!/faq.md",
            "to_id": "faq.jsonl#1",
            "action": "retire",
            "cluster_id": "C00002",
            "from_url": None,
            "to_url": None,
        },
    ]
    assert all(r["from_url"] is None for r in redirect_records(CLUSTERS, DOCUMENTS, None))


def test_keep_lists_keepers_unclustered_and_review_documents():
    rows = keep_records(actions_of(CLUSTERS, DOCUMENTS), CLUSTERS, DOCUMENTS, BASE)
    assert [(r["document_id"], r["kept_as"], r["cluster_id"]) for r in rows] == [
        ("current/a.md", "keeper", "C00001"),
        ("drafts/a-far.md", "review", "C00001"),
        ("drafts/empty.md", "review", None),
        ("faq.jsonl#1", "keeper", "C00002"),
        ("lonely.md", "unclustered", None),
    ]
    assert rows[0]["url"] == BASE + "current/a.md" and rows[3]["url"] is None


@pytest.mark.parametrize(
    "doc_id, source, url",
    [
        ("a.md", "a.md", "https://x.org/a.md"),
        ("dir/ä #1.md", "dir/ä #1.md", "https://x.org/dir/%C3%A4%20%231.md"),
        ("f.csv#3", "f.csv", None),
        ("z.zip!/a.md", "z.zip!/a.md", None),
    ],
)
def test_a_url_is_the_base_and_the_encoded_path_of_a_file(doc_id, source, url):
    assert document_url(doc_id, source, "https://x.org") == url
    assert document_url(doc_id, source, "https://x.org/") == url


# Generated audits: every document is either redirected or kept, never both.
audits = st.lists(
    st.tuples(
        st.integers(1, 4), st.lists(st.sampled_from(["retire", "merge-then-retire", "review"]), max_size=4)
    ),
    max_size=5,
)


@given(audits, st.integers(0, 3))
def test_every_document_is_redirected_or_kept_exactly_once(shape, unclustered):
    clusters, documents = [], []
    for number, (_, others) in enumerate(shape, 1):
        keeper = f"c{number}/keeper.md"
        members = [member(keeper, "keeper", "keep", None)]
        members += [member(f"c{number}/m{i}.md", "duplicate", a, None) for i, a in enumerate(others)]
        clusters.append({"id": f"C{number:05d}", "keeper": keeper, "members": members})
        documents += [{"id": m["document_id"], "source": m["document_id"]} for m in members]
    documents += [{"id": f"single{i}.md", "source": f"single{i}.md"} for i in range(unclustered)]
    documents.sort(key=lambda d: d["id"])
    redirects = redirect_records(clusters, documents, BASE)
    kept = keep_records(actions_of(clusters, documents), clusters, documents, BASE)
    moved = [r["from_id"] for r in redirects]
    stay = [r["document_id"] for r in kept]
    assert sorted(moved + stay) == [d["id"] for d in documents]
    assert not set(moved) & {c["keeper"] for c in clusters}  # no redirect leads to a redirect
    assert {r["to_id"] for r in redirects} <= set(stay)
    expected = {
        (m["document_id"], c["keeper"])
        for c in clusters
        for m in c["members"]
        if m["action"] in ("retire", "merge-then-retire")
    }
    assert {(r["from_id"], r["to_id"]) for r in redirects} == expected


def test_the_worklist_carries_the_text_and_names_repeated_runs():
    texts = {"a.md": "Shared words. NOTE ONE here.", "b.md": "note  one HERE. more", "c.md": "NOTE ONE here."}
    runs = [
        {"document_id": "a.md", "keeper": "k.md", "cluster_id": "C1", "action": "merge-then-retire",
         "run": 1, "start": 14, "end": 28, "words": 3},
        {"document_id": "b.md", "keeper": "k.md", "cluster_id": "C1", "action": "review",
         "run": 1, "start": 0, "end": 15, "words": 3},
        {"document_id": "c.md", "keeper": "other.md", "cluster_id": "C2", "action": "merge-then-retire",
         "run": 1, "start": 0, "end": 14, "words": 3},
    ]  # fmt: skip
    rows = merge_worklist_records(runs, texts)
    assert [r["text"] for r in rows] == ["NOTE ONE here.", "note  one HERE.", "NOTE ONE here."]
    # The same text for the same keeper: carry it over once. For another keeper it is new.
    assert [(r["same_as_document"], r["same_as_run"]) for r in rows] == [
        (None, None),
        ("a.md", 1),
        (None, None),
    ]
    assert list(rows[0]) == MERGE_COLUMNS


def words_of(text: str) -> list[str]:
    """Normalized words, as plain Python: runs of letters and digits, NFKC, case folded."""
    return [unicodedata.normalize("NFKC", w).casefold() for w in re.findall(r"[^\W_]+", text)]


def contains(words: list[str], part: list[str]) -> bool:
    return any(words[i : i + len(part)] == part for i in range(len(words) - len(part) + 1))


PAGE = (
    "Meters are read every quarter by a field technician. If a reading cannot be taken, the bill is "
    "estimated from the same quarter last year, adjusted for the number of days in the period. "
    "Customers may send their own reading through the portal or by phone, and an estimated bill is "
    "corrected on the next actual reading without any action from the customer. "
)
NOTE = (
    "Depot note: the Pellick round is read on the second Tuesday because the access road floods in "
    "winter, so estimates there are more common and should be explained on the phone."
)


def test_worklist_runs_are_text_the_keeper_lacks_and_the_files_are_byte_identical(tmp_path):
    keeper_text = PAGE * 3
    texts = {
        "current/meter.md": keeper_text,
        "archive/meter.md": PAGE * 2 + NOTE + " " + PAGE,
        "drafts/meter.md": PAGE.replace("quarter", "season") * 3,
    }
    ids = sorted(texts)
    k = ids.index("current/meter.md")

    def score_against(m, kk):
        n = len(m)
        return PairScores(m, kk, np.zeros(n, np.int64), *np.full((4, n), 0.95))

    config = AuditSettings(prefer=("current/**",), base_url=BASE)
    inputs = ClusterInputs(
        ids, [len(texts[d]) for d in ids], [len(texts[d]) for d in ids], [None] * 3, np.arange(3)
    )
    others = [i for i in range(3) if i != k]
    edges = {(min(i, k), max(i, k)): 0.95 for i in others}
    clusters, roles = build_clusters(inputs, np.array(others), np.full(2, k), edges, score_against, config)
    settled = settle_actions(clusters, roles, align_members(clusters, texts, config), config, inputs.sizes)
    rows = merge_worklist_records(settled.unique_runs, texts)
    assert [(r["document_id"], r["text"]) for r in rows] == [("archive/meter.md", NOTE)]
    for row in rows:
        run_words = words_of(row["text"])
        assert len(run_words) == row["words"] >= config.unique_min_words
        assert not contains(words_of(texts[row["keeper"]]), run_words)  # the keeper lacks it
    documents = [{"id": d, "source": d} for d in ids]
    actions = actions_of(settled.clusters, documents)
    assert {a["document_id"]: a["action"] for a in actions} == {
        "archive/meter.md": "merge-then-retire",
        "current/meter.md": "keep",
        "drafts/meter.md": "retire",  # one word changed in every sentence: edits
    }

    def write(folder):
        folder.mkdir()
        paths = write_migration(
            str(folder),
            documents=documents,
            clusters=settled.clusters,
            actions=actions,
            unique_runs=settled.unique_runs,
            texts=texts,
            base_url=config.base_url,
        )
        return {name: open(path, "rb").read() for name, path in paths.items()}

    first, second = write(tmp_path / "one"), write(tmp_path / "two")
    assert first == second
    redirects = list(csv.DictReader(first["redirects.csv"].decode().splitlines()))
    assert list(redirects[0]) == REDIRECT_COLUMNS
    assert [(r["from_id"], r["to_url"]) for r in redirects] == [
        ("archive/meter.md", BASE + "current/meter.md"),
        ("drafts/meter.md", BASE + "current/meter.md"),
    ]
    assert json.loads(first["redirects.json"])["redirects"][0]["from_url"] == BASE + "archive/meter.md"
    worklist = list(csv.DictReader(first["merge-worklist.csv"].decode().splitlines(keepends=True)))
    assert [r["text"] for r in worklist] == [NOTE]
    keep = list(csv.DictReader(first["keep.csv"].decode().splitlines()))
    assert list(keep[0]) == KEEP_COLUMNS and first["keep.txt"] == b"current/meter.md\n"
