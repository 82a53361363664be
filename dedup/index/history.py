"""Past audits in the index, and what changed since the previous one (the ``delta``).

Every audit run with an index is recorded: its id, time, settings, summary and clusters,
each cluster as its members' document ids with their content hashes. The next audit is
compared with the latest recorded one.

Matching rule
-------------
A member is identified by its document id *and* content hash, so a member whose text
changed counts as a new member (its new text has not been reviewed).

1. Clusters of the two audits are paired by how many document ids they share. Pairs
   sharing at least one id are taken greedily, most shared ids first (ties: the
   earlier previous cluster id, then the earlier current cluster id); each cluster is
   paired at most once.
2. A paired current cluster is ``grown`` when it has a member (id and hash) the previous
   one lacked, else ``shrunk`` when it lacks one the previous one had, else
   ``unchanged``. Its entry lists the ``added`` and ``removed`` document ids, and under
   ``changed`` those whose text changed.
3. A current cluster paired with none is ``new``; its entry names the previous clusters
   any of its members were in (``from_clusters``), as when a cluster splits.
4. A previous cluster paired with none is ``resolved``; its entry names the current
   clusters any of its members are in now (``now_in``).

Cost O(members) with dictionaries, plus sorting the candidate pairs.
"""

from __future__ import annotations

import json
from collections import Counter

from .store import Index, utc_now

__all__ = ["STATES", "MATCHING_RULE", "compare_clusters", "record_audit", "previous_audit", "fails"]

STATES = ("new", "grown", "shrunk", "resolved", "unchanged")
MATCHING_RULE = (
    "members are document ids with their content hashes; clusters are paired by the most shared document ids "
    "(greedy, ties by previous then current cluster id); a paired cluster with a member it lacked before is grown, "
    "else one missing a member is shrunk, else unchanged; an unpaired current cluster is new, an unpaired previous "
    "one resolved. A member whose text changed counts as a new member."
)
FAIL_ON = ("none", "any", "new", "grown")


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


def _where(clusters: list[dict]) -> dict[str, int]:
    """Document id -> the position of the cluster it is a member of."""
    return {doc_id: k for k, cluster in enumerate(clusters) for doc_id, _, _ in cluster["members"]}


def _partners(previous: list[dict], current: list[dict], where_before: dict[str, int]) -> dict[int, int]:
    """Current cluster -> the previous cluster it is paired with (rule 1 of the matching rule)."""
    shared: Counter[tuple[int, int]] = Counter()
    for i, cluster in enumerate(current):
        for doc_id, _, _ in cluster["members"]:
            if doc_id in where_before:
                shared[(i, where_before[doc_id])] += 1
    order = sorted(shared.items(), key=lambda item: (-item[1], item[0][1], item[0][0]))
    partner_of_current: dict[int, int] = {}
    taken: set[int] = set()
    for (i, j), _ in order:
        if i not in partner_of_current and j not in taken:
            partner_of_current[i] = j
            taken.add(j)
    return partner_of_current


def _current_entry(cluster: dict, before: dict | None, previous: list[dict], where_before: dict) -> dict:
    """The entry of a current cluster, paired with ``before`` or new (rules 2 and 3)."""
    entry = {
        "status": "new",
        "cluster_id": cluster["id"],
        "previous_cluster_id": None,
        "keeper": cluster["keeper"],
        "size": cluster["size"],
        "previous_size": None,
        "added": [],
        "removed": [],
        "changed": [],
        "review": cluster.get("review"),
    }
    if before is None:
        entry["from_clusters"] = sorted(
            {previous[where_before[d]]["id"] for d, _, _ in cluster["members"] if d in where_before}
        )
        return entry
    now_keys = {(d, h) for d, h, _ in cluster["members"]}
    then_keys = {(d, h) for d, h, _ in before["members"]}
    added = sorted(now_keys - then_keys)
    removed = sorted(then_keys - now_keys)
    changed = sorted({d for d, _ in added} & {d for d, _ in removed})
    entry.update(
        status="grown" if added else "shrunk" if removed else "unchanged",
        previous_cluster_id=before["id"],
        previous_size=before["size"],
        added=sorted({d for d, _ in added} - set(changed)),
        removed=sorted({d for d, _ in removed} - set(changed)),
        changed=changed,
    )
    return entry


def _resolved_entry(cluster: dict, current: list[dict], where_now: dict[str, int]) -> dict:
    """The entry of a previous cluster paired with none (rule 4)."""
    return {
        "status": "resolved",
        "cluster_id": None,
        "previous_cluster_id": cluster["id"],
        "keeper": cluster["keeper"],
        "size": None,
        "previous_size": cluster["size"],
        "added": [],
        "removed": sorted(d for d, _, _ in cluster["members"]),
        "changed": [],
        "review": None,
        "now_in": sorted({current[where_now[d]]["id"] for d, _, _ in cluster["members"] if d in where_now}),
    }


def compare_clusters(previous: list[dict], current: list[dict]) -> list[dict]:
    """Delta entries for clusters stored as by `record_audit` (see the matching rule above).

    Returns current clusters in their order, then resolved ones in the previous order.
    """
    where_before, where_now = _where(previous), _where(current)
    partner_of_current = _partners(previous, current, where_before)
    entries = []
    for i, cluster in enumerate(current):
        j = partner_of_current.get(i)
        before = previous[j] if j is not None else None
        entries.append(_current_entry(cluster, before, previous, where_before))
    paired = set(partner_of_current.values())
    for j, cluster in enumerate(previous):
        if j not in paired:
            entries.append(_resolved_entry(cluster, current, where_now))
    return entries


def previous_audit(index: Index) -> dict | None:
    """The latest recorded audit: ``seq``, ``audit_id``, ``recorded_at``, ``settings``, ``clusters``, ``documents``."""
    with index.reading() as db:
        row = db.execute(
            "SELECT seq, audit_id, recorded_at, settings, clusters, documents FROM audits ORDER BY seq DESC LIMIT 1"
        ).fetchone()
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


def record_audit(index: Index, result) -> dict:
    """Compare an audit with the latest recorded one, record it, and return the delta.

    Parameters
    ----------
    index : Index
    result : dedup.AuditResult
        A finished audit; its clusters may carry ``review`` (see `apply_decisions`).

    Returns
    -------
    dict
        The ``delta`` block: ``previous`` (``audit_id``, ``recorded_at``, ``clusters``,
        ``documents`` of the audit compared with, or None for the first audit),
        ``matching`` (the rule in words), ``settings_changed`` (names of settings that
        differ from the previous audit's), ``documents`` (ids ``added``, ``changed``,
        ``removed`` since then, or None), ``counts`` (clusters per state, plus
        ``reviewed``: current clusters not raised again because of a review), and
        ``clusters`` (entries of `compare_clusters`).

    Notes
    -----
    The comparison and the recording are one transaction, so two audits finishing at
    once are each compared with a whole previous audit. Cost O(documents + members).
    """
    hash_of = {d["id"]: d["content_hash"] for d in result.documents}
    current = [_cluster_record(c, hash_of) for c in result.clusters]
    settings = result.settings.to_dict()
    with index.writing() as db:
        row = db.execute(
            "SELECT seq, audit_id, recorded_at, settings, clusters, documents FROM audits ORDER BY seq DESC LIMIT 1"
        ).fetchone()
        previous, before_clusters, before_settings, before_docs = _previous_of(row)
        entries = compare_clusters(before_clusters, current)
        db.execute("UPDATE audits SET documents = NULL WHERE documents IS NOT NULL")
        db.execute(
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
    counts = {state: sum(1 for e in entries if e["status"] == state) for state in STATES}
    counts["reviewed"] = sum(1 for e in entries if e["review"] == "reviewed")
    return {
        "previous": previous,
        "matching": MATCHING_RULE,
        "settings_changed": _settings_changed(before_settings, settings),
        "documents": _document_changes(before_docs, result.documents),
        "counts": counts,
        "clusters": entries,
    }


def _previous_of(row: tuple | None) -> tuple[dict | None, list[dict], dict | None, list | None]:
    """From the latest ``audits`` row (or None): the delta's ``previous`` block, its
    clusters, its settings and its documents (None where there are none)."""
    if row is None:
        return None, [], None, None
    before_clusters = json.loads(row[4])
    before_docs = json.loads(row[5]) if row[5] else None
    previous = {
        "audit_id": row[1],
        "recorded_at": row[2],
        "clusters": len(before_clusters),
        "documents": len(before_docs) if before_docs is not None else None,
    }
    return previous, before_clusters, json.loads(row[3]), before_docs


def _settings_changed(before: dict | None, now: dict) -> list[str]:
    """Names of the settings that differ from the previous audit's (none for the first)."""
    if before is None:
        return []
    return sorted(
        k for k in set(now) | set(before) if k not in _RUN_ONLY_SETTINGS and now.get(k) != before.get(k)
    )


# Settings that change how a run reports, not what it finds.
_RUN_ONLY_SETTINGS = frozenset({"fail_on"})


def fails(delta: dict, fail_on: str) -> bool:
    """Whether ``--fail-on`` is met; clusters a review settled (``reviewed``) never count.

    ``any``: some current cluster; ``new``: a new cluster; ``grown``: a new or grown one.
    """
    if fail_on not in FAIL_ON:
        raise ValueError(f"fail_on must be one of {', '.join(FAIL_ON)}, got {fail_on!r}")
    states = {
        "none": (),
        "any": ("new", "grown", "shrunk", "unchanged"),
        "new": ("new",),
        "grown": ("new", "grown"),
    }
    return any(e["status"] in states[fail_on] and e["review"] != "reviewed" for e in delta["clusters"])
