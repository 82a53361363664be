"""No module of dedup imports a private (underscore) name from another dedup package.

A stage uses another stage only through its public names; a helper two stages need
lives in a shared module (`dedup.kernels`) under a public name. Checked on the source
(the AST of every module), so a violation fails here before it is ever imported.
"""

from __future__ import annotations

import ast
from pathlib import Path

import dedup

ROOT = Path(dedup.__file__).parent
# Modules of the package root that every package may use, whatever their names.
SHARED_ROOT_MODULES = {"dedup._version"}


def _is_private(name: str) -> bool:
    return name.startswith("_") and not (name.startswith("__") and name.endswith("__"))


def _module_name(path: Path) -> str:
    parts = path.relative_to(ROOT.parent).with_suffix("").parts
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


def _package_of(module: str) -> str:
    """``dedup.features.hashing`` -> ``dedup.features``; a root module is its own package."""
    return ".".join(module.split(".")[:2])


def _resolve(node: ast.ImportFrom, module: str, is_package: bool) -> str:
    if node.level == 0:
        return node.module or ""
    base = module.split(".")
    base = base if is_package else base[:-1]
    base = base[: len(base) - (node.level - 1)]
    return ".".join(base + ([node.module] if node.module else []))


def private_imports(source: str, module: str, is_package: bool = False) -> list[str]:
    """``importer: imported`` for every private name or module taken from another dedup package."""
    found = []
    home = _package_of(module)
    for node in ast.walk(ast.parse(source)):
        if isinstance(node, ast.ImportFrom):
            target = _resolve(node, module, is_package)
            names = [f"{target}.{alias.name}" for alias in node.names]
        elif isinstance(node, ast.Import):
            names = [alias.name for alias in node.names]
        else:
            continue
        for name in names:
            if not name.startswith("dedup.") or _package_of(name) == home:
                continue
            if name in SHARED_ROOT_MODULES or any(name.startswith(m + ".") for m in SHARED_ROOT_MODULES):
                continue
            if any(_is_private(part) for part in name.split(".")[1:]):
                found.append(f"{module}: {name}")
    return found


def test_the_check_finds_private_imports_across_packages():
    # The check itself can fail: each of these takes a private name from another package.
    assert private_imports("from ..features.tokenize import _decode", "dedup.normalize.x")
    assert private_imports("from ..sketch import tfidf, _x", "dedup.index.x")
    assert private_imports("from dedup.sketch.tfidf import _term_counts", "dedup.index.x")
    assert private_imports("from .._private import thing", "dedup.index.x")
    assert private_imports("import dedup.features._impl", "dedup.index.x")
    assert private_imports("from ..report import _words", "dedup.cluster", is_package=True)
    # Allowed: private names inside a package, public names across, the version module.
    assert not private_imports("from .hashing import _hash_bytes", "dedup.features.tokenize")
    assert not private_imports("from ..kernels.hash64 import hash_bytes as _h", "dedup.normalize.lines")
    assert not private_imports("from .._version import __version__", "dedup.report.html")
    assert not private_imports("from . import _helpers", "dedup.cluster", is_package=True)


def test_no_module_imports_a_private_name_from_another_package():
    modules = sorted(ROOT.rglob("*.py"))
    assert len(modules) > 20  # the walk found the package
    found = []
    for path in modules:
        found += private_imports(
            path.read_text(encoding="utf-8"), _module_name(path), is_package=path.name == "__init__.py"
        )
    assert found == []
