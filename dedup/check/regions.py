"""Stretches of a submission left out of the counted text: quotations and reference lists.

A writer who quotes a source in quotation marks, or sets it off as a block quote, says
where the words come from; a reference list repeats titles that the sources hold too.
Both are found here as character spans of the text as read, each with its reason, so
that a passage lying there is listed as excluded instead of counted.

* ``quoted``: text between double quotation marks (``"…"``, ``“…”``, ``«…»``, ``„…“``)
  within one paragraph, and lines starting with ``>`` (block quotes). A quotation
  followed closely by a citation, ``(Name 2019, p. 4)`` or ``[3]``, is marked cited.
* ``reference list``: from the last heading "References", "Bibliography", "Works cited",
  "Reference list", "Sources" or "Literature cited" (alone on its line) to the end.

Cost O(characters) with regular expressions of bounded reach (a quotation never spans a
blank line, nor more than `MAX_QUOTE_CHARS` characters).
"""

from __future__ import annotations

import re
from dataclasses import dataclass

__all__ = [
    "Region",
    "REASONS",
    "quoted_regions",
    "reference_list_region",
    "exclusion_regions",
    "MAX_QUOTE_CHARS",
]

# Why a stretch is not counted, in the order a word lying in several is labelled by.
REASONS = ("quoted", "reference list", "template", "short")
MAX_QUOTE_CHARS = 4000

_PAIRS = (('"', '"'), ("\u201c", "\u201d"), ("\u00ab", "\u00bb"), ("\u201e", "\u201c"))
_QUOTES = [
    re.compile(re.escape(a) + r"(?:[^" + re.escape(a + b) + r"\n]|\n(?![ \t]*\n))*" + re.escape(b))
    for a, b in _PAIRS
]
_BLOCK = re.compile(r"^[ \t]{0,3}>.*(?:\n[ \t]{0,3}>.*)*", re.MULTILINE)
_CITATION = re.compile(
    r"[\s.,;:]{0,3}(?:\([^()\n]{0,80}?\d{4}[a-z]?[^()\n]{0,30}\)|\[\d{1,3}(?:[,\u2013-]\s?\d{1,3})*\])"
)
_BLOCK_CITATION = re.compile(
    r"(?:\([^()\n]{0,80}?\d{4}[a-z]?[^()\n]{0,30}\)|\[\d{1,3}\]|^[ \t]{0,3}>?\s*(?:\u2014|--|-)\s*\w)",
    re.MULTILINE,
)
_HEADINGS = re.compile(
    r"^[ \t]{0,3}(?:#{1,6}[ \t]*)?(?:references|bibliography|works cited|reference list|sources|literature cited)"
    r"[ \t]*:?[ \t]*#*[ \t]*$",
    re.IGNORECASE | re.MULTILINE,
)


@dataclass(frozen=True)
class Region:
    """Characters ``[start, end)`` of a text as read, left out for ``reason``.

    ``cited`` is true for a quotation followed by a citation.
    """

    start: int
    end: int
    reason: str
    cited: bool = False


def quoted_regions(text: str) -> list[Region]:
    """Quotations and block quotes of ``text``, in text order, not overlapping.

    >>> [(r.start, r.end, r.cited) for r in quoted_regions('He said "a b c" (Lee 2020). And "d".')]
    [(8, 15, True), (32, 35, False)]
    """
    found: list[Region] = []
    for pattern in _QUOTES:
        for m in pattern.finditer(text):
            if m.end() - m.start() <= MAX_QUOTE_CHARS:
                cited = _CITATION.match(text, m.end(), min(len(text), m.end() + 120)) is not None
                found.append(Region(m.start(), m.end(), "quoted", cited))
    for m in _BLOCK.finditer(text):
        after = text[m.end() : m.end() + 160]
        cited = bool(_BLOCK_CITATION.search(m.group())) or _CITATION.match(after) is not None
        found.append(Region(m.start(), m.end(), "quoted", cited))
    return _disjoint(found)


def _disjoint(regions: list[Region]) -> list[Region]:
    # Sorted by start; a region inside or overlapping the one before joins it.
    out: list[Region] = []
    for r in sorted(regions, key=lambda r: (r.start, -r.end)):
        if out and r.start < out[-1].end:
            last = out[-1]
            out[-1] = Region(last.start, max(last.end, r.end), last.reason, last.cited or r.cited)
        else:
            out.append(r)
    return out


def reference_list_region(text: str) -> Region | None:
    """From the last reference-list heading of ``text`` to its end, or None.

    >>> reference_list_region("Essay text.\\n\\nWorks cited\\nLee, A. (2020).")
    Region(start=13, end=40, reason='reference list', cited=False)
    """
    last = None
    for last in _HEADINGS.finditer(text):  # noqa: B007 - the last one is wanted
        pass
    if last is None:
        return None
    return Region(last.start(), len(text), "reference list")


def exclusion_regions(text: str, *, quotes: bool = True, reference_list: bool = True) -> list[Region]:
    """Every quotation and the reference list of ``text`` (as switched on), in text order.

    A quotation inside the reference list is left to the list.
    """
    regions = quoted_regions(text) if quotes else []
    listed = reference_list_region(text) if reference_list else None
    if listed is not None:
        regions = [r for r in regions if r.end <= listed.start] + [listed]
    return regions
