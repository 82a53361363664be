"""Words with offsets: the compiled kernel agrees with a plain-Python reference.

Reference: the regular expression ``[^\\W_]+`` (a word is a run of letters and digits)
over the original text, each word normalized with NFKC + casefold and split again, as the
report's evidence did; hashes are FNV-1a 64 (Fowler, Noll, Vo) finished with MurmurHash3
fmix64 (Appleby), computed here byte by byte from the published constants.
"""

from __future__ import annotations

import re
import unicodedata
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from dedup.align import normalized_parts, word_spans
from dedup.features import build_features
from dedup.normalize import canonical_text, token_text

WORD = re.compile(r"[^\W_]+")
MASK = (1 << 64) - 1


def fnv1a_fmix64(data: bytes) -> int:
    h = 0xCBF29CE484222325
    for byte in data:
        h = ((h ^ byte) * 0x100000001B3) & MASK
    for mult in (0xFF51AFD7ED558CCD, 0xC4CEB9FE1A85EC53):
        h ^= h >> 33
        h = (h * mult) & MASK
    return h ^ (h >> 33)


def reference(text: str) -> tuple[list[str], list[tuple[int, int]]]:
    """Normalized words and the span of the original word each comes from."""
    words, spans = [], []
    for match in WORD.finditer(text):
        for part in WORD.findall(unicodedata.normalize("NFKC", match.group()).casefold()):
            words.append(part)
            spans.append(match.span())
    return words, spans


def check_batch(texts: list[str]) -> None:
    got = word_spans(texts)
    assert got.n_texts == len(texts)
    for d, text in enumerate(texts):
        words, spans = reference(text)
        hashes, starts, ends = got.of(d)
        assert list(zip(starts.tolist(), ends.tolist())) == spans
        assert hashes.tolist() == [fnv1a_fmix64(w.encode("utf-8", "surrogatepass")) for w in words]


def test_the_documented_example():
    w = word_spans(["Ünïcode ﬁle, OK?"])
    assert list(zip(w.starts.tolist(), w.ends.tolist())) == [(0, 7), (8, 11), (13, 15)]
    assert w.hashes.tolist() == [fnv1a_fmix64(x.encode()) for x in ("ünïcode", "file", "ok")]


@settings(max_examples=300, deadline=None)
@given(st.lists(st.text(max_size=80), min_size=0, max_size=6))
def test_any_text_matches_the_reference(texts):
    check_batch(texts)


@settings(max_examples=300, deadline=None)
@given(
    st.lists(st.text(alphabet="aZ9 _-.\u00bdßİﬁ²\u0301é東\U0001f600\u00a0\u2044ǅ", max_size=40), max_size=6)
)
def test_words_that_normalization_splits_joins_or_drops(texts):
    """½ gives two words, ﬁ and ß change length, İ casefolds to i + a combining dot (two
    words), a combining accent alone is no letter, an astral code point counts once."""
    check_batch(texts)


def test_lone_surrogates_count_as_one_character():
    check_batch(["ab\udcff cd", "\ud800", "x\udc80y"])


def test_empty_batch_and_empty_texts():
    w = word_spans([])
    assert w.offsets.tolist() == [0] and w.hashes.size == 0
    w = word_spans(["", "   ", "a"])
    assert w.offsets.tolist() == [0, 0, 0, 1]


def test_normalized_parts():
    assert normalized_parts("½") == ("1", "2")
    assert normalized_parts("\u00b2") == ("2",)
    assert normalized_parts("ǅ") == ("dž",)


def test_ascii_words_hash_like_the_audit_tokens():
    """For ASCII text the word hashes are the audit's token hashes (`dedup.features`)."""
    text = "The QUICK brown_fox, jumps; over 13 lazy-dogs.\n\nAnd again: the quick fox."
    features = build_features([canonical_text(text)], shingle_size=1)
    assert word_spans([text]).hashes.tolist() == features.token_hashes.tolist()
    assert len(token_text(canonical_text(text)).split()) == word_spans([text]).hashes.size


@pytest.mark.parametrize("name", ["GPL-3", "Apache-2.0", "Artistic"])
def test_real_text(name):
    path = Path("/usr/share/common-licenses") / name
    if not path.is_file():
        pytest.skip(f"{path} missing")
    text = path.read_text(encoding="utf-8", errors="surrogateescape")
    check_batch([text, text.upper(), text[::7]])


def test_spans_point_at_the_original_words():
    text = "Ａｂｃ ﬁnal Straße, 10½ — naïve"
    w = word_spans([text])
    pieces = [text[a:b] for a, b in zip(w.starts.tolist(), w.ends.tolist())]
    assert pieces == ["Ａｂｃ", "ﬁnal", "Straße", "10½", "10½", "naïve"]
    assert np.all(w.starts[1:] >= w.starts[:-1])
