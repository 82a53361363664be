"""The compiled canonical lines equal the Python reference, character for character.

Reference: Python's own ``unicodedata.normalize("NFKC")``, ``str.casefold``,
``str.splitlines`` and ``str.split`` as used by `canonical_lines` (standard library).
"""

from __future__ import annotations

import itertools
import sys

from hypothesis import given, settings
from hypothesis import strategies as st

from dedup.normalize import canonical_text
from dedup.normalize.boilerplate import canonical_lines
from dedup.normalize.canonical_bytes import canonical_line_bytes, canonical_packed

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


@settings(max_examples=200, deadline=None)
@given(st.lists(st.text(alphabet=st.sampled_from(SPECIAL) | st.characters(), max_size=40), max_size=12))
def test_packed_texts_are_the_reference_laid_end_to_end(texts):
    for separator in (b"\n", b" "):
        buf, offsets, characters = canonical_packed(texts, separator=separator)
        want = [_reference(t) for t in texts]
        assert characters == [c for _, c in want]
        assert buf.tobytes() == b"".join(lines.replace(b"\n", separator) for lines, _ in want)
        assert offsets.tolist() == [0, *itertools.accumulate(len(lines) for lines, _ in want)]


def test_joined_by_spaces_it_is_the_canonical_text():
    text = "  Das  Maß\u2028ist\r\nVOLL\x1c\x1fﬁn "
    (lines,), _ = canonical_line_bytes([text])
    assert lines.replace(b"\n", b" ").decode() == canonical_text(text) == "das mass ist voll fin"


def test_every_ascii_character_alone_and_in_words():
    texts = [chr(c) for c in range(128)] + [f"a{chr(c)}B{chr(c)}c" for c in range(128)]
    got, _ = canonical_line_bytes(texts)
    assert got == [_reference(t)[0] for t in texts]


# Neighbours that compose or reorder with what stands next to them: a letter, a combining
# acute, a Hangul leading consonant and vowel, a full-width letter, a no-break space.
_NEIGHBOURS = ["A", "\u0301", "\u1100", "\u1161", "\uff21", "\xa0"]


def test_every_code_point_in_every_kind_of_neighbourhood():
    # The kernel decides alone, per code point, whether NFKC leaves a text alone or which
    # single code point it puts in a character's place; Python's NFKC must agree for every
    # code point of the tables, next to characters that compose, reorder or map.
    texts = []
    for c in range(0x80, 0x20010):
        ch = chr(c)
        if 0xD800 <= c < 0xE000:
            continue
        texts.append(ch + ch)
        texts.extend(n + ch for n in _NEIGHBOURS)
        texts.extend(ch + n for n in _NEIGHBOURS)
    got, characters = canonical_line_bytes(texts)
    want = [_reference(t) for t in texts]
    wrong = [t for t, g, c, w in zip(texts, got, characters, want) if (g, c) != w]
    assert wrong == []


def test_given_utf8_bytes_give_what_the_texts_give():
    texts = ["Ｆｕｌｌ\xa0width ＡＢＣ", "cafe\u0301 and café", "한국어 \u1100\u1161", "plain", "ﬁne Straße"]
    encoded = [t.encode("utf-8") for t in texts]
    assert canonical_line_bytes(texts, encoded=encoded) == canonical_line_bytes(texts)
    assert canonical_line_bytes(texts)[0] == [_reference(t)[0] for t in texts]


@settings(max_examples=100, deadline=None)
@given(
    st.lists(
        st.lists(st.text(alphabet=st.sampled_from(SPECIAL) | st.characters(), max_size=40), max_size=8),
        max_size=5,
    )
)
def test_in_two_steps_into_a_reused_array_it_is_the_reference(batches):
    """`CanonicalJob` (the kernel's pass, then Python's fix-ups) writing batch after batch
    into one array kept between them gives each batch the Python reference."""
    import numpy as np

    from dedup.normalize.canonical_bytes import CanonicalJob

    spare = np.zeros(64, np.uint8)  # small: larger batches get an array of their own
    for texts in batches:
        job = CanonicalJob(texts, separator=b"\n")
        out, starts, lengths, characters, fixed = job.finish(job.run(spare=spare))
        got = [
            fixed[k] if k in fixed else out[a : a + n].tobytes()
            for k, (a, n) in enumerate(zip(starts, lengths))
        ]
        assert [_reference(t) for t in texts] == list(zip(got, characters))
