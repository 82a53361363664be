"""Which document of a cluster to keep, by a stated policy; ties broken by id.

Policies:
    longest        the most text (characters of canonical text)
    newest/oldest  by the date field of records, else the file modification time
    shortest-path  the fewest folder levels, then the shortest id
    prefer globs   an ordered list of path patterns that win before the policy
                   (``fnmatch`` patterns; ``*`` also crosses ``/``, so ``current/*``
                   and ``current/**`` both mean "anywhere under current/")
"""

from __future__ import annotations

import fnmatch
from collections.abc import Sequence

__all__ = ["keeper_sort_key", "choose_keeper", "keeper_reason", "POLICY_REASONS", "KEEPER_REASON_CODES"]

_MISSING = float("inf")
# Reason code of the keeper chosen by each policy alone.
POLICY_REASONS = {
    "longest": "most-text",
    "newest": "newest",
    "oldest": "oldest",
    "shortest-path": "shortest-path",
}
# Every reason code `keeper_reason` gives.
KEEPER_REASON_CODES = (*POLICY_REASONS.values(), "preferred-path")


def _glob_rank(doc_id: str, prefer: Sequence[str]) -> int:
    for rank, pattern in enumerate(prefer):
        if fnmatch.fnmatchcase(doc_id, pattern):
            return rank
    return len(prefer)


def keeper_sort_key(
    doc_id: str, length: int, date: float | None, policy: str, prefer: Sequence[str]
) -> tuple:
    """Sort key: the smallest key in a cluster is its keeper."""
    if policy == "longest":
        key: tuple = (-length,)
    elif policy == "newest":
        key = (-date if date is not None else _MISSING,)
    elif policy == "oldest":
        key = (date if date is not None else _MISSING,)
    elif policy == "shortest-path":
        key = (doc_id.count("/"), len(doc_id))
    else:
        raise ValueError(f"unknown keeper policy {policy!r}")
    return (_glob_rank(doc_id, prefer), *key, doc_id)


def choose_keeper(
    members: Sequence[int],
    ids: Sequence[str],
    lengths: Sequence[int],
    dates: Sequence[float | None],
    policy: str,
    prefer: Sequence[str] = (),
) -> int:
    """Index of the member to keep.

    >>> choose_keeper([0, 1], ["a/x", "b/y"], [10, 20], [None, None], "longest")
    1
    >>> choose_keeper([0, 1], ["a/x", "b/y"], [10, 20], [None, None], "longest", ["a/*"])
    0
    """
    return min(members, key=lambda m: keeper_sort_key(ids[m], lengths[m], dates[m], policy, prefer))


def keeper_reason(doc_id: str, policy: str, prefer: Sequence[str]) -> tuple[str, dict]:
    """Why this document is the keeper, as data: a reason code and its figures.

    The code is the policy's (`POLICY_REASONS`), or ``"preferred-path"`` when the
    document matches one of ``prefer``; then the figures name the first matching
    ``glob`` and the policy's code that chose among the matches (``then``). Words for
    these are made by the report. Cost O(len(prefer)) pattern matches.

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
