"""A scheduled audit against an index: apply the stored reviews, compare, record.

`track_audit` is what ``dedup audit --index FILE`` runs after a normal audit and before
the outputs are written, so that the written audit carries the reviews and the delta.
"""

from __future__ import annotations

import os

from .decisions import apply_decisions
from .history import fails, record_audit
from .store import open_index

__all__ = ["track_audit"]


def track_audit(index_path: str, result, fail_on: str = "none") -> tuple[dict, bool]:
    """Mark ``result`` with the stored decisions, compare it with the previous audit, record it.

    Parameters
    ----------
    index_path : str
        The index; created (holding no documents yet) when it does not exist, so the
        first scheduled audit needs no build.
    result : dedup.AuditResult
        A fresh audit; changed in place by `apply_decisions`.
    fail_on : {"none", "any", "new", "grown"}
        See `dedup.index.history.fails`.

    Returns
    -------
    delta : dict
        The block of `record_audit`, with ``review``: the counts of `apply_decisions`.
    failed : bool
        Whether ``fail_on`` is met (the command line then exits with code 1).

    Raises
    ------
    IndexFileError
        The index cannot be used (not an index, newer, damaged).
    """
    if os.path.exists(index_path):
        index = open_index(index_path)
    else:
        index = open_index(index_path, result.settings, create=True)
    with index:
        review = apply_decisions(index, result)
        delta = record_audit(index, result)
    delta["review"] = review
    return delta, fails(delta, fail_on)
