"""Canonical text: what two documents must share to count as the same text.

``canonical_text`` applies Unicode NFKC (so compatibility forms such as ligatures and
full-width letters compare equal), case folding (stronger than lower-casing, e.g.
German sharp s) and whitespace collapsing. It keeps punctuation, so the exact-duplicate
pass only groups texts a reader would call identical.

``token_text`` goes one step further for features: every run of characters that are
not letters or digits becomes one space, so shingles are made of words only.
"""

from __future__ import annotations

import re
import unicodedata

__all__ = ["canonical_text", "token_text"]

# \W is "not a word character" in Unicode mode; "_" counts as a word character in
# Python's regex, but it is punctuation in prose, so it separates words too.
_NON_WORD = re.compile(r"[\W_]+")


def canonical_text(text: str) -> str:
    """NFKC, casefold, collapse whitespace, strip the ends.

    >>> canonical_text("  The  ﬁle\\tIS\\n here ")
    'the file is here'
    """
    text = unicodedata.normalize("NFKC", text).casefold()
    # str.split() with no argument splits on Unicode whitespace, three times faster than a regex.
    return " ".join(text.split())


def token_text(canonical: str) -> str:
    """Words of a canonical text separated by single spaces.

    >>> token_text("don't panic -- it's fine_ok.")
    'don t panic it s fine ok'
    """
    return _NON_WORD.sub(" ", canonical).strip()
