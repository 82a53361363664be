"""Fixtures of the report tests: the demo audit, as the audit gives it and without passages."""

from __future__ import annotations

import copy

import pytest

import dedup
from dedup import AuditSettings

DEMO_SETTINGS = AuditSettings(
    measure="containment", threshold=0.9, prefer=("current/**",), id_field="id", text_fields=("body",)
)


@pytest.fixture(scope="session")
def demo_audit(demo_path):
    """The demo audit, once per session: copy it before changing it (see `demo_result`)."""
    return dedup.audit([str(demo_path)], DEMO_SETTINGS)


@pytest.fixture
def demo_result(demo_audit):
    """A copy of the demo audit, passages and covered shares included."""
    return copy.deepcopy(demo_audit)


@pytest.fixture(params=["none", "empty"])
def demo_without_passages(demo_audit, request):
    """A copy of the demo audit with no passage data: none at all (a result made without the
    passage stage), or an empty list (the stage found nothing)."""
    result = copy.deepcopy(demo_audit)
    result.passages = None if request.param == "none" else []
    for pair in result.pairs:
        pair.pop("left_covered", None)
        pair.pop("right_covered", None)
    return result
