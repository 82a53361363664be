"""Engines run the audit's plan (`dedup.plan`): ``local`` on one machine."""

from .local import run_audit

__all__ = ["run_audit", "ENGINES"]

ENGINES = ("local",)
