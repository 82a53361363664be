"""Review decisions kept in the index, and how they apply to a new audit.

`import_decisions` stores the decisions file the HTML report exports (schema in
`dedup.index.decisions_file`). `apply_decisions` marks a fresh audit with them.

Rule: decisions are about *texts*. A decision names documents with the content hashes
they had when it was made; it covers a pair of current documents when both their
current texts are among the decision's (for a pair of exact copies, when the decision
lists that text twice). It *holds* for that pair. When a pair's documents are both
named by a decision (by id) that does not hold, because the text of one of them changed
since, the decision has *lapsed* for that pair. Of several decisions the latest
(``decided_at``) wins.

What a pair's ``review`` says, from its best holding decision, else a lapsed one:

    reviewed        "not-duplicate" or "keep-both": not raised again
    confirmed       "confirmed-duplicate": still raised (its action is still to be taken)
    commented       no decision, only a comment
    lapsed          the texts changed since the decision: raised again, marked so

A cluster exists because of its pairs (every confirmed pair lies inside one cluster),
so a cluster is ``reviewed`` when every one of its pairs is; then it is not raised
again: its members' proposed actions become ``keep`` and it proposes nothing to
retire, but it stays in the results with its review (comment and date). A cluster with
a lapsed pair is ``lapsed``, one with only some pairs reviewed is ``partly-reviewed``
(a member joined after the review), one whose pairs all hold with a confirmation is
``confirmed``, and one with only comments ``commented``.
"""

from __future__ import annotations

import json
from collections import Counter
from datetime import datetime, timezone

from .decisions_file import validate_decisions
from .store import Index, utc_now

__all__ = ["DecisionsFileError", "load_decisions_file", "import_decisions", "apply_decisions", "SETTLING"]

# Decisions that settle a pair: it is not raised again while both texts are unchanged.
SETTLING = ("not-duplicate", "keep-both")


class DecisionsFileError(ValueError):
    """A decisions file that cannot be read or does not follow the schema."""


def load_decisions_file(path: str) -> dict:
    """Read and validate a decisions file; the error names the first problems."""
    try:
        with open(path, encoding="utf-8") as handle:
            data = json.load(handle)
    except OSError as err:
        raise DecisionsFileError(f"cannot read {path}: {err.strerror}") from err
    except (UnicodeDecodeError, json.JSONDecodeError) as err:
        raise DecisionsFileError(f"{path} is not a JSON file: {err}") from err
    problems = validate_decisions(data)
    if problems:
        more = f" (and {len(problems) - 3} more)" if len(problems) > 3 else ""
        raise DecisionsFileError(f"{path} is not a decisions file: {'; '.join(problems[:3])}{more}")
    return data


def _utc(text: str) -> str:
    """An ISO 8601 time as UTC ``YYYY-MM-DDTHH:MM:SS.ffffffZ``, so that times compare as text."""
    parsed = datetime.fromisoformat(text.replace("Z", "+00:00"))
    return parsed.astimezone(timezone.utc).strftime("%Y-%m-%dT%H:%M:%S.%fZ")


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
                _utc(d["decided_at"]),
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


def _load(index: Index) -> list[dict]:
    with index.reading() as db:
        rows = db.execute(
            "SELECT decision_id, kind, cluster_id, audit_id, decision, comment, decided_at, documents FROM decisions"
        ).fetchall()
    out = []
    for decision_id, kind, cluster_id, audit_id, decision, comment, decided_at, documents in rows:
        docs = [tuple(x) for x in json.loads(documents)]
        out.append(
            {
                "order": (decided_at, decision_id),
                "kind": kind,
                "cluster_id": cluster_id,
                "audit_id": audit_id,
                "decision": decision,
                "comment": comment,
                "decided_at": decided_at,
                "documents": docs,
                "hashes": Counter(h for _, h in docs),
                "ids": {d: h for d, h in docs},
            }
        )
    return out


def _status(decision: str | None) -> str:
    if decision in SETTLING:
        return "reviewed"
    return "confirmed" if decision == "confirmed-duplicate" else "commented"


def _review(d: dict, status: str, changed: list[str] | None = None) -> dict:
    review = {
        "status": status,
        "decision": d["decision"],
        "comment": d["comment"],
        "decided_at": d["decided_at"],
        "decided_on": d["kind"],
        "decided_cluster_id": d["cluster_id"],
        "decided_audit_id": d["audit_id"],
    }
    if changed is not None:
        review["changed"] = changed
    return review


class _Lookup:
    """The stored decisions by the content hashes and by the document ids they name."""

    def __init__(self, decisions: list[dict]) -> None:
        self.decisions = decisions
        self.by_hash: dict[str, list[int]] = {}
        self.by_id: dict[str, list[int]] = {}
        for n, d in enumerate(decisions):
            for h in d["hashes"]:
                self.by_hash.setdefault(h, []).append(n)
            for doc_id in d["ids"]:
                self.by_id.setdefault(doc_id, []).append(n)

    def pair_review(self, left: str, right: str, hl: str | None, hr: str | None) -> dict | None:
        """The review of a pair of documents with current texts ``hl`` and ``hr``: from the
        latest decision that holds for it, else the latest that lapsed, else None."""
        holding = []
        for n in set(self.by_hash.get(hl, ())) & set(self.by_hash.get(hr, ())):
            counts = self.decisions[n]["hashes"]
            if hl != hr or counts[hl] >= 2:
                holding.append(self.decisions[n])
        if holding:
            best = max(holding, key=lambda d: d["order"])
            return _review(best, _status(best["decision"]))
        named = [self.decisions[n] for n in set(self.by_id.get(left, ())) & set(self.by_id.get(right, ()))]
        if named:
            best = max(named, key=lambda d: d["order"])
            changed = sorted(x for x, h in ((left, hl), (right, hr)) if best["ids"][x] != h)
            return _review(best, "lapsed", changed)
        return None


def apply_decisions(index: Index, result) -> dict:
    """Mark a fresh audit's pairs and clusters with the stored decisions (in place).

    Adds ``review`` (a dict as described above, or None) to every pair and cluster;
    for ``reviewed`` clusters sets each member's action to ``keep`` (with the review in
    its reason), zeroes the cluster's retire counts, and updates ``result.actions`` and
    the summary's retire and review counts to match. Adds ``reviewed_clusters`` to the
    summary.

    Returns
    -------
    dict
        Counts: ``decisions`` stored, and clusters and pairs per review status.

    Notes
    -----
    Cost O(pairs x decisions naming their texts) with dictionaries.
    """
    decisions = _load(index)
    lookup = _Lookup(decisions)
    hash_of = {doc["id"]: doc["content_hash"] for doc in result.documents}
    tally: Counter[str] = Counter()
    for pair in result.pairs:
        left, right = pair["left"], pair["right"]
        pair["review"] = (
            lookup.pair_review(left, right, hash_of.get(left), hash_of.get(right)) if decisions else None
        )
        if pair["review"]:
            tally[f"pairs_{pair['review']['status']}"] += 1
    actions = {a["document_id"]: a for a in result.actions}
    for cluster, pairs in _pairs_by_cluster(result):
        cluster["review"] = _cluster_review([p["review"] for p in pairs]) if decisions else None
        if cluster["review"] is None:
            continue
        tally[f"clusters_{cluster['review']['status']}"] += 1
        if cluster["review"]["status"] == "reviewed":
            _settle(cluster, actions)
    _recount(result, tally["clusters_reviewed"])
    statuses = ("reviewed", "confirmed", "commented", "lapsed", "partly-reviewed")
    return {
        "decisions": len(decisions),
        "clusters": {s: tally[f"clusters_{s}"] for s in statuses},
        "pairs": {s: tally[f"pairs_{s}"] for s in statuses if s != "partly-reviewed"},
    }


def _pairs_by_cluster(result) -> list[tuple[dict, list[dict]]]:
    """Each cluster with the pairs inside it (every confirmed pair lies inside one cluster)."""
    cluster_of = {m["document_id"]: c["id"] for c in result.clusters for m in c["members"]}
    pair_of: dict[str, list[dict]] = {}
    for pair in result.pairs:
        cluster_id = cluster_of.get(pair["left"])
        if cluster_id is not None and cluster_of.get(pair["right"]) == cluster_id:
            pair_of.setdefault(cluster_id, []).append(pair)
    return [(cluster, pair_of.get(cluster["id"], [])) for cluster in result.clusters]


def _settle(cluster: dict, actions: dict[str, dict]) -> None:
    """A reviewed cluster is not raised again: every member is kept, nothing is retired."""
    r = cluster["review"]
    comment = f" ({r['comment']})" if r["comment"] else ""
    reason = (
        f"reviewed on {r['decided_at'][:10]}: {r['decision']}{comment}; "
        "not raised again while the texts are unchanged"
    )
    for member in cluster["members"]:
        member.update(action="keep", in_favour_of=None, reason=reason)
        if member["document_id"] in actions:
            actions[member["document_id"]].update(action="keep", in_favour_of=None, reason=reason)
    for key in ("retire_documents", "retire_bytes"):
        if key in cluster:
            cluster[key] = 0


def _recount(result, reviewed_clusters: int) -> None:
    """The summary's counts of retired and reviewed documents after clusters were settled."""
    summary = result.summary
    summary["reviewed_clusters"] = reviewed_clusters
    if "retire_documents" in summary:
        summary["retire_documents"] = sum(1 for a in result.actions if a["action"] == "retire")
    if "review_documents" in summary:
        summary["review_documents"] = sum(1 for a in result.actions if a["action"] == "review")
    if "retire_bytes" in summary:
        summary["retire_bytes"] = sum(c.get("retire_bytes", 0) for c in result.clusters)


def _cluster_review(reviews: list[dict | None]) -> dict | None:
    """A cluster's review from its pairs' reviews (see the module docstring)."""
    given = [r for r in reviews if r is not None]
    if not given:
        return None
    latest = max(given, key=lambda r: (r["decided_at"], r["status"]))
    statuses = Counter(r["status"] for r in reviews if r is not None)
    pairs = len(reviews)
    if statuses["reviewed"] == pairs:
        status = "reviewed"
        latest = max((r for r in given if r["status"] == "reviewed"), key=lambda r: r["decided_at"])
    elif statuses["lapsed"]:
        status = "lapsed"
        latest = max((r for r in given if r["status"] == "lapsed"), key=lambda r: r["decided_at"])
    elif len(given) == pairs and statuses["confirmed"]:
        status = "confirmed"
    elif statuses["reviewed"]:
        status = "partly-reviewed"
    else:
        status = "commented"
    review = {k: v for k, v in latest.items() if k != "changed"}
    review["status"] = status
    review["pairs"] = pairs
    review["pairs_reviewed"] = statuses["reviewed"]
    if status == "lapsed":
        review["changed"] = sorted(
            {d for r in given if r["status"] == "lapsed" for d in r.get("changed", [])}
        )
    return review
