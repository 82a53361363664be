"""Fixtures of the class check: small invented classes written to temporary folders."""

from __future__ import annotations

from pathlib import Path

import pytest
from check_texts import OTHER_SOURCE, SHARED, SOURCE, essay

ROOT = Path(__file__).resolve().parents[2]
DEMO_CLASS = ROOT / "fixtures" / "demo-class"


@pytest.fixture
def small_class(tmp_path):
    """Submissions and references on disk: a copy, a quotation, two students sharing a section, a clean one."""
    subs = tmp_path / "subs"
    refs = tmp_path / "refs"
    subs.mkdir()
    refs.mkdir()
    (refs / "brisk.txt").write_text(SOURCE + "\n", encoding="utf-8")
    (refs / "tolland.txt").write_text(OTHER_SOURCE + "\n", encoding="utf-8")
    texts = {
        "copier.txt": essay(
            "My essay begins with a short opening of my own words.", SOURCE, "And it ends here."
        ),
        "quoter.txt": essay(
            "I rely on one account of the canal.", f'As the chronicle says, "{SOURCE}" (Hale 2011, p. 4).'
        ),
        "pair-a.txt": essay(
            "First student writing about markets and ice.", SHARED, "A closing line of mine."
        ),
        "pair-b.txt": essay("Second student, an entirely different opening.", SHARED, "Another ending."),
        "clean.txt": essay(
            "Nothing in this text comes from anywhere else; it describes a walk past the old mill "
            "on a foggy morning, the smell of wet stone, and a heron standing still in the reeds."
        ),
    }
    for name, text in texts.items():
        (subs / name).write_text(text, encoding="utf-8")
    return subs, refs, texts


@pytest.fixture(scope="session")
def demo_class() -> Path:
    if not DEMO_CLASS.is_dir():
        pytest.skip(f"demo class missing at {DEMO_CLASS}")
    return DEMO_CLASS
