"""Groups of submissions that share counted passages, kept apart from shared sources.

Two submissions are linked when they share a counted passage (`dedup.check.passages`:
passages both drew from one reference are excluded there as ``same source``). A group
is a connected set of linked submissions (union-find), so three students passing one
text along form one group. Shared sources are listed on their own: a reference from
which two or more submissions have counted passages, which links none of them.

Cost O(passages α(n)).
"""

from __future__ import annotations

from collections import defaultdict
from collections.abc import Sequence

import numpy as np

from .passages import Passage

__all__ = ["peer_groups", "shared_sources"]


def _find(parent: dict[int, int], x: int) -> int:
    while parent[x] != x:
        parent[x] = parent[parent[x]]
        x = parent[x]
    return x


def peer_groups(
    passages: Sequence[Passage], ids: Sequence[str], is_sub: np.ndarray
) -> tuple[list[dict], dict[int, str]]:
    """The groups (largest first, then by first member id) and the group id of each member.

    A group record holds its members (by id) and each linked pair with the counted passages
    and words each side shares.
    """
    pairs: dict[tuple[int, int], dict] = {}
    parent: dict[int, int] = {}
    for p in passages:
        if p.status != "counted" or not is_sub[p.source]:
            continue
        a, b = sorted((p.submission, p.source))
        figures = pairs.setdefault((a, b), {"passages": 0, "words": {a: 0, b: 0}})
        if p.submission == a:
            figures["passages"] += 1
        figures["words"][p.submission] += p.words
        for x in (a, b):
            parent.setdefault(x, x)
        parent[_find(parent, a)] = _find(parent, b)
    members: dict[int, list[int]] = defaultdict(list)
    for x in parent:
        members[_find(parent, x)].append(x)
    found = sorted(
        (sorted(m, key=lambda d: ids[d]) for m in members.values()), key=lambda m: (-len(m), ids[m[0]])
    )
    groups, group_of = [], {}
    for n, member_list in enumerate(found, start=1):
        gid = f"G{n}"
        inside = set(member_list)
        links = [
            {
                "submission": ids[a],
                "other": ids[b],
                "passages": f["passages"],
                "words": f["words"][a],
                "other_words": f["words"][b],
            }
            for (a, b), f in sorted(pairs.items(), key=lambda kv: (ids[kv[0][0]], ids[kv[0][1]]))
            if a in inside
        ]
        groups.append({"group": gid, "members": [ids[d] for d in member_list], "pairs": links})
        group_of.update({d: gid for d in member_list})
    return groups, group_of


def shared_sources(passages: Sequence[Passage], ids: Sequence[str], is_sub: np.ndarray) -> list[dict]:
    """References with counted passages in two or more submissions: each with those submissions."""
    users: dict[int, set[int]] = defaultdict(set)
    for p in passages:
        if p.status == "counted" and not is_sub[p.source]:
            users[p.source].add(p.submission)
    rows = [
        {"source": ids[r], "submissions": sorted(ids[d] for d in subs)}
        for r, subs in users.items()
        if len(subs) > 1
    ]
    return sorted(rows, key=lambda r: (-len(r["submissions"]), r["source"]))
