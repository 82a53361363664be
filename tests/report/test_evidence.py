"""Evidence passages: shared shingles mapped back to character offsets of the original texts."""

from __future__ import annotations

import re
import unicodedata

from hypothesis import given, settings
from hypothesis import strategies as st

from dedup.features import shingle_strings
from dedup.normalize import canonical_text, token_text
from dedup.report.evidence import pair_evidence, words_with_offsets
from dedup.report.html import embed_json


def test_words_and_offsets_agree_with_the_audit_normalization():
    text = "Ünïcode  ﬁles — the <b>Price</b> is 10½ EUR; don't_panic!"
    words, spans = words_with_offsets(text)
    # The words are exactly the tokens the audit shingles (NFKC + casefold, punctuation dropped).
    assert words == token_text(canonical_text(text)).split()
    for word, (a, b) in zip(words, spans):
        # Each word comes from the original characters its span points at.
        assert word in token_text(canonical_text(text[a:b])).split()


def test_passages_cover_exactly_the_shared_text():
    shared = "the field team reads every water meter once a quarter"
    left = f"Intro only in the left. {shared}. Left closing words here."
    right = f"Right has its own opening. {shared}! And a different end."
    ev = pair_evidence(left, right, shingle_size=3)
    (lp,) = ev.left
    (rp,) = ev.right
    assert left[lp.start : lp.end] == shared
    assert right[rp.start : rp.end] == shared
    assert lp.number == rp.number == 1
    n_shared = len(shared.split())
    assert ev.left_coverage == n_shared / len(token_text(canonical_text(left)).split())


def test_reordered_passages_keep_their_numbers():
    a = "alpha beta gamma delta epsilon zeta"
    b = "one two three four five six seven"
    ev = pair_evidence(f"{a}. {b}.", f"{b}. {a}.", shingle_size=3)
    left = {(p.start, p.end): p.number for p in ev.left}
    right = {p.number: (p.start, p.end) for p in ev.right}
    assert len(left) == len(right) == 2
    text_left, text_right = f"{a}. {b}.", f"{b}. {a}."
    for (start, end), number in left.items():
        r_start, r_end = right[number]
        assert text_left[start:end] == text_right[r_start:r_end]


def test_unrelated_texts_have_no_passages_and_coverage_counts_shingles():
    ev = pair_evidence("completely different words here", "nothing alike in this sentence at all", 2)
    assert ev.left == [] and ev.right == [] and ev.left_coverage == 0.0
    # A shared shingle marks all its words; words of unshared shingles stay unmarked.
    left, right = "a b c d", "x a b y"
    ev = pair_evidence(left, right, 2)
    assert set(shingle_strings(token_text(left), 2)) & set(shingle_strings(token_text(right), 2)) == {"a b"}
    assert [(left[p.start : p.end]) for p in ev.left] == ["a b"]
    assert ev.left_coverage == 0.5 and ev.right_coverage == 0.5


def test_embedded_json_cannot_close_its_script_block():
    hostile = {"t": "</script><script>alert(1)</script> & \u2028"}
    text = embed_json(hostile)
    assert "<" not in text and ">" not in text and "&" not in text and "\u2028" not in text
    import json

    assert json.loads(text) == hostile


@settings(max_examples=300, deadline=None)
@given(st.text(alphabet=st.sampled_from(list("abcXYZ019 _-.,\n\tİßﬁ½²Ωé")) | st.characters(), max_size=60))
def test_word_offsets_equal_the_per_word_reference(text):
    """Reference: each word of ``[^\\W_]+`` normalized on its own with Python's NFKC and casefold
    (the ASCII fast path and the per-word cache must give the same)."""
    words, spans = [], []
    for m in re.finditer(r"[^\W_]+", text):
        for part in re.findall(r"[^\W_]+", unicodedata.normalize("NFKC", m.group()).casefold()):
            words.append(part)
            spans.append(m.span())
    assert words_with_offsets(text) == (words, spans)
