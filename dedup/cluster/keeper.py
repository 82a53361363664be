"""Which document of a cluster to keep, by a stated policy, and why, as data.

Policies:
    longest        the most text (characters of canonical text)
    newest/oldest  by a date: the record field named by ``date_field`` when one is given
                   (a document without that field has no date: it is not given the file
                   time instead), else the file modification time; no date never wins
    shortest-path  the fewest folder levels, then the shortest id
    first-seen     the document read first: the inputs in the order given, each folder
                   walked in sorted order, the records of a file in file order -- the
                   order of ``ledger.csv`` (`input_positions`). Not the order of the
                   records of ``audit.json``, which are sorted by id.
    prefer globs   an ordered list of path patterns that win before the policy
                   (``fnmatch`` patterns; ``*`` also crosses ``/``, so ``current/*``
                   and ``current/**`` both mean "anywhere under current/")

Every sort key ends in the id, so the choice does not depend on the members' order. When
members are equal on everything the policy looks at, that last rule -- sorted id order,
which says nothing about the text -- decided; `explain_keeper` says so, with the rule
that broke the tie and how many members were tied, so a reader is never told "it has the
most text" of a keeper that has only as much as another.
"""

from __future__ import annotations

import fnmatch
from collections.abc import Sequence

__all__ = [
    "keeper_sort_key",
    "choose_keeper",
    "keeper_reason",
    "explain_keeper",
    "input_positions",
    "unmatched_prefer",
    "POLICY_REASONS",
    "POLICY_RULES",
    "KEEPER_REASON_CODES",
]

_MISSING = float("inf")
# Reason code of the keeper chosen by each policy alone.
POLICY_REASONS = {
    "longest": "most-text",
    "newest": "newest",
    "oldest": "oldest",
    "shortest-path": "shortest-path",
    "first-seen": "first-seen",
}
# The rules of each policy's part of the sort key, in order. Before them comes the rank of
# the first matching preferred path ("preferred-path"), after them the id ("id-order").
POLICY_RULES = {
    "longest": ("most-text",),
    "newest": ("newest",),
    "oldest": ("oldest",),
    "shortest-path": ("levels", "id-length"),
    "first-seen": ("first-seen",),
}
# Every reason code `keeper_reason` and `explain_keeper` give.
KEEPER_REASON_CODES = (*POLICY_REASONS.values(), "preferred-path")


def _glob_rank(doc_id: str, prefer: Sequence[str]) -> int:
    for rank, pattern in enumerate(prefer):
        if fnmatch.fnmatchcase(doc_id, pattern):
            return rank
    return len(prefer)


def keeper_sort_key(
    doc_id: str,
    length: int,
    date: float | None,
    policy: str,
    prefer: Sequence[str],
    position: int | None = None,
) -> tuple:
    """Sort key: the smallest key in a cluster is its keeper.

    ``(preferred-path rank, *the policy's rules, id)``; ``position`` is the input
    position (`input_positions`), read only by ``first-seen``. O(len(prefer)).
    """
    if policy == "longest":
        key: tuple = (-length,)
    elif policy == "newest":
        key = (-date if date is not None else _MISSING,)
    elif policy == "oldest":
        key = (date if date is not None else _MISSING,)
    elif policy == "shortest-path":
        key = (doc_id.count("/"), len(doc_id))
    elif policy == "first-seen":
        key = (position if position is not None else _MISSING,)
    else:
        raise ValueError(f"unknown keeper policy {policy!r}")
    return (_glob_rank(doc_id, prefer), *key, doc_id)


def _keys(
    members: Sequence[int],
    ids: Sequence[str],
    lengths: Sequence[int],
    dates: Sequence[float | None],
    policy: str,
    prefer: Sequence[str],
    order: Sequence[int | None] | None,
) -> dict[int, tuple]:
    if policy == "first-seen" and order is None:
        raise ValueError("the first-seen keeper policy needs the input order of the documents")
    return {
        m: keeper_sort_key(
            ids[m], lengths[m], dates[m], policy, prefer, order[m] if order is not None else None
        )
        for m in members
    }


def choose_keeper(
    members: Sequence[int],
    ids: Sequence[str],
    lengths: Sequence[int],
    dates: Sequence[float | None],
    policy: str,
    prefer: Sequence[str] = (),
    order: Sequence[int | None] | None = None,
) -> int:
    """Index of the member to keep; ``order`` (input positions) is needed by ``first-seen``.

    >>> choose_keeper([0, 1], ["a/x", "b/y"], [10, 20], [None, None], "longest")
    1
    >>> choose_keeper([0, 1], ["a/x", "b/y"], [10, 20], [None, None], "longest", ["a/*"])
    0
    >>> choose_keeper([0, 1], ["a/x", "b/y"], [10, 20], [None, None], "first-seen", order=[1, 0])
    1
    """
    keys = _keys(members, ids, lengths, dates, policy, prefer, order)
    return min(members, key=keys.__getitem__)


def keeper_reason(doc_id: str, policy: str, prefer: Sequence[str]) -> tuple[str, dict]:
    """Why this document is the keeper, from its id alone: a reason code and its figures.

    The code is the policy's (`POLICY_REASONS`), or ``"preferred-path"`` when the
    document matches one of ``prefer``; then the figures name the first matching
    ``glob`` and the policy's code that chose among the matches (``then``). It cannot
    tell ties: `explain_keeper`, which sees the other members, can. O(len(prefer)).

    >>> keeper_reason("a/x", "longest", [])
    ('most-text', {})
    >>> keeper_reason("a/x", "newest", ["b/*", "a/*"])
    ('preferred-path', {'glob': 'a/*', 'then': 'newest'})
    """
    rank = _glob_rank(doc_id, prefer)
    code = POLICY_REASONS[policy]
    if rank < len(prefer):
        return "preferred-path", {"glob": prefer[rank], "then": code}
    return code, {}


def _first_difference(a: tuple, b: tuple) -> int:
    return next(i for i, (x, y) in enumerate(zip(a, b)) if x != y)


def _policy_figures(
    keeper: int,
    rivals: list[int],
    ids: Sequence[str],
    lengths: Sequence[int],
    dates: Sequence[float | None],
    policy: str,
    order: Sequence[int | None] | None,
    date_field: str | None,
) -> dict:
    """What the policy looked at, for the keeper (and its best rival, for ``longest``)."""
    if policy == "longest":
        best = max((lengths[m] for m in rivals), default=None)
        return {"characters": int(lengths[keeper]), "next_characters": best}
    if policy in ("newest", "oldest"):
        return {
            "date": dates[keeper],
            "date_source": "metadata" if date_field else "file-time",
            "date_field": date_field,
        }
    if policy == "shortest-path":
        return {"levels": ids[keeper].count("/")}
    position = order[keeper] if order is not None else None
    return {"position": position + 1 if position is not None else None}


def explain_keeper(
    members: Sequence[int],
    keeper: int,
    ids: Sequence[str],
    lengths: Sequence[int],
    dates: Sequence[float | None],
    policy: str,
    prefer: Sequence[str] = (),
    order: Sequence[int | None] | None = None,
    date_field: str | None = None,
) -> tuple[str, dict]:
    """Why ``keeper`` is the keeper of ``members``, as data: a reason code and its figures.

    The code is ``"preferred-path"`` when the keeper matches one of ``prefer`` (figures
    ``glob``, ``then``: the policy's code, ``matching``: how many members match that
    glob first), else the policy's (`POLICY_REASONS`). The figures add what the policy
    looked at -- ``characters`` and ``next_characters`` (longest); ``date``,
    ``date_source`` (``"metadata"`` or ``"file-time"``) and ``date_field`` (newest,
    oldest); ``levels`` (shortest-path); ``position``, 1-based (first-seen) -- and, when
    the members the policy compared were equal on its first rule, ``tie_break``: the
    rule that decided (``"id-length"`` or ``"id-order"``, see `POLICY_RULES`) and
    ``tied``: how many members, the keeper included, were equal up to that rule.

    Cost O(m * len(prefer)) for m members.

    >>> explain_keeper([0, 1], 0, ["a.md", "b.md"], [10, 10], [None, None], "longest")
    ('most-text', {'characters': 10, 'next_characters': 10, 'tie_break': 'id-order', 'tied': 2})
    >>> explain_keeper([0, 1], 1, ["a.md", "c/b.md"], [10, 5], [None, None], "longest", ["c/*"])
    ('preferred-path', {'glob': 'c/*', 'then': 'most-text', 'matching': 1})
    """
    keys = _keys(members, ids, lengths, dates, policy, prefer, order)
    mine = keys[keeper]
    others = [m for m in members if m != keeper]
    # The rule at which the last rival dropped out decided.
    decided = max((_first_difference(mine, keys[m]) for m in others), default=1)
    code = POLICY_REASONS[policy]
    competing = [m for m in others if keys[m][0] == mine[0]]
    figures = _policy_figures(keeper, competing, ids, lengths, dates, policy, order, date_field)
    if decided > 1:
        rules = ("preferred-path", *POLICY_RULES[policy], "id-order")
        figures["tie_break"] = rules[decided]
        figures["tied"] = sum(1 for m in members if keys[m][:decided] == mine[:decided])
    rank = mine[0]
    if rank < len(prefer):
        head = {"glob": prefer[rank], "then": code, "matching": len(competing) + 1}
        return "preferred-path", head if not competing else {**head, **figures}
    return code, figures


def input_positions(ids: Sequence[str], ledger_ids: Sequence[str]) -> list[int | None]:
    """Position of each document in the input order: the n-th document the ledger records.

    ``ledger_ids`` is the ``document_id`` of every ledger entry, in ledger order (``""``
    for an entry that made no document); a document the ledger does not name gets None
    (it never wins ``first-seen``). O(ledger + ids).

    >>> input_positions(["a", "b", "c"], ["c", "", "a", "b"])
    [1, 2, 0]
    """
    position: dict[str, int] = {}
    for doc_id in ledger_ids:
        if doc_id and doc_id not in position:
            position[doc_id] = len(position)
    return [position.get(doc_id) for doc_id in ids]


def unmatched_prefer(prefer: Sequence[str], ids: Sequence[str]) -> list[dict]:
    """A warning, as data, for every preferred-path pattern that matches none of ``ids``.

    Such a pattern chooses no keeper (most often a typo, or a pattern written for another
    root folder). Each record: ``kind`` ``"prefer-matches-nothing"``, ``glob``,
    ``documents`` (how many ids were tried) and ``sample`` (the first id, to show what
    ids look like, or None). Cost O(len(prefer) * len(ids)).

    >>> unmatched_prefer(["current/**", "docs/*"], ["docs/a.md"])
    [{'kind': 'prefer-matches-nothing', 'glob': 'current/**', 'documents': 1, 'sample': 'docs/a.md'}]
    """
    return [
        {
            "kind": "prefer-matches-nothing",
            "glob": pattern,
            "documents": len(ids),
            "sample": ids[0] if ids else None,
        }
        for pattern in prefer
        if not any(fnmatch.fnmatchcase(doc_id, pattern) for doc_id in ids)
    ]
