"""A scheduled audit against an index: refresh the index, apply the reviews, compare, record.

`track_audit` is what ``dedup audit --index FILE`` runs after a normal audit and before
the outputs are written, so that the written audit carries the reviews and the delta.
In one write transaction it

1. brings the index's documents, texts and search statistics up to date over the
   audit's own inputs (`dedup.index.indexing.run_in`: the same reading and normalize
   steps, so the index holds the documents the audit read, and ``dedup similar``
   searches them);
2. marks the audit with the stored review decisions (`apply_decisions`);
3. gives its clusters stable ids, compares it with the baseline or the latest audit,
   and records it (`record_audit`), accepting it as the baseline when asked.

Killed at any point, the index is as it was before. The index keeps its own sketch
settings (shingles, MinHash, hashed TF-IDF space): they decide what its stored sketches
are, not what the audit found; the reading and template settings are the audit's.
"""

from __future__ import annotations

import os
import sqlite3
from typing import TYPE_CHECKING

from ..progress import Progress
from ..settings import AuditSettings
from .decisions import apply_decisions
from .history import fails, record_audit
from .indexing import checkpoint, run_in
from .store import TEMPLATE_KEYS, Index, open_index, read_keys

if TYPE_CHECKING:
    from ..result import AuditResult

__all__ = ["track_audit", "refresh_settings"]

# How many document ids the index and the audit disagree on are named (the count is whole).
_NAMED = 20


def refresh_settings(index: Index, audit_settings: AuditSettings) -> AuditSettings:
    """The settings a refresh runs with: the index's sketch settings, the audit's reading and
    template settings."""
    given = {key: getattr(audit_settings, key) for key in (*TEMPLATE_KEYS, *read_keys())}
    return index.settings.replace(**given).validate()


def _refresh(index: Index, db: sqlite3.Connection, result: AuditResult, progress: Progress) -> dict:
    """Step 1: the index's documents over the audit's inputs; what the run did, and the
    documents whose content hash differs between the index and the audit (a file changed
    between the two readings)."""
    if "-" in result.inputs:
        return {"refreshed": False, "reason": "stdin"}
    summary = run_in(index, db, result.inputs, refresh_settings(index, result.settings), progress)
    indexed = dict(db.execute("SELECT doc_id, content_hash FROM documents WHERE status = 'present'"))
    audited = {d["id"]: d["content_hash"] for d in result.documents}
    differ = sorted(d for d in indexed.keys() | audited.keys() if indexed.get(d) != audited.get(d))
    return {
        "refreshed": True,
        "run": summary.run,
        "kind": summary.kind,
        "documents": summary.documents,
        "added": summary.added,
        "changed": summary.changed,
        "removed": summary.removed,
        "unchanged": summary.unchanged,
        "sketched": summary.sketched,
        "texts": summary.texts,
        "differ": len(differ),
        "differ_ids": differ[:_NAMED],
    }


def track_audit(
    index_path: str,
    result: AuditResult,
    fail_on: str = "none",
    *,
    accept: bool = False,
    refresh: bool = True,
    progress: Progress | None = None,
) -> tuple[dict, bool]:
    """Refresh the index, mark ``result`` with the stored decisions, compare, record.

    Parameters
    ----------
    index_path : str
        The index; created (with the audit's settings) when it does not exist, so the
        first scheduled audit needs no build. A ``tfidf_features`` the audit left unset
        (its exact vocabulary) gives the new index 2**20 hashed columns, as a build does
        (`dedup.index.store.index_choices`).
    result : dedup.AuditResult
        A fresh audit; changed in place (reviews, proposed actions of reviewed members,
        ``stable_id`` of every cluster).
    fail_on : {"none", "any", "new", "grown", "changed"}
        See `dedup.index.history.fails`.
    accept : bool
        Accept this audit as the baseline.
    refresh : bool
        Bring the index's documents up to date over the audit's inputs (step 1).
    progress : Progress, optional
        Told the steps of the refresh.

    Returns
    -------
    delta : dict
        The block of `record_audit`, with ``review`` (the counts of `apply_decisions`)
        and ``index`` (what the refresh did, or why it did not run).
    failed : bool
        Whether ``fail_on`` is met (the command line then exits with code 1).

    Raises
    ------
    IndexFileError
        The index cannot be used (not an index, newer, damaged, busy).
    dedup.InputError
        An input is gone since the audit read it.

    Notes
    -----
    Cost: the refresh reads again the files changed since the last run (by modification
    time) and sketches their new texts; the rest is O(documents + members).
    """
    if os.path.exists(index_path):
        index = open_index(index_path)
    else:
        index = open_index(index_path, result.settings, create=True)
    with index:
        with index.writing() as db:
            refreshed = _refresh(index, db, result, progress or Progress.silent()) if refresh else None
            review = apply_decisions(db, result)
            delta = record_audit(db, result, accept=accept)
        checkpoint(index)
    delta["review"] = review
    delta["index"] = refreshed or {"refreshed": False, "reason": "not-asked"}
    return delta, fails(delta, fail_on)
