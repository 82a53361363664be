"""Stretches left out of the counted text: quotations, block quotes, reference lists."""

from __future__ import annotations

from dedup.check.regions import exclusion_regions, quoted_regions, reference_list_region


def test_quotation_marks_of_several_kinds_are_found():
    text = 'A "straight" b \u201ccurly\u201d c \u00abangled\u00bb d.'
    assert [text[r.start : r.end] for r in quoted_regions(text)] == [
        '"straight"',
        "\u201ccurly\u201d",
        "\u00abangled\u00bb",
    ]


def test_a_quotation_does_not_cross_a_blank_line():
    text = 'He said "this opens\n\nand never closes. Later "a" word.'
    found = [text[r.start : r.end] for r in quoted_regions(text)]
    assert found == ['"a"']


def test_a_citation_after_the_quotation_marks_it_cited():
    cited = quoted_regions('"words of another" (Hale 2011, p. 4).')
    bare = quoted_regions('"words of another" and then mine.')
    assert cited[0].cited and not bare[0].cited


def test_block_quotes_are_whole_lines():
    text = "Intro.\n> first quoted line\n> second line\nAfter."
    (r,) = quoted_regions(text)
    assert text[r.start : r.end] == "> first quoted line\n> second line"


def test_the_reference_list_runs_from_its_heading_to_the_end():
    text = "Body text.\n\nWorks Cited\nHale, B. (2011). Canals."
    r = reference_list_region(text)
    assert r is not None and text[r.start :].startswith("Works Cited") and r.end == len(text)
    assert reference_list_region("The references in this essay are few.") is None


def test_switches_turn_each_kind_off():
    text = 'A "quote" here.\n\nReferences\nHale 2011.'
    assert {r.reason for r in exclusion_regions(text)} == {"quoted", "reference list"}
    assert {r.reason for r in exclusion_regions(text, quotes=False)} == {"reference list"}
    assert exclusion_regions(text, quotes=False, reference_list=False) == []
