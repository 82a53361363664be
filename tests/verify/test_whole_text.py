"""Every pair carries the Jaccard of the whole texts and whose template lines were left out.

Reference for the whole-text score: the Jaccard index of two sets (Jaccard, 1901) over
the sets of 5-word tuples of each text's words, computed here in plain Python from the
words themselves (no hashing), so the check does not lean on the audit's shingling.
"""

from __future__ import annotations

import random

import pytest

import dedup
from dedup.normalize import canonical_text, token_text

FOOTER = [
    "this article belongs to the harbour ferry service handbook and is reviewed every spring",
    "questions about this page go to the timetable desk at the north pier office",
]


def _body(rng: random.Random, n: int) -> list[str]:
    words = [
        "tide",
        "pier",
        "ferry",
        "ticket",
        "lantern",
        "harbour",
        "rope",
        "crew",
        "deck",
        "gull",
        "anchor",
        "sail",
        "cargo",
    ]
    return [" ".join(rng.choice(words) for _ in range(12)) for _ in range(n)]


def _edited(lines: list[str]) -> list[str]:
    out = list(lines)
    out[1] = out[1] + " and the evening boat"
    return out


def _tuples(text: str) -> set[tuple[str, ...]]:
    words = token_text(canonical_text(text)).split()
    return {tuple(words[i : i + 5]) for i in range(max(1, len(words) - 4))}


def _jaccard(a: str, b: str) -> float:
    x, y = _tuples(a), _tuples(b)
    return len(x & y) / len(x | y)


@pytest.fixture(scope="module")
def audited():
    rng = random.Random(7)
    texts = {}
    for k in range(4):  # unrelated pages with the footer: it becomes template text
        texts[f"other-{k}"] = "\n".join(_body(rng, 8) + FOOTER)
    body = _body(rng, 10)
    texts["both-a"] = "\n".join(body + FOOTER)
    texts["both-b"] = "\n".join(_edited(body) + FOOTER)
    # The copy's footer re-wrapped into one line: only the original loses it.
    body = _body(rng, 30)
    texts["one-a"] = "\n".join(body + FOOTER)
    texts["one-b"] = "\n".join(_edited(body) + [" ".join(FOOTER)])
    body = _body(rng, 10)
    texts["none-a"] = "\n".join(body)
    texts["none-b"] = "\n".join(_edited(body))
    settings = dedup.AuditSettings(threshold=0.6, candidates="exhaustive")
    result = dedup.audit(list(texts.items()), settings)
    pairs = {tuple(sorted((p["left"], p["right"]))): p for p in result.pairs}
    return texts, pairs


def test_whole_text_jaccard_equals_the_plain_jaccard_of_the_texts(audited):
    texts, pairs = audited
    assert {("both-a", "both-b"), ("none-a", "none-b"), ("one-a", "one-b")} <= set(pairs)
    for (a, b), p in pairs.items():
        assert p["whole_text_jaccard"] == pytest.approx(_jaccard(texts[a], texts[b]), abs=1e-9)


def test_without_template_lines_the_score_that_decided_is_the_whole_text_score(audited):
    """With template lines kept (nothing left out, nothing shingled again) the whole-text
    score is still the plain Jaccard of the texts."""
    texts, _ = audited
    settings = dedup.AuditSettings(threshold=0.6, candidates="exhaustive", boilerplate=False)
    result = dedup.audit(list(texts.items()), settings)
    assert len(result.pairs) >= 3
    for p in result.pairs:
        assert p["templates_left_out"] == "none"
        assert p["whole_text_jaccard"] == pytest.approx(
            _jaccard(texts[p["left"]], texts[p["right"]]), abs=1e-9
        )


def test_templates_left_out_names_the_sides_that_lost_template_lines(audited):
    _, pairs = audited
    assert pairs[("both-a", "both-b")]["templates_left_out"] == "both"
    assert pairs[("none-a", "none-b")]["templates_left_out"] == "none"
    one = pairs[("one-a", "one-b")]
    assert one["templates_left_out"] == ("left" if one["left"] == "one-a" else "right")
    # Without templates the two scores are one; with them they differ.
    none, both = pairs[("none-a", "none-b")], pairs[("both-a", "both-b")]
    assert none["whole_text_jaccard"] == pytest.approx(none["jaccard"], abs=1e-12)
    assert both["whole_text_jaccard"] > both["jaccard"]


def test_the_columns_reach_the_csv_and_the_frames(audited, tmp_path):
    texts, _ = audited
    result = dedup.audit(list(texts.items()), dedup.AuditSettings(threshold=0.6, candidates="exhaustive"))
    written = result.write(str(tmp_path / "out"), report=False)
    with open(written["pairs.csv"], encoding="utf-8") as handle:
        header = handle.readline().strip().split(",")
    assert header[-2:] == ["whole_text_jaccard", "templates_left_out"]
    frame = result.pairs_frame(kind="arrow")
    assert set(frame.column("templates_left_out").to_pylist()) <= {"none", "both", "left", "right"}
