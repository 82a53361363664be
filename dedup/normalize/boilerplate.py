"""Boilerplate: lines shared by many documents (navigation, headers, footers, notices).

A line that appears in at least ``max(min_texts, share * n)`` of the n distinct texts is
boilerplate, and so is every line of a user's ``--ignore-text`` file. Boilerplate lines are
left out of the text that is shingled (the exact-duplicate pass still sees the whole
text), so two articles that share only a footer do not look alike, and two copies that
differ only in their footer look identical. Counting is over distinct texts, so exact
copies of one article never make its lines boilerplate. Boilerplate surrounds a text; it
is not the text: when the shared lines would take away more than ``max_text_share`` of a
text's characters (a family of generated pages, or many near-copies of one article), the
text is shingled whole, so near-copies are still compared on all they share.

Cost O(lines) with a dictionary.
"""

from __future__ import annotations

import math
import unicodedata
from collections import Counter
from collections.abc import Iterable

__all__ = ["canonical_lines", "find_boilerplate", "without_boilerplate"]


def canonical_lines(text: str) -> list[str]:
    """The non-empty lines of a text, each normalized like the whole text.

    Joined by single spaces they give the canonical text of the whole:

    >>> from dedup.normalize import canonical_text
    >>> " ".join(canonical_lines("A  b\\n\\n C\\n")) == canonical_text("A  b\\n\\n C\\n")
    True
    """
    # Normalize the whole text once, then split: NFKC and case folding never join or create lines.
    folded = unicodedata.normalize("NFKC", text).casefold()
    return [line for line in (" ".join(raw.split()) for raw in folded.splitlines()) if line]


def find_boilerplate(
    line_lists: Iterable[list[str]], *, share: float, min_texts: int, known: Iterable[str] = ()
) -> tuple[dict[str, int], int]:
    """Boilerplate lines with the number of distinct texts each appears in, and the limit used.

    >>> lines = [["notice", "a"], ["notice", "b"], ["notice", "c"], ["d"]]
    >>> find_boilerplate(lines, share=0.5, min_texts=2)
    ({'notice': 3}, 2)
    """
    frequency: Counter[str] = Counter()
    n = 0
    for lines in line_lists:
        n += 1
        frequency.update(set(lines))
    limit = max(min_texts, math.ceil(share * n))
    found = {line: count for line, count in frequency.items() if count >= limit}
    for line in known:
        found.setdefault(line, frequency.get(line, 0))
    return found, limit


def without_boilerplate(
    lines: list[str], boilerplate: dict[str, int] | set[str], max_text_share: float = 0.5
) -> tuple[str, bool]:
    """The text to shingle and whether boilerplate was left out of it.

    >>> without_boilerplate(["a long body line here", "notice"], {"notice"})
    ('a long body line here', True)
    >>> without_boilerplate(["short", "a long shared notice"], {"a long shared notice"})
    ('short a long shared notice', False)
    """
    kept = [line for line in lines if line not in boilerplate]
    if len(kept) == len(lines):
        return " ".join(lines), False
    removed = sum(len(line) for line in lines) - sum(len(line) for line in kept)
    if not kept or removed > max_text_share * sum(len(line) for line in lines):
        return " ".join(lines), False
    return " ".join(kept), True
