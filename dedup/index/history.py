"""Recorded audits, the accepted baseline, and what changed since (the ``delta``).

Every audit run with an index is recorded: its id, time, settings, summary and clusters,
each cluster as its members' document ids with their content hashes, and its stable id
(`dedup.index.lineage`). The delta names clusters by their stable ids.

Basis
-----
An audit is compared with the *baseline* when one was accepted (`accept_latest`:
``dedup index baseline``, or ``dedup audit --index --accept``), else with the latest
recorded audit. Against a baseline a cluster that is new stays new in every later audit
until it is reviewed or a newer state is accepted, so a scheduled check that failed
keeps failing until someone acts, and running it again does not turn it green.

States
------
A current cluster is paired with the compared audit's cluster of the same stable id.
A member is a document id; its text is its content hash.

    new        no cluster of that id then; ``from_clusters`` names the stable ids of the
               clusters its members were in (the id it split from, the ids it merged)
    grown      a member joined (a document id it lacked)
    changed    no member joined, and a member's text changed
    shrunk     no member joined or changed, and a member left
    unchanged  the same members with the same texts
    resolved   a cluster of then whose id no current cluster has; ``now_in`` names the
               stable ids of the clusters its members are in now

``--fail-on`` levels (`fails`), each taking in the one before: ``new``; ``grown`` (new
or grown); ``changed`` (new, grown or changed); and ``any`` (every current cluster).
Clusters whose every member a review settled never count, nor does an audit accepted
as the new baseline for the delta's levels.

Cost O(members) with dictionaries.
"""

from __future__ import annotations

import json
import sqlite3
from typing import TYPE_CHECKING

from .lineage import assign_stable_ids, load_lineage, store_lineage
from .store import Index, utc_now

if TYPE_CHECKING:
    from ..result import AuditResult

__all__ = [
    "STATES",
    "FAIL_ON",
    "MATCHING_RULE",
    "compare_clusters",
    "record_audit",
    "previous_audit",
    "accept_latest",
    "baseline_of",
    "fails",
]

STATES = ("new", "grown", "changed", "shrunk", "resolved", "unchanged")
MATCHING_RULE = (
    "clusters are named by stable ids: a cluster keeps the id of the latest audit's cluster with which it shares "
    "more than half of the members of the two together, else takes back an earlier id by the same rule, else gets "
    "a new id from its smallest content hash. Clusters of the same id are compared by their members (document "
    "ids): one that a member joined is grown, else one with a member whose text changed is changed, else one a "
    "member left is shrunk, else unchanged; a current id the compared audit lacks is new, an id of then that no "
    "current cluster has is resolved."
)
FAIL_ON = ("none", "any", "new", "grown", "changed")
_FAILING = {
    "none": (),
    "any": ("new", "grown", "changed", "shrunk", "unchanged"),
    "new": ("new",),
    "grown": ("new", "grown"),
    "changed": ("new", "grown", "changed"),
}
_LATEST = (
    "SELECT seq, audit_id, recorded_at, settings, clusters, documents FROM audits ORDER BY seq DESC LIMIT 1"
)
_BY_SEQ = "SELECT seq, audit_id, recorded_at, settings, clusters, documents FROM audits WHERE seq = ?"


def _cluster_record(cluster: dict, hash_of: dict[str, str]) -> dict:
    review = cluster.get("review") or {}
    return {
        "id": cluster["id"],
        "keeper": cluster["keeper"],
        "size": cluster["size"],
        "kind": cluster.get("kind"),
        "members": [
            [m["document_id"], hash_of.get(m["document_id"], ""), m.get("role")] for m in cluster["members"]
        ],
        "review": review.get("status"),
    }


def _review_status(review: dict | str | None) -> str | None:
    return review.get("status") if isinstance(review, dict) else review


def _where(clusters: list[dict]) -> dict[str, str]:
    """Document id -> the stable id of the cluster it is a member of."""
    return {doc_id: cluster["stable_id"] for cluster in clusters for doc_id, _, _ in cluster["members"]}


def _state(cluster: dict, before: dict) -> dict:
    """Status and member changes of a cluster paired with ``before`` (same stable id)."""
    now = {d: h for d, h, _ in cluster["members"]}
    then = {d: h for d, h, _ in before["members"]}
    added = sorted(d for d in now if d not in then)
    removed = sorted(d for d in then if d not in now)
    changed = sorted(d for d in now if d in then and now[d] != then[d])
    status = "grown" if added else "changed" if changed else "shrunk" if removed else "unchanged"
    return {"status": status, "added": added, "removed": removed, "changed": changed}


def _current_entry(
    cluster: dict, before: dict | None, where_before: dict[str, str], review: dict | str | None
) -> dict:
    """The entry of a current cluster, paired with ``before`` or new."""
    entry = {
        "status": "new",
        "stable_id": cluster["stable_id"],
        "origin": cluster.get("origin"),
        "cluster_id": cluster["id"],
        "previous_cluster_id": None,
        "keeper": cluster["keeper"],
        "size": cluster["size"],
        "previous_size": None,
        "added": [],
        "removed": [],
        "changed": [],
        "from_clusters": sorted({where_before[d] for d, _, _ in cluster["members"] if d in where_before}),
        "review": review,
    }
    if before is not None:
        entry.update(_state(cluster, before), previous_cluster_id=before["id"], previous_size=before["size"])
    return entry


def _resolved_entry(cluster: dict, where_now: dict[str, str]) -> dict:
    """The entry of a cluster of then whose stable id no current cluster has."""
    return {
        "status": "resolved",
        "stable_id": cluster["stable_id"],
        "origin": None,
        "cluster_id": None,
        "previous_cluster_id": cluster["id"],
        "keeper": cluster["keeper"],
        "size": None,
        "previous_size": cluster["size"],
        "added": [],
        "removed": sorted(d for d, _, _ in cluster["members"]),
        "changed": [],
        "now_in": sorted({where_now[d] for d, _, _ in cluster["members"] if d in where_now}),
        "review": None,
    }


def compare_clusters(previous: list[dict], current: list[dict], reviews: dict | None = None) -> list[dict]:
    """Delta entries for clusters stored as by `record_audit`, both with ``stable_id``.

    ``reviews`` maps a current cluster id to its review (default: the record's own
    ``review``). Returns the current clusters in their order, then the resolved ones in
    the previous order. Cost O(members).
    """
    reviews = reviews or {}
    by_id = {cluster["stable_id"]: cluster for cluster in previous}
    where_before, where_now = _where(previous), _where(current)
    entries = [
        _current_entry(
            cluster,
            by_id.get(cluster["stable_id"]),
            where_before,
            reviews.get(cluster["id"], cluster.get("review")),
        )
        for cluster in current
    ]
    now_ids = {cluster["stable_id"] for cluster in current}
    entries += [
        _resolved_entry(cluster, where_now) for cluster in previous if cluster["stable_id"] not in now_ids
    ]
    return entries


def _row(db: sqlite3.Connection, seq: int | None) -> dict | None:
    """An ``audits`` row as a dict (the latest one when ``seq`` is None)."""
    row = db.execute(_LATEST).fetchone() if seq is None else db.execute(_BY_SEQ, (seq,)).fetchone()
    if row is None:
        return None
    seq, audit_id, recorded_at, settings, clusters, documents = row
    return {
        "seq": seq,
        "audit_id": audit_id,
        "recorded_at": recorded_at,
        "settings": json.loads(settings),
        "clusters": json.loads(clusters),
        "documents": json.loads(documents) if documents else None,
    }


def previous_audit(index: Index) -> dict | None:
    """The latest recorded audit: ``seq``, ``audit_id``, ``recorded_at``, ``settings``, ``clusters``, ``documents``."""
    with index.reading() as db:
        return _row(db, None)


def baseline_of(db: sqlite3.Connection) -> dict | None:
    """The accepted baseline: ``seq``, ``audit_id``, ``recorded_at``, ``accepted_at`` (None when none)."""
    seq = db.execute("SELECT value FROM meta WHERE key = 'baseline'").fetchone()
    if seq is None:
        return None
    row = db.execute("SELECT audit_id, recorded_at FROM audits WHERE seq = ?", (int(seq[0]),)).fetchone()
    if row is None:
        return None
    accepted = db.execute("SELECT value FROM meta WHERE key = 'baseline_accepted_at'").fetchone()
    return {
        "seq": int(seq[0]),
        "audit_id": row[0],
        "recorded_at": row[1],
        "accepted_at": accepted[0] if accepted else None,
    }


def _accept(db: sqlite3.Connection, seq: int) -> None:
    """Make audit ``seq`` the baseline (inside a write transaction); its documents are kept."""
    db.executemany(
        "INSERT OR REPLACE INTO meta (key, value) VALUES (?, ?)",
        [("baseline", str(seq)), ("baseline_accepted_at", utc_now())],
    )


def accept_latest(index: Index) -> dict | None:
    """Accept the latest recorded audit as the baseline: its clusters are the accepted
    state, and the next audits are compared with it (`dedup index baseline`).

    Returns
    -------
    dict or None
        The new baseline (see `baseline_of`) with ``clusters``; None when no audit is
        recorded yet.
    """
    with index.writing() as db:
        latest = db.execute("SELECT seq, clusters FROM audits ORDER BY seq DESC LIMIT 1").fetchone()
        if latest is None:
            return None
        _accept(db, latest[0])
        baseline = baseline_of(db)
    baseline["clusters"] = len(json.loads(latest[1]))
    return baseline


def _with_stable_ids(
    db: sqlite3.Connection, result: AuditResult, current: list[dict], latest: dict | None
) -> None:
    """Give the current records, and the audit's clusters, their stable ids (in place)."""
    pool, issued = load_lineage(db)
    given = assign_stable_ids(
        [[(m[0], m[1]) for m in record["members"]] for record in current],
        pool,
        latest["seq"] if latest else None,
        issued,
    )
    for record, cluster, ids in zip(current, result.clusters, given):
        record.update(ids)
        cluster["stable_id"] = ids["stable_id"]


def record_audit(db: sqlite3.Connection, result: AuditResult, *, accept: bool = False) -> dict:
    """Compare an audit with the baseline (else the latest audit), record it, return the delta.

    Runs inside the caller's write transaction, so two audits finishing at once are each
    compared with a whole earlier one and give ids in turn. Adds ``stable_id`` to each of
    ``result``'s clusters.

    Parameters
    ----------
    db : sqlite3.Connection
        In a write transaction (`Index.writing`).
    result : dedup.AuditResult
        A finished audit; its clusters may carry ``review`` (see `apply_decisions`).
    accept : bool
        Make this audit the baseline (the delta is still computed against the one before).

    Returns
    -------
    dict
        The ``delta`` block: ``previous`` (``audit_id``, ``recorded_at``, ``clusters``,
        ``documents`` of the audit compared with, or None), ``basis`` (``baseline``,
        ``last-audit`` or None), ``baseline`` (after this audit, see `baseline_of`),
        ``accepted``, ``matching`` (the rule in words), ``settings_changed``,
        ``documents`` (ids ``added``, ``changed``, ``removed`` since the compared audit,
        or None), ``counts`` (clusters per state, plus ``reviewed``: current clusters
        every member of which a review settled) and ``clusters`` (entries of
        `compare_clusters`).

    Notes
    -----
    Cost O(documents + members + members of the stable ids sharing a document).
    """
    hash_of = {d["id"]: d["content_hash"] for d in result.documents}
    current = [_cluster_record(c, hash_of) for c in result.clusters]
    settings = result.settings.to_dict()
    latest = _row(db, None)
    baseline = baseline_of(db)
    basis = _row(db, baseline["seq"]) if baseline else latest
    _with_stable_ids(db, result, current, latest)
    reviews = {c["id"]: c.get("review") for c in result.clusters}
    entries = compare_clusters(basis["clusters"] if basis else [], current, reviews)
    cursor = db.execute(
        "INSERT INTO audits (audit_id, recorded_at, settings, summary, clusters, documents) VALUES (?, ?, ?, ?, ?, ?)",
        (
            result.audit_id,
            utc_now(),
            json.dumps(settings, sort_keys=True),
            json.dumps(result.summary, sort_keys=True, default=str),
            json.dumps(current, ensure_ascii=False),
            json.dumps([[d["id"], d["content_hash"]] for d in result.documents], ensure_ascii=False),
        ),
    )
    seq = cursor.lastrowid
    store_lineage(db, seq, current)
    if accept:
        _accept(db, seq)
    after = baseline_of(db)
    keep = (seq, after["seq"] if after else seq)
    db.execute("UPDATE audits SET documents = NULL WHERE documents IS NOT NULL AND seq NOT IN (?, ?)", keep)
    return _delta(basis, "baseline" if baseline else "last-audit", after, accept, settings, result, entries)


def _delta(
    basis: dict | None,
    kind: str,
    baseline: dict | None,
    accepted: bool,
    settings: dict,
    result: AuditResult,
    entries: list[dict],
) -> dict:
    """The delta block of `record_audit` from its parts."""
    counts = {state: sum(1 for e in entries if e["status"] == state) for state in STATES}
    counts["reviewed"] = sum(1 for e in entries if _review_status(e["review"]) == "reviewed")
    previous = None
    if basis is not None:
        previous = {
            "audit_id": basis["audit_id"],
            "recorded_at": basis["recorded_at"],
            "clusters": len(basis["clusters"]),
            "documents": len(basis["documents"]) if basis["documents"] is not None else None,
        }
    return {
        "previous": previous,
        "basis": kind if basis is not None else None,
        "baseline": {k: v for k, v in baseline.items() if k != "seq"} if baseline else None,
        "accepted": accepted,
        "matching": MATCHING_RULE,
        "settings_changed": _settings_changed(basis["settings"] if basis else None, settings),
        "documents": _document_changes(basis["documents"] if basis else None, result.documents),
        "counts": counts,
        "clusters": entries,
    }


def _document_changes(before: list | None, documents: list[dict]) -> dict | None:
    if before is None:
        return None
    then = {d: h for d, h in before}
    now = {d["id"]: d["content_hash"] for d in documents}
    return {
        "added": sorted(d for d in now if d not in then),
        "changed": sorted(d for d in now if d in then and then[d] != now[d]),
        "removed": sorted(d for d in then if d not in now),
    }


def _settings_changed(before: dict | None, now: dict) -> list[str]:
    """Names of the settings that differ from the compared audit's (none for the first)."""
    if before is None:
        return []
    return sorted(
        k for k in set(now) | set(before) if k not in _RUN_ONLY_SETTINGS and now.get(k) != before.get(k)
    )


# Settings that change how a run reports, not what it finds.
_RUN_ONLY_SETTINGS = frozenset({"fail_on"})


def fails(delta: dict, fail_on: str) -> bool:
    """Whether ``--fail-on`` is met (see the module notes).

    Clusters a review settled (``reviewed``) never count; an audit accepted as the new
    baseline meets ``new``, ``grown`` and ``changed`` never (it is the accepted state).
    """
    if fail_on not in FAIL_ON:
        raise ValueError(f"fail_on must be one of {', '.join(FAIL_ON)}, got {fail_on!r}")
    if delta.get("accepted") and fail_on != "any":
        return False
    return any(
        e["status"] in _FAILING[fail_on] and _review_status(e["review"]) != "reviewed"
        for e in delta["clusters"]
    )
