"""Review decisions kept in the index, and how they apply to a new audit.

`import_decisions` stores the decisions file the HTML report exports (schema in
`dedup.index.decisions_file`, published as ``dedup/schemas/decisions.schema.json``).
`apply_decisions` marks a fresh audit with them.

Rule: a decision is about *documents with their texts*. It names documents with the
content hashes they had when it was made. In a current cluster, each document a decision
names is matched to the member of the same id if that member still has the same text;
a named document no longer in the cluster is matched to a member with its text that the
decision does not name (the same text renamed or moved), each such member once. A
decision *holds* for every pair of the members it matched, whatever else is in the
cluster, so a third document that joins, even an exact copy, is matched by nothing: it
is raised as new, beside the earlier review. When the text of a member a decision names
changed, the decision has *lapsed* for the pairs with that member, and only for those:
the other members it matched still hold. Of several decisions the latest
(``decided_at``) wins.

What a member's (and a pair's) ``review`` says, from its latest holding decision, else
the lapsed ones:

    reviewed        "not-duplicate" or "keep-both": kept, not raised again
    confirmed       "confirmed-duplicate": still raised (its action is still to be taken)
    commented       no decision, only a comment
    lapsed          its text, or its partner's, changed since the decision: raised again
    unreviewed      (members) no decision holds or lapsed for it: new since the review

A cluster is ``reviewed`` when every member is: then it is not raised again, its
members' proposed actions become ``keep`` and it proposes nothing to retire, but it stays
in the results with its review. Otherwise it is ``lapsed`` (a member's text changed),
``partly-reviewed`` (some members reviewed, or some not covered by any decision: a
member joined since), ``confirmed`` or ``commented``; its reviewed members are still
kept, and the others keep the actions the audit proposed. The cluster's review shows
the latest decision that holds (else the latest that lapsed), with ``unreviewed`` (the
members no decision covers) and ``changed`` (members whose text changed since).
"""

from __future__ import annotations

import json
import re
import sqlite3
from collections import Counter
from dataclasses import dataclass
from typing import TYPE_CHECKING

from .decisions_file import nesting_problem, place, utc_time, validate_decisions
from .store import Index, utc_now

if TYPE_CHECKING:
    from ..result import AuditResult

__all__ = ["DecisionsFileError", "load_decisions_file", "import_decisions", "apply_decisions", "SETTLING"]

# Decisions that settle a pair: it is not raised again while both texts are unchanged.
SETTLING = ("not-duplicate", "keep-both")


class DecisionsFileError(ValueError):
    """A decisions file that cannot be read or does not follow the schema."""


def load_decisions_file(path: str) -> dict:
    """Read and validate a decisions file.

    Raises
    ------
    DecisionsFileError
        In one line naming the file, where (``decision 3``, or a line and column) and
        the first problems: it cannot be read, is not UTF-8, nests too deep, is not JSON,
        or does not follow the schema (`dedup.index.decisions_file.validate_decisions`).

    Notes
    -----
    Cost O(file size): one scan for the nesting depth, the parse, the validation.
    """
    try:
        with open(path, encoding="utf-8-sig") as handle:  # a byte order mark is left out (RFC 8259 8.1)
            text = handle.read()
    except OSError as err:
        raise DecisionsFileError(f"cannot read {path}: {err.strerror}") from err
    except UnicodeDecodeError as err:
        raise DecisionsFileError(f"{path} is not a JSON file: byte {err.start + 1} is not UTF-8") from err
    deep = nesting_problem(text)
    if deep:
        raise DecisionsFileError(f"{path} is not a decisions file: {deep}")
    try:
        data = json.loads(text)
    except json.JSONDecodeError as err:
        raise DecisionsFileError(f"{path} is not a JSON file: {err}") from err
    except ValueError as err:  # a whole number of more digits than Python converts (4,300)
        long = re.search("[0-9]{1000,}", text)
        where = f" at {place(text, long.start())}" if long else ""
        raise DecisionsFileError(
            f"{path} is not a decisions file: a number{where} is too long to read"
        ) from err
    problems = validate_decisions(data)
    if problems:
        more = f" (and {len(problems) - 3} more)" if len(problems) > 3 else ""
        raise DecisionsFileError(f"{path} is not a decisions file: {'; '.join(problems[:3])}{more}")
    return data


def import_decisions(index: Index, data: dict) -> dict:
    """Store the decisions of an exported decisions file.

    Parameters
    ----------
    index : Index
    data : dict
        The parsed file (see `dedup.index.decisions_file`); it is validated again here.

    Returns
    -------
    dict
        ``decisions`` (in the file), ``new`` (stored now) and ``known`` (already stored:
        importing the same file twice changes nothing).

    Raises
    ------
    DecisionsFileError
        The data does not follow the schema.
    """
    problems = validate_decisions(data)
    if problems:
        raise DecisionsFileError(f"not a decisions file: {'; '.join(problems[:3])}")
    imported_at = utc_now()
    rows = []
    for d in data["decisions"]:
        documents = sorted([doc["id"], doc["content_hash"]] for doc in d["documents"])
        subject = json.dumps([d["kind"], documents], ensure_ascii=False)
        rows.append(
            (
                subject,
                d["kind"],
                d["cluster_id"],
                data["audit_id"],
                d.get("decision"),
                d["comment"],
                utc_time(d["decided_at"]),
                imported_at,
                json.dumps(documents, ensure_ascii=False),
            )
        )
    with index.writing() as db:
        before = db.total_changes
        db.executemany(
            "INSERT OR IGNORE INTO decisions (subject, kind, cluster_id, audit_id, decision, comment, decided_at, "
            "imported_at, documents) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?)",
            rows,
        )
        new = db.total_changes - before
    return {"decisions": len(rows), "new": new, "known": len(rows) - new}


@dataclass(frozen=True)
class _Decision:
    """A stored decision; ``order`` sorts by time, then by import."""

    order: tuple[str, int]
    kind: str
    cluster_id: str
    audit_id: str
    decision: str | None
    comment: str
    decided_at: str
    documents: tuple[tuple[str, str], ...]


@dataclass
class _Match:
    """A decision within one current cluster: the members it matched, the members it names
    whose text changed since, and the members it names (by id) that are in the cluster."""

    decision: _Decision
    matched: set[str]
    changed: set[str]
    named: set[str]

    @property
    def holds(self) -> bool:
        return len(self.matched) >= 2


def _load(db: sqlite3.Connection) -> list[_Decision]:
    rows = db.execute(
        "SELECT decision_id, kind, cluster_id, audit_id, decision, comment, decided_at, documents FROM decisions"
    ).fetchall()
    return [
        _Decision(
            (decided_at, decision_id),
            kind,
            cluster_id,
            audit_id,
            decision,
            comment,
            decided_at,
            tuple((d, h) for d, h in json.loads(documents)),
        )
        for decision_id, kind, cluster_id, audit_id, decision, comment, decided_at, documents in rows
    ]


def _status(decision: str | None) -> str:
    if decision in SETTLING:
        return "reviewed"
    return "confirmed" if decision == "confirmed-duplicate" else "commented"


def _review(d: _Decision, status: str, changed: list[str] | None = None) -> dict:
    review = {
        "status": status,
        "decision": d.decision,
        "comment": d.comment,
        "decided_at": d.decided_at,
        "decided_on": d.kind,
        "decided_cluster_id": d.cluster_id,
        "decided_audit_id": d.audit_id,
    }
    if changed is not None:
        review["changed"] = changed
    return review


class _Lookup:
    """The stored decisions by the content hashes and by the document ids they name."""

    def __init__(self, decisions: list[_Decision]) -> None:
        self.decisions = decisions
        self.by_key: dict[str, set[int]] = {}
        for n, d in enumerate(decisions):
            for doc_id, digest in d.documents:
                self.by_key.setdefault("h" + digest, set()).add(n)
                self.by_key.setdefault("d" + doc_id, set()).add(n)

    def matches(self, members: dict[str, str]) -> list[_Match]:
        """The decisions that name a member's id or text, matched in a cluster with
        ``members`` (id -> content hash), oldest first. O(their documents)."""
        found: set[int] = set()
        for doc_id, digest in members.items():
            found |= self.by_key.get("d" + doc_id, set()) | self.by_key.get("h" + digest, set())
        by_text: dict[str, list[str]] = {}
        for doc_id in sorted(members):
            by_text.setdefault(members[doc_id], []).append(doc_id)
        chosen = sorted((self.decisions[n] for n in found), key=lambda d: d.order)
        return [_match(d, members, by_text) for d in chosen]


def _match(d: _Decision, members: dict[str, str], by_text: dict[str, list[str]]) -> _Match:
    """Match a decision's documents to a cluster's members (see the module notes)."""
    named_ids = {doc_id for doc_id, _ in d.documents}
    matched, changed, named, loose = set(), set(), set(), []
    for doc_id, digest in d.documents:
        now = members.get(doc_id)
        if now is None:
            loose.append(digest)
            continue
        named.add(doc_id)
        (matched if now == digest else changed).add(doc_id)
    for digest in loose:  # the same text under another name: a member the decision does not name
        for doc_id in by_text.get(digest, ()):
            if doc_id not in named_ids and doc_id not in matched:
                matched.add(doc_id)
                break
    return _Match(d, matched, changed, named)


def _member_reviews(members: dict[str, str], matches: list[_Match]) -> dict[str, dict]:
    """Each member's review: from its latest holding decision, else lapsed, else unreviewed."""
    out = {}
    for doc_id in members:
        holding = [m.decision for m in matches if m.holds and doc_id in m.matched]
        if holding:
            best = holding[-1]  # matches are oldest first
            out[doc_id] = _review(best, _status(best.decision))
            continue
        lapsed = [m for m in matches if m.changed and doc_id in m.named]
        if lapsed:
            changed = sorted(set().union(*(m.changed for m in lapsed)))
            out[doc_id] = _review(lapsed[-1].decision, "lapsed", changed)
        else:
            out[doc_id] = {"status": "unreviewed"}
    return out


def _pair_review(left: str, right: str, matches: list[_Match]) -> dict | None:
    """A confirmed pair's review: its latest holding decision, else the latest lapsed one."""
    holding = [m.decision for m in matches if m.holds and left in m.matched and right in m.matched]
    if holding:
        return _review(holding[-1], _status(holding[-1].decision))
    lapsed = [m for m in matches if {left, right} <= m.named and m.changed & {left, right}]
    if lapsed:
        return _review(lapsed[-1].decision, "lapsed", sorted(lapsed[-1].changed & {left, right}))
    return None


def _cluster_review(reviews: dict[str, dict], matches: list[_Match], pairs: list[dict]) -> dict | None:
    """A cluster's review from its members' (see the module notes); None when no decision
    holds or lapsed for any member."""
    statuses = Counter(r["status"] for r in reviews.values())
    if statuses["unreviewed"] == len(reviews):
        return None
    if statuses["reviewed"] == len(reviews):
        status = "reviewed"
    elif statuses["lapsed"]:
        status = "lapsed"
    elif statuses["reviewed"] or statuses["unreviewed"]:
        status = "partly-reviewed"
    else:
        status = "confirmed" if statuses["confirmed"] else "commented"
    holding = [m.decision for m in matches if m.holds]
    shown = holding[-1] if holding else [m for m in matches if m.changed][-1].decision
    review = _review(shown, status)
    review.update(
        members=len(reviews),
        members_reviewed=statuses["reviewed"],
        unreviewed=sorted(d for d, r in reviews.items() if r["status"] == "unreviewed"),
        changed=sorted({d for r in reviews.values() for d in r.get("changed", []) if d in reviews}),
        pairs=len(pairs),
        pairs_reviewed=sum(1 for p in pairs if (p.get("review") or {}).get("status") == "reviewed"),
    )
    return review


def apply_decisions(db: sqlite3.Connection, result: AuditResult) -> dict:
    """Mark a fresh audit's clusters, members and pairs with the stored decisions (in place).

    Adds ``review`` (a dict as described above, or None) to every cluster and pair, and
    to every member of a cluster that has one. Reviewed members are kept: their actions
    (in the cluster and in ``result.actions``) become ``keep`` with the review as the
    reason; the cluster's and the summary's retire, merge and review counts are made to
    match. Adds ``reviewed_clusters`` to the summary.

    Parameters
    ----------
    db : sqlite3.Connection
        An open transaction of the index.
    result : dedup.AuditResult

    Returns
    -------
    dict
        Counts: ``decisions`` stored, and clusters, members and pairs per review status.

    Notes
    -----
    Cost O(members + documents named by the decisions that name a member).
    """
    lookup = _Lookup(_load(db))
    hash_of = {doc["id"]: doc["content_hash"] for doc in result.documents}
    bytes_of = {doc["id"]: doc.get("bytes", 0) for doc in result.documents}
    actions = {a["document_id"]: a for a in result.actions}
    tally: Counter[str] = Counter()
    pairs_of = _pairs_by_cluster(result)
    for pair in result.pairs:
        pair["review"] = None
    for cluster in result.clusters:
        members = {m["document_id"]: hash_of.get(m["document_id"], "") for m in cluster["members"]}
        matches = lookup.matches(members) if lookup.decisions else []
        reviews = _member_reviews(members, matches)
        for pair in pairs_of.get(cluster["id"], []):
            pair["review"] = _pair_review(pair["left"], pair["right"], matches)
            tally.update([f"pairs_{pair['review']['status']}"] if pair["review"] else [])
        cluster["review"] = _cluster_review(reviews, matches, pairs_of.get(cluster["id"], []))
        if cluster["review"] is None:
            continue
        tally[f"clusters_{cluster['review']['status']}"] += 1
        tally.update(f"members_{r['status']}" for r in reviews.values())
        _keep_reviewed(cluster, reviews, actions, bytes_of)
    _recount(result, tally["clusters_reviewed"])
    statuses = ("reviewed", "confirmed", "commented", "lapsed", "partly-reviewed", "unreviewed")
    return {
        "decisions": len(lookup.decisions),
        "clusters": {s: tally[f"clusters_{s}"] for s in statuses if s != "unreviewed"},
        "members": {s: tally[f"members_{s}"] for s in statuses if s != "partly-reviewed"},
        "pairs": {s: tally[f"pairs_{s}"] for s in statuses if s not in ("partly-reviewed", "unreviewed")},
    }


def _pairs_by_cluster(result: AuditResult) -> dict[str, list[dict]]:
    """Cluster id -> the confirmed pairs inside it (every confirmed pair lies inside one cluster)."""
    cluster_of = {m["document_id"]: c["id"] for c in result.clusters for m in c["members"]}
    pair_of: dict[str, list[dict]] = {}
    for pair in result.pairs:
        cluster_id = cluster_of.get(pair["left"])
        if cluster_id is not None and cluster_of.get(pair["right"]) == cluster_id:
            pair_of.setdefault(cluster_id, []).append(pair)
    return pair_of


def _keep_reviewed(cluster: dict, reviews: dict[str, dict], actions: dict[str, dict], bytes_of: dict) -> None:
    """Reviewed members are kept (their decision holds); the cluster's counts follow."""
    for member in cluster["members"]:
        r = reviews[member["document_id"]]
        member["review"] = r
        if r["status"] != "reviewed":
            continue
        comment = f" ({r['comment']})" if r["comment"] else ""
        reason = (
            f"reviewed on {r['decided_at'][:10]}: {r['decision']}{comment}; "
            "not raised again while the texts are unchanged"
        )
        member.update(action="keep", in_favour_of=None, reason=reason)
        if member["document_id"] in actions:
            actions[member["document_id"]].update(action="keep", in_favour_of=None, reason=reason)
    for action, prefix in (("retire", "retire"), ("merge-then-retire", "merge")):
        if f"{prefix}_documents" in cluster:
            chosen = [m["document_id"] for m in cluster["members"] if m["action"] == action]
            cluster[f"{prefix}_documents"] = len(chosen)
            cluster[f"{prefix}_bytes"] = int(sum(bytes_of.get(d, 0) for d in chosen))


def _recount(result: AuditResult, reviewed_clusters: int) -> None:
    """The summary's counts of proposed actions after reviewed members were kept."""
    summary = result.summary
    summary["reviewed_clusters"] = reviewed_clusters
    for key, action in (
        ("retire_documents", "retire"),
        ("merge_documents", "merge-then-retire"),
        ("review_documents", "review"),
    ):
        if key in summary:
            summary[key] = sum(1 for a in result.actions if a["action"] == action)
    for key in ("retire_bytes", "merge_bytes"):
        if key in summary:
            summary[key] = sum(c.get(key, 0) for c in result.clusters)
