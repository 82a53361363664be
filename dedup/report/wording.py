"""The words for the cluster stage's reasons.

The cluster stage says why each document has its role as data: a reason code and the
figures behind it (see `dedup.cluster.actions`). Here they become the one-line
sentences of ``audit.json``, ``actions.csv`` and the HTML report. Scores are written
with two decimals, a share of text as a whole percentage.

`describe_roles` fills in the sentences of a whole audit, in place; `reason_sentence`
words a single reason; `describe_warning` words a warning the cluster stage returns as
data.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from datetime import datetime, timezone

__all__ = ["reason_sentence", "describe_member", "describe_roles", "describe_warning", "POLICY_WORDS"]

# What each keeper policy's reason code says about the keeper.
POLICY_WORDS = {
    "most-text": "it has the most text",
    "newest": "it is the newest",
    "oldest": "it is the oldest",
    "shortest-path": "it has the shortest path",
    "first-seen": "it was read first",
}
# What broke a tie between members the policy found equal.
TIE_BREAK_WORDS = {
    "id-order": "sorted id order, which says nothing about the text",
    "id-length": "the shorter id",
}


def _fmt(x: float) -> str:
    return f"{x:.2f}"


def _count(n: int, noun: str) -> str:
    return f"{n:,} {noun}{'' if n == 1 else 's'}"


def _share(x: float) -> str:
    """A share as a whole percentage that never rounds a part to nothing or to everything."""
    if 0 < x < 0.01:
        return "under 1%"
    if 0.99 < x < 1:
        return "over 99%"
    return f"{x:.0%}"


def _date(seconds: float) -> str:
    return datetime.fromtimestamp(seconds, tz=timezone.utc).strftime("%Y-%m-%d %H:%M:%S UTC")


def _date_source(f: Mapping) -> str:
    if f["date_source"] == "metadata":
        return f"metadata field {f['date_field']!r}"
    return "file modification time"


def _policy_detail(code: str, f: Mapping) -> str:
    """What the policy looked at, in words ("" when the figures do not say)."""
    if code == "most-text" and "characters" in f:
        following = f.get("next_characters")
        if following is None or "tie_break" in f:
            return f"{f['characters']:,} characters"
        return f"{f['characters']:,} characters; next {following:,}"
    if code in ("newest", "oldest") and "date_source" in f:
        return f"{_date(f['date'])}, {_date_source(f)}"
    if code == "shortest-path" and "levels" in f:
        return _count(f["levels"], "folder level")
    if code == "first-seen" and "position" in f:
        position = f["position"]
        return f"document {position:,} in input order" if position is not None else "not in the ledger"
    return ""


def _policy_clause(code: str, f: Mapping) -> str:
    """Why the policy chose the keeper: its words, what it looked at, and any tie."""
    tie = ""
    if "tie_break" in f:
        others = _count(f["tied"] - 1, "other member")
        tie = f", tied with {others}; the tie was broken by {TIE_BREAK_WORDS[f['tie_break']]}"
    if code in ("newest", "oldest") and f.get("date_source") and f.get("date") is None:
        return (
            f"none of the {f['tied']:,} members compared has a date ({_date_source(f)}); "
            f"chosen by {TIE_BREAK_WORDS['id-order']}"
        )
    detail = _policy_detail(code, f)
    return POLICY_WORDS[code] + (f" ({detail})" if detail else "") + tie


def _scores(f: Mapping) -> str:
    return (
        f"Jaccard {_fmt(f['jaccard'])}, containment {_fmt(f['containment_in_keeper'])} / "
        f"{_fmt(f['keeper_containment'])}, cosine {_fmt(f['cosine'])} (deciding: {f['measure']})"
    )


def _preferred_path(f: Mapping) -> str:
    matching = f.get("matching")
    if matching == 1:
        return f"keeper: the only member matching preferred path {f['glob']!r}"
    also = f", as do {_count(matching - 1, 'other member')}" if matching else ""
    return f"keeper: matches preferred path {f['glob']!r}{also}; among those, {_policy_clause(f['then'], f)}"


def _unique(f: Mapping) -> str:
    """The member's unique runs, in words: "212 of its words (9%) in 3 passages"."""
    return (
        f"{f['unique_words']:,} of its words ({_share(f['unique_share'])}) "
        f"in {_count(f['unique_runs'], 'passage')}"
    )


def _covered(f: Mapping) -> str:
    sentence = f"near-duplicate of {f['keeper']}: {_scores(f)}"
    if "unique_min_words" in f:
        sentence += f"; no run of {f['unique_min_words']} or more of its words is missing from the keeper"
    return sentence


def _not_covered(f: Mapping) -> str:
    sentence = (
        f"similar to {f['keeper']} ({_scores(f)}), but only {f['containment_in_keeper']:.0%} of its text "
        "is in the keeper"
    )
    if "unique_runs" not in f:
        return sentence + ": merge what is missing before retiring it"
    if f["unique_runs"]:
        return sentence + f", and {_unique(f)} are not in it: merge what is missing before retiring it"
    return sentence + (
        f"; no run of {f['unique_min_words']} or more of its words is missing, so the differences are "
        "edits: compare them before retiring it"
    )


def _unique_text(f: Mapping) -> str:
    keeper = f["keeper"]
    return (
        f"near-duplicate of {keeper} ({_scores(f)}), but {_unique(f)} are not in {keeper}: "
        f"merge them into {keeper} before retiring it"
    )


def _mostly_unique(f: Mapping) -> str:
    keeper = f["keeper"]
    return (
        f"shares text with {keeper} ({_scores(f)}), but {_unique(f)} are not in {keeper}: more than "
        f"{f['max_merge_share']:.0%} of it is its own text, so it is not proposed for retirement; "
        "decide separately"
    )


def _linked_through(f: Mapping) -> str:
    link = f" ({f['measure']} {_fmt(f['link_score'])})" if f["link_score"] is not None else ""
    return (
        f"in this cluster because it resembles {f['linked_through']}{link}, "
        f"not the keeper {f['keeper']} ({_scores(f)}); decide separately"
    )


def _policy(code: str) -> Callable[[Mapping], str]:
    return lambda figures: f"keeper: {_policy_clause(code, figures)}"


_SENTENCES: dict[str, Callable[[Mapping], str]] = {
    **{code: _policy(code) for code in POLICY_WORDS},
    "preferred-path": _preferred_path,
    "exact-copy": lambda f: f"exact copy of {f['keeper']} (same text after normalization)",
    "covered": _covered,
    "not-covered": _not_covered,
    "linked-through": _linked_through,
    "unique-text": _unique_text,
    "mostly-unique": _mostly_unique,
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


def _prefer_matches_nothing(w: Mapping) -> str:
    sample = f" such as {w['sample']!r}" if w.get("sample") is not None else ""
    return (
        f"preferred path {w['glob']!r} matches none of the {_count(w['documents'], 'document')}, so it "
        f"chose no keeper; patterns are matched against document ids{sample}"
    )


_WARNINGS: dict[str, Callable[[Mapping], str]] = {"prefer-matches-nothing": _prefer_matches_nothing}


def describe_warning(warning: Mapping) -> dict:
    """A warning record for ``audit.json`` from a warning given as data: its ``kind``, then
    the ``message``, then its figures. O(1).

    >>> w = describe_warning({"kind": "prefer-matches-nothing", "glob": "x/*", "documents": 2, "sample": "a"})
    >>> list(w)
    ['kind', 'message', 'glob', 'documents', 'sample']
    >>> w["message"].split(";")[0]
    "preferred path 'x/*' matches none of the 2 documents, so it chose no keeper"

    Raises
    ------
    ValueError
        The kind is not one the cluster stage gives.
    """
    kind = warning["kind"]
    if kind not in _WARNINGS:
        raise ValueError(f"unknown warning kind {kind!r}")
    figures = {key: value for key, value in warning.items() if key != "kind"}
    return {"kind": kind, "message": _WARNINGS[kind](warning), **figures}
