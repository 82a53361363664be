"""Stable cluster ids: one name for a cluster from audit to audit.

An audit numbers its clusters ``C00001``… by size, so a number moves when another
cluster grows, and names another cluster when one is resolved. The index gives every
cluster of a recorded audit a *stable id* as well, by this rule (members are document
ids, so a member whose text changed is still the same member):

1. *kept*: a cluster keeps the id of a cluster of the latest recorded audit when more
   than half of the members of the two together are shared (it grew or shrank by less
   than half). Clusters of one audit share no member, so at most one earlier cluster
   can meet this and the pairing needs no order.
2. *revived*: else it takes back, by the same rule, the id of a cluster of an earlier
   audit that no current cluster holds (most shared members first, then the most
   recent, then the smallest id): a cluster that is gone for an audit and returns is
   not new.
3. *minted*: else it gets a new id from its content: ``S-`` and the first 8 hex digits
   of the smallest content hash of its members (exact copies and renames do not change
   it), with more digits when that id was ever given before, so an id never names two
   clusters.

Every cluster also names ``from``: the ids of the latest audit's clusters any of its
members were in. A merge is a cluster ``from`` several ids (it keeps one of them if that
one holds more than half of it); a split leaves the larger part with the id (if more
than half) and the other parts ``from`` it.

Cost O(members of the current clusters + members of the ids that share a document
with them), with dictionaries.
"""

from __future__ import annotations

import json
import sqlite3
from collections import Counter
from dataclasses import dataclass

__all__ = ["PREFIX", "Lineage", "assign_stable_ids", "mint", "load_lineage", "store_lineage"]

PREFIX = "S-"
# Hex digits of the smallest content hash in a new id; more when it was given before.
DIGITS = 8


@dataclass(frozen=True)
class Lineage:
    """An id given before: the document ids of its cluster in the latest audit that had it."""

    stable_id: str
    members: frozenset[str]
    last_seq: int


def mint(hashes: list[str], issued: set[str]) -> str:
    """A new id from the smallest of ``hashes``, not in ``issued`` (rule 3).

    >>> mint(["9f00aa", "3b1c2d4e5f"], set()), mint(["3b1c2d4e5f"], {"S-3b1c2d4e"})
    ('S-3b1c2d4e', 'S-3b1c2d4e5')
    """
    digest = min((h for h in hashes if h), default="0" * 32)
    for digits in range(DIGITS, len(digest) + 1):
        candidate = PREFIX + digest[:digits]
        if candidate not in issued:
            return candidate
    n = 2
    while f"{PREFIX}{digest}-{n}" in issued:
        n += 1
    return f"{PREFIX}{digest}-{n}"


def _shares(members: list[set[str]], pool: list[Lineage]) -> list[Counter[int]]:
    """For each current cluster: pool position -> shared document ids."""
    where: dict[str, list[int]] = {}
    for j, entry in enumerate(pool):
        for doc_id in entry.members:
            where.setdefault(doc_id, []).append(j)
    out = []
    for docs in members:
        shared: Counter[int] = Counter()
        for doc_id in docs:
            shared.update(where.get(doc_id, ()))
        out.append(shared)
    return out


def _holds(shared: int, a: int, b: int) -> bool:
    """More than half of the members of the two together are shared."""
    return 2 * shared > a + b - shared


def assign_stable_ids(
    clusters: list[list[tuple[str, str]]], pool: list[Lineage], latest_seq: int | None, issued: set[str]
) -> list[dict]:
    """Stable ids of the current clusters by the rule above.

    Parameters
    ----------
    clusters : list of list of (document id, content hash)
        The current clusters' members.
    pool : list of Lineage
        Ids given before; those whose ``last_seq`` is ``latest_seq`` are the latest
        audit's clusters.
    latest_seq : int or None
        The latest recorded audit (None: none yet).
    issued : set of str
        Every id ever given (new ones must differ).

    Returns
    -------
    list of dict
        Per cluster, in order: ``stable_id``, ``origin`` (``kept``, ``revived`` or
        ``minted``) and ``from`` (sorted ids of the latest audit's clusters its members
        were in).
    """
    members = [{doc_id for doc_id, _ in cluster} for cluster in clusters]
    shares = _shares(members, pool)
    live = {j for j, entry in enumerate(pool) if entry.last_seq == latest_seq}
    out: list[dict] = []
    taken: set[int] = set()
    for docs, shared in zip(members, shares):
        kept = [j for j, n in shared.items() if j in live and _holds(n, len(docs), len(pool[j].members))]
        origin = {"from": sorted(pool[j].stable_id for j in shared if j in live)}
        if kept:  # rule 1: unique (see the module notes)
            taken.add(kept[0])
            origin.update(stable_id=pool[kept[0]].stable_id, origin="kept")
        out.append(origin)
    for k, (docs, shared) in enumerate(zip(members, shares)):
        if "stable_id" in out[k]:
            continue
        options = [
            (-n, -pool[j].last_seq, pool[j].stable_id, j)
            for j, n in shared.items()
            if j not in live and j not in taken and _holds(n, len(docs), len(pool[j].members))
        ]
        if options:  # rule 2
            j = min(options)[3]
            taken.add(j)
            out[k].update(stable_id=pool[j].stable_id, origin="revived")
    given = set(issued)
    for k, cluster in enumerate(clusters):
        if "stable_id" not in out[k]:  # rule 3
            new = mint([h for _, h in cluster], given)
            given.add(new)
            out[k].update(stable_id=new, origin="minted")
    return [{"stable_id": o["stable_id"], "origin": o["origin"], "from": o["from"]} for o in out]


def load_lineage(db: sqlite3.Connection) -> tuple[list[Lineage], set[str]]:
    """The ids given before (``cluster_ids``), and the set of them. O(their members)."""
    pool = [
        Lineage(stable_id, frozenset(json.loads(members)), last_seq)
        for stable_id, last_seq, members in db.execute(
            "SELECT stable_id, last_seq, members FROM cluster_ids ORDER BY stable_id"
        )
    ]
    return pool, {entry.stable_id for entry in pool}


def store_lineage(db: sqlite3.Connection, seq: int, records: list[dict]) -> None:
    """Record the stable ids of audit ``seq``'s clusters (records with ``stable_id`` and
    ``members``), inside the caller's write transaction."""
    db.executemany(
        "INSERT INTO cluster_ids (stable_id, minted_seq, last_seq, members) VALUES (?, ?, ?, ?) "
        "ON CONFLICT (stable_id) DO UPDATE SET last_seq = excluded.last_seq, members = excluded.members",
        [
            (
                r["stable_id"],
                seq,
                seq,
                json.dumps(sorted({m[0] for m in r["members"]}), ensure_ascii=False),
            )
            for r in records
        ],
    )
