"""dedup: near-duplicate and similarity audits of bodies of text.

>>> import dedup
>>> result = dedup.audit(["fixtures/demo/kb"], dedup.AuditSettings(threshold=0.8))
>>> result.summary["exact_groups"], result.clusters[0]["size"]
(3, 3)

``result.write("audit-out")`` writes the same files as ``dedup audit --out audit-out``;
``dedup.check(submissions, against=references)`` checks submissions for matching text.

The tool only reads its inputs. A similarity flag is evidence for a person to review,
not a verdict; proposed actions are proposals.
"""

from ._version import __version__
from .ingest import InputError
from .settings import AuditSettings, SettingsError

__all__ = [
    "__version__",
    "audit",
    "AuditResult",
    "AuditSettings",
    "SettingsError",
    "InputError",
    "check",
    "CheckResult",
    "CheckSettings",
    "Index",
]


def __getattr__(name: str):
    # The pipeline pulls in numba and scipy; load it only when asked for.
    if name in ("audit", "AuditResult"):
        from . import api

        return getattr(api, name)
    if name == "Index":
        from .corpus_index import Index

        return Index
    if name in ("check", "CheckResult", "CheckSettings"):
        # The package `dedup.check` is callable: ``dedup.check(...)`` runs a check.
        import importlib

        checking = importlib.import_module(".check", __name__)
        return checking if name == "check" else getattr(checking, name)
    raise AttributeError(f"module 'dedup' has no attribute {name!r}")
