"""The compiled canonical lines equal the Python reference, character for character.

Reference: Python's own ``unicodedata.normalize("NFKC")``, ``str.casefold``,
``str.splitlines`` and ``str.split`` as used by `canonical_lines` (standard library).
"""

from __future__ import annotations

import sys

from hypothesis import given, settings
from hypothesis import strategies as st

from dedup.normalize import canonical_text
from dedup.normalize.boilerplate import canonical_lines
from dedup.normalize.canonical_bytes import canonical_line_bytes

# Every character Python treats as whitespace or as a line break, plus letters that fold
# to longer or shorter UTF-8 (sharp s, Kelvin sign, ligature fi, full-width A, emoji, A with stroke,
# Deseret, sigma forms) or lie outside the folding table (U+20000).
SPECIAL = [chr(c) for c in range(sys.maxunicode + 1) if chr(c).isspace()] + list(
    "ßKﬁＡ😀éİ\u0301\x00\x7fȺ𐐀𠀀ΣςᾈẞÅ"
)


def _reference(text: str) -> tuple[bytes, int]:
    lines = canonical_lines(text)
    return "\n".join(lines).encode("utf-8", "surrogatepass"), len(" ".join(lines))


@settings(max_examples=400, deadline=None)
@given(st.lists(st.text(alphabet=st.sampled_from(SPECIAL) | st.characters(), max_size=40), max_size=12))
def test_equals_the_python_reference(texts):
    got, characters = canonical_line_bytes(texts)
    assert [_reference(t) for t in texts] == list(zip(got, characters))


def test_joined_by_spaces_it_is_the_canonical_text():
    text = "  Das  Maß\u2028ist\r\nVOLL\x1c\x1fﬁn "
    (lines,), _ = canonical_line_bytes([text])
    assert lines.replace(b"\n", b" ").decode() == canonical_text(text) == "das mass ist voll fin"


def test_every_ascii_character_alone_and_in_words():
    texts = [chr(c) for c in range(128)] + [f"a{chr(c)}B{chr(c)}c" for c in range(128)]
    got, _ = canonical_line_bytes(texts)
    assert got == [_reference(t)[0] for t in texts]
