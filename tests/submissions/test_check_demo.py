"""The demo class (fixtures/demo-class): every planted situation comes out as described."""

from __future__ import annotations

import pytest

from dedup.check import CheckSettings, check


@pytest.fixture(scope="module")
def demo(demo_class):
    result = check(
        [str(demo_class / "submissions")],
        against=[str(demo_class / "references")],
        settings=CheckSettings(templates=(str(demo_class / "assignment.txt"),)),
    )
    return result, {r["submission"]: r for r in result.submissions}


def _counted(result, submission):
    return {m["source"] for m in result.matches if m["submission"] == submission and m["status"] == "counted"}


def test_the_copied_and_the_paraphrased_passages_are_counted(demo):
    result, records = demo
    assert _counted(result, "ada-finch.txt") == {"hollis-2019-shared-harvests.txt"}
    assert _counted(result, "bram-oduya.txt") == {"renke-2021-heirloom-valleys.txt"}
    assert records["ada-finch.txt"]["top_source"] == "hollis-2019-shared-harvests.txt"


def test_the_quoted_passage_is_excluded(demo):
    result, records = demo
    rows = [m for m in result.matches if m["submission"] == "carys-lindqvist.txt" and m["reason"] == "quoted"]
    assert [(m["source"], m["cited"]) for m in rows] == [("marsh-2020-lending-trust.txt", True)]
    assert records["carys-lindqvist.txt"]["passages"] == 0


def test_two_students_sharing_a_section_are_one_group_and_a_shared_source_links_no_one(demo):
    result, records = demo
    assert [g["members"] for g in result.groups] == [["dara-mbeki.txt", "emil-vasquez.txt"]]
    assert records["ada-finch.txt"]["group"] is None and records["gwen-talbot.txt"]["group"] is None
    assert {
        "source": "hollis-2019-shared-harvests.txt",
        "submissions": ["ada-finch.txt", "gwen-talbot.txt"],
    } in (result.shared_sources)
    assert records["finn-adeyemi.txt"]["share_matched"] == 0.0
