"""The ledger: one line for every input, so nothing is lost without a trace.

Every file found, every member of an archive (``archive.zip!/path/in/archive``) and
every record of a records file (JSONL, JSON, CSV, TSV, Parquet, mbox) ends in exactly
one entry with a status:

    read       its text became a document
    truncated  its text became a document, cut at the text length limit
    empty      it was read but has no text (after normalization)
    skipped    it was not read; ``reason`` says why in words a person understands
    refused    it was not read because reading it would be unsafe: an archive member
               with a path outside the archive, or an archive or compressed file that
               would expand beyond its limits
"""

from __future__ import annotations

import re
from collections import Counter
from dataclasses import dataclass

__all__ = ["LedgerEntry", "STATUSES", "summarize", "reason_kind"]

STATUSES = ("read", "empty", "skipped", "truncated", "refused")
_ADVICE = re.compile(r"\s*\([^()]*\)$")


@dataclass(slots=True)
class LedgerEntry:
    """What became of one input (a file, an archive member, or one record of a records file)."""

    input: str
    status: str
    reason: str = ""
    format: str = ""
    size: int | None = None
    encoding: str = ""
    record: str = ""
    document_id: str = ""

    def to_dict(self) -> dict:
        return {
            "input": self.input,
            "status": self.status,
            "reason": self.reason,
            "format": self.format,
            "size": self.size,
            "encoding": self.encoding,
            "record": self.record,
            "document_id": self.document_id,
        }


def reason_kind(entry: LedgerEntry) -> str:
    """The kind of a reason without its details, for counting: ``file too large``, not the size.

    >>> reason_kind(LedgerEntry("a.csv", "skipped", "row 3: 4 cells where the header has 2", record="row 3"))
    '4 cells where the header has 2'
    >>> reason_kind(LedgerEntry("b.txt", "skipped", "file too large: 9 bytes, limit 5"))
    'file too large'
    >>> reason_kind(LedgerEntry("c.pdf", "skipped", "no text layer — scanned? (3 pages)"))
    'no text layer — scanned?'
    """
    reason = entry.reason
    # Record reasons start with the record's label, which differs on every line.
    if entry.record and reason.startswith(entry.record + ": "):
        reason = reason[len(entry.record) + 2 :]
    # Details follow a colon; advice and counts stand in closing parentheses.
    return _ADVICE.sub("", reason.split(":")[0])


def summarize(entries: list[LedgerEntry]) -> dict:
    """Counts per status (they add up to the number of entries) and reasons for not reading."""
    by_status = Counter(e.status for e in entries)
    reasons = Counter(reason_kind(e) for e in entries if e.status in ("skipped", "refused"))
    return {
        "entries": len(entries),
        "files": len({e.input for e in entries}),
        **{status: by_status.get(status, 0) for status in STATUSES},
        "skip_reasons": dict(sorted(reasons.items())),
    }
