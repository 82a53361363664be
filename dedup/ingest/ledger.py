"""The ledger: one line for every input, so nothing is lost without a trace.

Every file found (and every record of a JSONL/CSV file) ends in exactly one entry with
a status:

    read      its text became a document
    empty     it was read but has no text (after normalization)
    skipped   it was not read; ``reason`` says why in words a person understands
"""

from __future__ import annotations

from collections import Counter
from dataclasses import asdict, dataclass

__all__ = ["LedgerEntry", "STATUSES", "summarize"]

STATUSES = ("read", "empty", "skipped")


@dataclass
class LedgerEntry:
    """What became of one input (a file, or one record of a records file)."""

    input: str
    status: str
    reason: str = ""
    format: str = ""
    size: int | None = None
    encoding: str = ""
    record: str = ""
    document_id: str = ""

    def to_dict(self) -> dict:
        return asdict(self)


def summarize(entries: list[LedgerEntry]) -> dict:
    """Counts per status (they add up to the number of entries) and skip reasons."""
    by_status = Counter(e.status for e in entries)
    reasons = Counter(e.reason.split(":")[0] for e in entries if e.status == "skipped")
    return {
        "entries": len(entries),
        "files": len({e.input for e in entries}),
        **{status: by_status.get(status, 0) for status in STATUSES},
        "skip_reasons": dict(sorted(reasons.items())),
    }
