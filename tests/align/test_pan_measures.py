"""Character-level measures of Potthast, Stein, Barrón-Cedeño, Rosso (2010), "An Evaluation
Framework for Plagiarism Detection" (COLING 2010), on tiny cases computed by hand.

A case or detection counts the characters it names in both documents: a case of 100
suspicious and 100 source characters has |s| = 200.
"""

from __future__ import annotations

import math

import pytest

from benchmarks.pan_measures import Annotation, detects, granularity, measures, precision, recall


def A(plg: tuple[int, int], src: tuple[int, int], plg_doc: str = "s1", src_doc: str = "r1") -> Annotation:
    return Annotation(plg_doc, plg[0], plg[1], src_doc, src[0], src[1])


CASE = A((0, 100), (0, 100))


def test_exact_detection_scores_one():
    m = measures([CASE], [CASE])
    assert (m["precision"], m["recall"], m["granularity"], m["plagdet"]) == (1.0, 1.0, 1.0, 1.0)


def test_half_detected():
    # |s ⊓ r| = 50 + 50 of |s| = 200; all of r lies in s.
    m = measures([CASE], [A((0, 50), (0, 50))])
    assert m["recall"] == 0.5 and m["precision"] == 1.0
    assert m["plagdet"] == pytest.approx(2 * 0.5 / 1.5)


def test_split_detection_costs_granularity():
    m = measures([CASE], [A((0, 50), (0, 50)), A((50, 100), (50, 100))])
    assert m["recall"] == 1.0 and m["precision"] == 1.0 and m["granularity"] == 2.0
    assert m["plagdet"] == pytest.approx(1 / math.log2(3))


def test_overshoot_costs_precision():
    # |r| = 200 + 100, of which 100 + 100 lie in s.
    m = measures([CASE], [A((0, 200), (0, 100))])
    assert m["precision"] == pytest.approx(2 / 3) and m["recall"] == 1.0
    assert m["plagdet"] == pytest.approx(0.8)


def test_overlapping_detections_count_characters_once():
    m = measures([CASE], [A((0, 60), (0, 60)), A((40, 100), (40, 100))])
    assert m["recall"] == 1.0 and m["granularity"] == 2.0


def test_detection_must_overlap_both_sides_of_the_same_documents():
    assert not detects(A((0, 50), (200, 300)), CASE)
    assert not detects(A((0, 50), (0, 50), src_doc="other"), CASE)
    assert not detects(A((100, 150), (0, 50)), CASE)  # touching is not overlapping
    m = measures([CASE], [A((0, 50), (200, 300))])
    assert (m["precision"], m["recall"], m["granularity"], m["plagdet"]) == (0.0, 0.0, 1.0, 0.0)


def test_one_detection_over_two_cases():
    cases = [CASE, A((200, 300), (200, 300))]
    m = measures(cases, [A((0, 300), (0, 300))])
    # Each case fully found; the detection holds 400 case characters of 600.
    assert m["recall"] == 1.0 and m["precision"] == pytest.approx(400 / 600) and m["granularity"] == 1.0


def test_recall_is_macro_averaged_over_cases():
    # Case 1 found whole, case 2 (three times longer) not at all: (1 + 0) / 2, not 200 / 800.
    cases = [CASE, A((0, 300), (0, 300), plg_doc="s2")]
    assert recall(cases, [CASE]) == 0.5
    assert granularity(cases, [CASE]) == 1.0


def test_precision_is_macro_averaged_over_detections():
    # Detection 1 all inside the case, detection 2 (other documents) none: (1 + 0) / 2.
    assert precision([CASE], [CASE, A((0, 900), (0, 900), plg_doc="s9")]) == 0.5


def test_no_detections_and_no_cases():
    assert measures([CASE], [])["plagdet"] == 0.0
    assert measures([], [CASE])["precision"] == 0.0
