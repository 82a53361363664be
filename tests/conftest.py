"""Shared fixtures: small corpora written to temporary folders, and the demo corpus."""

from __future__ import annotations

import os
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

DEMO = ROOT / "fixtures" / "demo" / "kb"


@pytest.fixture
def write_corpus(tmp_path):
    """Write ``{relative path: text or bytes}`` under a temporary folder and return it."""

    def write(files: dict[str, str | bytes]) -> Path:
        root = tmp_path / "corpus"
        for rel, content in files.items():
            path = root / rel
            path.parent.mkdir(parents=True, exist_ok=True)
            if isinstance(content, bytes):
                path.write_bytes(content)
            else:
                path.write_text(content, encoding="utf-8")
        root.mkdir(exist_ok=True)
        return root

    return write


@pytest.fixture(scope="session")
def demo_path() -> Path:
    if not DEMO.is_dir():
        pytest.skip(f"demo corpus missing at {DEMO}")
    return DEMO


@pytest.fixture
def snapshot():
    """Content and modification time of every file under a folder."""

    def take(folder: Path) -> dict[str, tuple[bytes, int]]:
        out = {}
        for dirpath, _, names in os.walk(folder):
            for name in names:
                p = Path(dirpath) / name
                out[str(p)] = (p.read_bytes(), p.stat().st_mtime_ns)
        return out

    return take
