"""Shared passages: structure of the result, checked in plain Python on small texts.

Filler words are made up ("f0 ... f999" on the left, "g0 ..." on the right) so that they
never match; shared passages are runs of real text, the Apache license as Debian installs
it under /usr/share/common-licenses (the tests skip without it).
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from dedup.align import AlignSettings, align_pairs, align_texts, word_spans

WORD = re.compile(r"[^\W_]+")
LICENSE = Path("/usr/share/common-licenses/Apache-2.0")
if not LICENSE.is_file():
    pytest.skip(f"{LICENSE} missing", allow_module_level=True)


def real_words() -> list[str]:
    """Whitespace tokens of a real text: the Apache license, about 1,600 words."""
    return LICENSE.read_text(encoding="utf-8").split()


def passage(start: int, length: int) -> str:
    return " ".join(real_words()[start : start + length])


def filler(prefix: str, start: int, length: int) -> str:
    return " ".join(f"{prefix}{i}" for i in range(start, start + length))


def words_in(text: str, start: int, end: int) -> list[str]:
    return WORD.findall(text[start:end].lower())


def holds(text: str, start: int, end: int, expected: str) -> bool:
    """``text[start:end]`` holds exactly the words of ``expected`` (a span runs from the
    first letter of its first word to the last of its last, so edge punctuation is out)."""
    return words_in(text, start, end) == WORD.findall(expected.lower()) and start >= 0


def spans(result, p: int = 0) -> list[tuple[int, int, int, int, bool]]:
    return result.passages_of(p)


def test_verbatim_passage_is_found_exactly():
    shared = passage(100, 60)
    left = f"{filler('f', 0, 40)} {shared} {filler('f', 40, 30)}"
    right = f"{filler('g', 0, 10)}. {shared}. {filler('g', 10, 50)}"
    result = align_texts(left, right)
    ((ls, le, rs, re_, moved),) = spans(result)
    assert holds(left, ls, le, shared) and holds(right, rs, re_, shared) and not moved
    assert result.similarity[0] == 1.0
    n_shared = len(WORD.findall(shared))
    assert result.left_words.tolist() == result.right_words.tolist() == [n_shared]
    assert result.left_share[0] == n_shared / len(WORD.findall(left))


@pytest.mark.parametrize("edit", ["substitute", "insert", "delete"])
def test_one_edited_word_does_not_split_a_passage(edit):
    tokens = passage(200, 60).split()
    edited = list(tokens)
    if edit == "substitute":
        edited[30] = "zzzz"
    elif edit == "insert":
        edited.insert(30, "zzzz")
    else:
        del edited[30]
    left = f"{filler('f', 0, 40)} {' '.join(tokens)} {filler('f', 40, 30)}"
    right = f"{filler('g', 0, 20)} {' '.join(edited)} {filler('g', 20, 30)}"
    result = align_texts(left, right)
    ((ls, le, rs, re_, _),) = spans(result)
    assert holds(left, ls, le, " ".join(tokens))
    assert holds(right, rs, re_, " ".join(edited))
    assert 0.9 < result.similarity[0] < 1.0


def test_swapped_sentences_do_not_split_a_passage():
    a, b, c, d = passage(300, 25), passage(325, 20), passage(345, 22), passage(367, 25)
    left = f"{filler('f', 0, 30)} {a} {b} {c} {d} {filler('f', 30, 30)}"
    right = f"{filler('g', 0, 30)} {a} {c} {b} {d} {filler('g', 30, 30)}"
    result = align_texts(left, right)
    ((ls, le, rs, re_, moved),) = spans(result)
    assert holds(left, ls, le, f"{a} {b} {c} {d}") and holds(right, rs, re_, f"{a} {c} {b} {d}")
    assert not moved


def test_repeated_phrase_is_paired_occurrence_by_occurrence():
    """The same 20 words twice in both texts: two passages, first with first and second
    with second, each occurrence covered once on each side."""
    shared = passage(400, 20)
    left = f"{filler('f', 0, 50)} {shared} {filler('f', 50, 50)} {shared} {filler('f', 100, 50)}"
    right = f"{filler('g', 0, 10)} {shared} {filler('g', 10, 80)} {shared} {filler('g', 90, 5)}"
    found = spans(align_texts(left, right))
    assert len(found) == 2
    (l1, _, r1, _, m1), (l2, _, r2, _, m2) = found
    assert l1 < l2 and r1 < r2 and not m1 and not m2
    assert [left.index(shared), left.rindex(shared)] == [l1, l2]
    assert [right.index(shared), right.rindex(shared)] == [r1, r2]
    assert all(holds(left, a, b, shared) and holds(right, c, d, shared) for a, b, c, d, _ in found)


def test_moved_block_is_reported_once_as_moved():
    """A 40-word block moved from the middle to after 60 unrelated words at the end."""
    head, block, tail = passage(500, 80), passage(580, 40), passage(620, 80)
    left = f"{head} {block} {tail}"
    right = f"{head} {tail} {filler('g', 0, 60)} {block}"
    found = spans(align_texts(left, right))
    moved = [p for p in found if p[4]]
    assert len(moved) == 1
    ls, le, rs, re_, _ = moved[0]
    assert holds(left, ls, le, block) and holds(right, rs, re_, block)
    (h, t) = [p for p in found if not p[4]]
    assert holds(left, h[0], h[1], head) and holds(right, h[2], h[3], head)
    assert holds(left, t[0], t[1], tail) and holds(right, t[2], t[3], tail)


def test_long_swapped_blocks_stay_apart():
    """Two halves of 100 words swapped: longer than max_swap, so one of them is moved."""
    first, second = passage(700, 100), passage(800, 100)
    found = spans(align_texts(f"{first} {second}", f"{second} {first}"))
    assert len(found) == 2 and sum(p[4] for p in found) == 1


def test_empty_and_short_texts():
    for left, right in [("", ""), ("", passage(0, 40)), (passage(0, 40), ""), ("a b", "a b")]:
        result = align_texts(left, right)
        assert result.pair.size == 0
        assert result.left_share.tolist() == [0.0] and result.right_share.tolist() == [0.0]
        assert result.pair_offsets.tolist() == [0, 0]


def test_batch_equals_pairs_one_by_one_and_is_deterministic():
    texts = [passage(0, 300), f"{filler('f', 0, 30)} {passage(50, 120)}", passage(900, 200), ""]
    texts.append(f"{passage(920, 60)} {filler('g', 0, 10)} {passage(10, 80)}")
    words = word_spans(texts)
    left = np.array([0, 1, 2, 3, 4, 0, 4])
    right = np.array([1, 0, 4, 0, 2, 4, 0])
    batch = align_pairs(words, left, right)
    again = align_pairs(words, left, right, workers=3)
    for name in batch.__dataclass_fields__:
        assert np.array_equal(getattr(batch, name), getattr(again, name)), name
    for p, (a, b) in enumerate(zip(left, right)):
        assert batch.passages_of(p) == spans(align_texts(texts[a], texts[b]))
    assert batch.pair.size > 0


def test_settings_are_checked():
    with pytest.raises(ValueError):
        AlignSettings(seed_words=0)
    with pytest.raises(ValueError):
        AlignSettings(min_similarity=1.5)
    with pytest.raises(ValueError):
        align_pairs(word_spans(["a"]), [0], [1])


# Texts made of shared real runs and fillers, in random order and with random edits.
pieces = st.lists(
    st.tuples(st.integers(0, 1200), st.integers(1, 60), st.booleans(), st.integers(0, 3)),
    min_size=1,
    max_size=8,
)


def build(spec: list[tuple[int, int, bool, int]], prefix: str) -> str:
    out = []
    for n, (start, length, shared, edits) in enumerate(spec):
        tokens = passage(start, length).split() if shared else filler(prefix, 1000 * n, length).split()
        for e in range(edits):
            if tokens:
                tokens[(7 * e + 3) % len(tokens)] = f"{prefix}x{e}"
        out.append(" ".join(tokens))
    return " ".join(out)


@settings(max_examples=150, deadline=None)
@given(pieces, pieces, st.sampled_from([3, 4]), st.integers(5, 20))
def test_passages_never_overlap_and_shares_match_the_passages(left_spec, right_spec, k, min_words):
    left, right = build(left_spec, "f"), build(right_spec, "g")
    result = align_texts(left, right, AlignSettings(seed_words=k, min_words=min_words))
    found = spans(result)
    for side, text, share in ((0, left, result.left_share[0]), (2, right, result.right_share[0])):
        ranges = sorted((p[side], p[side + 1]) for p in found)
        assert all(a[1] <= b[0] for a, b in zip(ranges, ranges[1:])), "overlapping passages"
        # Plain Python: words of the text whose span lies inside a passage.
        words = [m.span() for m in WORD.finditer(text)]
        inside = sum(any(a <= s and e <= b for a, b in ranges) for s, e in words)
        assert share == (inside / len(words) if words else 0.0)
    for row, (ls, le, rs, re_, _) in enumerate(found):
        # Offsets index the original text: the words there are the passage's words.
        assert len(words_in(left, ls, le)) == result.left_words[row] >= min_words
        assert len(words_in(right, rs, re_)) == result.right_words[row] >= min_words
        assert 0.0 < result.similarity[row] <= 1.0


def test_a_text_against_itself_is_one_passage():
    """The whole license against itself: one passage over all its words, though some of
    its phrases repeat (the repeats are paired in order, not all to the first)."""
    text = LICENSE.read_text(encoding="utf-8")
    result = align_texts(text, text)
    ((ls, le, rs, re_, moved),) = spans(result)
    assert (ls, le) == (rs, re_) and not moved
    assert holds(text, ls, le, text)
    assert result.left_share[0] == result.right_share[0] == 1.0 and result.similarity[0] == 1.0
