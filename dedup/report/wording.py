"""The words for the cluster stage's reasons.

The cluster stage says why each document has its role as data: a reason code and the
figures behind it (see `dedup.cluster.actions`). Here they become the one-line
sentences of ``audit.json``, ``actions.csv`` and the HTML report. Scores are written
with two decimals, a share of text as a whole percentage.

`describe_roles` fills in the sentences of a whole audit, in place; `reason_sentence`
words a single reason.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping

__all__ = ["reason_sentence", "describe_member", "describe_roles", "POLICY_WORDS"]

# What each keeper policy's reason code says about the keeper.
POLICY_WORDS = {
    "most-text": "it has the most text",
    "newest": "it is the newest",
    "oldest": "it is the oldest",
    "shortest-path": "it has the shortest path",
}


def _fmt(x: float) -> str:
    return f"{x:.2f}"


def _scores(f: Mapping) -> str:
    return (
        f"Jaccard {_fmt(f['jaccard'])}, containment {_fmt(f['containment_in_keeper'])} / "
        f"{_fmt(f['keeper_containment'])}, cosine {_fmt(f['cosine'])} (deciding: {f['measure']})"
    )


def _preferred_path(f: Mapping) -> str:
    return f"keeper: matches preferred path {f['glob']!r}; among those, {POLICY_WORDS[f['then']]}"


def _covered(f: Mapping) -> str:
    return f"near-duplicate of {f['keeper']}: {_scores(f)}"


def _not_covered(f: Mapping) -> str:
    return (
        f"similar to {f['keeper']} ({_scores(f)}), but only {f['containment_in_keeper']:.0%} of its text "
        "is in the keeper: merge what is missing before retiring it"
    )


def _linked_through(f: Mapping) -> str:
    link = f" ({f['measure']} {_fmt(f['link_score'])})" if f["link_score"] is not None else ""
    return (
        f"in this cluster because it resembles {f['linked_through']}{link}, "
        f"not the keeper {f['keeper']} ({_scores(f)}); decide separately"
    )


def _policy(code: str) -> Callable[[Mapping], str]:
    return lambda _figures: f"keeper: {POLICY_WORDS[code]}"


_SENTENCES: dict[str, Callable[[Mapping], str]] = {
    **{code: _policy(code) for code in POLICY_WORDS},
    "preferred-path": _preferred_path,
    "exact-copy": lambda f: f"exact copy of {f['keeper']} (same text after normalization)",
    "covered": _covered,
    "not-covered": _not_covered,
    "linked-through": _linked_through,
}


def reason_sentence(code: str, figures: Mapping) -> str:
    """The sentence for one reason code with its figures; O(1).

    >>> reason_sentence("preferred-path", {"glob": "current/**", "then": "most-text"})
    "keeper: matches preferred path 'current/**'; among those, it has the most text"

    Raises
    ------
    ValueError
        The code is not one the cluster stage gives.
    """
    if code not in _SENTENCES:
        raise ValueError(f"unknown reason code {code!r}")
    return _SENTENCES[code](figures)


def describe_member(entry: dict) -> dict:
    """Put the sentence of a member record's reason where its reason data was, in place.

    ``reason_code`` and ``reason_figures`` give way to ``reason`` at the same place in
    the key order, so the JSON written from the record keeps its layout. A record that
    has its sentence already is left alone. Returns the record; O(keys).
    """
    if "reason_code" not in entry:
        return entry
    sentence = reason_sentence(entry["reason_code"], entry["reason_figures"])
    items = [(key, value) for key, value in entry.items() if key != "reason_figures"]
    entry.clear()
    entry.update(("reason", sentence) if key == "reason_code" else (key, value) for key, value in items)
    return entry


def describe_roles(roles: dict[int, dict]) -> dict[int, dict]:
    """Sentences for every role of `dedup.cluster.build_clusters`, in place; returns ``roles``.

    The clusters' member lists hold the same records as ``roles``, so they are worded
    too. O(members).
    """
    for entry in roles.values():
        describe_member(entry)
    return roles
