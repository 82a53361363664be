"""The class check end to end on small invented classes: sources, exclusions, groups, figures."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from check_texts import SOURCE

from dedup.check import CheckResult, CheckSettings, check
from dedup.check.candidates import HitLog, SubmissionIndex, peer_candidates, source_candidates
from dedup.check.shingles import shingle_of, shingle_sets
from dedup.ingest import InputError
from dedup.settings import SettingsError


def _rows(result: CheckResult, submission: str) -> list[dict]:
    return [m for m in result.matches if m["submission"] == submission]


@pytest.fixture
def result(small_class) -> CheckResult:
    subs, refs, _ = small_class
    return check([str(subs)], against=[str(refs)], settings=CheckSettings(min_words=12, short_words=8))


def test_a_copied_passage_is_counted_with_its_source_and_offsets(result, small_class):
    text = small_class[2]["copier.txt"]
    counted = [m for m in _rows(result, "copier.txt") if m["status"] == "counted"]
    assert [(m["source"], m["source_kind"]) for m in counted] == [("brisk.txt", "reference")]
    m = counted[0]
    # Offsets are characters of the text as read, end exclusive, in both texts.
    assert text[m["submission_start"] : m["submission_end"]] == SOURCE.rstrip(".")
    assert SOURCE[m["source_start"] : m["source_end"]] == SOURCE.rstrip(".")
    record = next(r for r in result.submissions if r["submission"] == "copier.txt")
    assert record["top_source"] == "brisk.txt" and record["share_matched"] > 0.5


def test_a_quoted_and_cited_copy_is_excluded_not_counted(result):
    rows = _rows(result, "quoter.txt")
    assert rows and all(m["status"] == "excluded" for m in rows)
    quoted = [m for m in rows if m["source"] == "brisk.txt"]
    assert quoted[0]["reason"] == "quoted" and quoted[0]["cited"] is True
    record = next(r for r in result.submissions if r["submission"] == "quoter.txt")
    assert record["share_matched"] == 0.0 and record["passages"] == 0


def test_two_students_sharing_a_section_form_a_group(result):
    (group,) = result.groups
    assert group["members"] == ["pair-a.txt", "pair-b.txt"]
    assert {r["submission"]: r["group"] for r in result.submissions}["clean.txt"] is None


def test_students_using_the_same_reference_are_not_linked(tmp_path):
    a = "Opening words of the first student about canals.\n\n" + SOURCE + "\n\nHer own closing thought."
    b = "The second student starts differently, with weather.\n\n" + SOURCE + "\n\nHis own last words."
    result = check([("a", a), ("b", b)], against=[("brisk", SOURCE)], settings=CheckSettings(min_words=12))
    assert result.groups == []
    assert result.shared_sources == [{"source": "brisk", "submissions": ["a", "b"]}]
    peer = [m for m in result.matches if m["source_kind"] == "submission"]
    assert peer and all(m["reason"] == "same source" and m["via"] == ["brisk"] for m in peer)


def test_references_are_never_compared_with_each_other():
    result = check([("s", "a few words of a student")], against=[("r1", SOURCE), ("r2", SOURCE)])
    assert result.matches == [] and result.summary["references_read"] == 2


def test_template_text_is_left_out(tmp_path):
    prompt = "Question: why did the lamplighters of Brisk share their work with the families above the canal?"
    template = tmp_path / "prompt.txt"
    template.write_text(prompt, encoding="utf-8")
    subs = [
        ("a", prompt + "\n\nMy own answer about lamps."),
        ("b", prompt + "\n\nA different answer altogether."),
    ]
    result = check(subs, settings=CheckSettings(templates=(str(template),)))
    # The template's shingles seed no candidate, and its words are listed as left out.
    assert result.groups == [] and all(m["status"] == "excluded" for m in result.matches)
    for record in result.submissions:
        assert record["words_left_out"]["template"] == 16
        assert [r["reason"] for r in record["left_out"]] == ["template"]
    # Without the template the two submissions share the prompt as a counted passage.
    assert check(subs).groups


def test_short_shared_runs_are_listed_as_excluded():
    run = "the families who lived above the water kept a small book"  # 11 words
    subs = [("a", "First: " + run + " and so on."), ("b", "Second text: " + run + " then more.")]
    result = check(subs, settings=CheckSettings(min_words=15, short_words=8))
    assert result.matches and {m["reason"] for m in result.matches} == {"short"}


def test_containment_equals_python_sets_on_the_same_shingles(result):
    texts = result.texts
    from benchmarks.check_quality import containment_mismatches

    assert containment_mismatches(result, texts, 5) == []
    # The check itself can fail: a wrong share is caught.
    record = next(r for r in result.submissions if r["sources"])
    record["sources"][0]["share"] += 0.01
    assert containment_mismatches(result, texts, 5)


def test_shingle_hashes_are_the_rolling_polynomial_of_the_word_hashes():
    words = np.array([11, 22, 33, 44], dtype=np.uint64)
    values, offsets = shingle_sets(words, np.array([0, 4]), 3)
    assert sorted(values.tolist()) == sorted([shingle_of([11, 22, 33]), shingle_of([22, 33, 44])])
    keep = np.array([True, True, False, True])
    assert shingle_sets(words, np.array([0, 4]), 3, keep=keep)[0].size == 0


def test_candidates_need_enough_seeds_and_common_shingles_do_not_seed():
    subs = (np.array([1, 2, 3, 4, 5, 6], np.uint64), np.array([0, 3, 6]))  # sub 0: 1 2 3; sub 1: 4 5 6
    index = SubmissionIndex.build(*subs)
    log = HitLog.empty()
    # Hits given directly: reference 0 holds keys 0, 1; reference 1 key 3; reference 2 keys 3, 4, 5.
    log.refs, log.keys, log.count = [np.array([0, 0, 1, 2, 2, 2])], [np.array([0, 1, 3, 3, 4, 5])], 3
    s, r, n = source_candidates(index, log, seed_shingles=2, limit=10)
    assert list(zip(s.tolist(), r.tolist(), n.tolist())) == [(0, 0, 2), (1, 2, 3)]
    s, r, n = source_candidates(index, log, seed_shingles=2, limit=1)  # key 3 is in two references
    assert list(zip(s.tolist(), r.tolist(), n.tolist())) == [(0, 0, 2), (1, 2, 2)]
    s, r, n = source_candidates(index, log, seed_shingles=3, limit=1)
    assert s.size == 0
    a, b, n = peer_candidates(
        SubmissionIndex.build(np.array([7, 8, 7, 8], np.uint64), np.array([0, 2, 4])),
        2,
        seed_shingles=2,
        limit=5,
    )
    assert (a.tolist(), b.tolist(), n.tolist()) == ([0], [1], [2])


def test_same_input_gives_byte_identical_outputs(small_class, tmp_path):
    subs, refs, _ = small_class
    written = []
    for n in (1, 2):
        result = check([str(subs)], against=[str(refs)], workers=n)
        paths = result.write(str(tmp_path / f"out{n}"))
        written.append({k: Path(v).read_bytes() for k, v in paths.items()})
    assert written[0] == written[1]
    data = json.loads(written[0]["check.json"])
    assert data["caution"] and data["settings"]["min_words"] == 15 and data["ledger"]


def test_bad_input_is_a_clear_error():
    with pytest.raises(InputError):
        check(["/no/such/folder"])
    with pytest.raises(InputError, match="no submission"):
        check([("a", "   ...   ")])
    with pytest.raises(SettingsError, match="min_words"):
        check([("a", "words")], settings=CheckSettings(min_words=0))


def test_every_input_is_in_the_ledger(small_class):
    subs, refs, _ = small_class
    (subs / "picture.png").write_bytes(b"\x89PNG")
    result = check([str(subs)], against=[str(refs)])
    roles = {(row["role"], row["input"]): row["status"] for row in result.ledger}
    assert roles[("submission", "picture.png")] == "skipped"
    assert roles[("reference", "brisk.txt")] == "read"
