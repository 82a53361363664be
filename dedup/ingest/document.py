"""A document as read, and the input it is read from.

Every reader gets an `Item` (one file or archive member of a known format) and yields
`Outcome` pairs: a document (or None) with the ledger entry that accounts for it. A
reader never raises for bad input; what it cannot read becomes an entry with a reason.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import NamedTuple

from .ledger import LedgerEntry

__all__ = ["RawDocument", "Item", "Outcome"]


@dataclass(slots=True)
class RawDocument:
    """One document as read: its id, its text and what is known about it."""

    id: str
    text: str
    source: str
    format: str
    size: int
    encoding: str
    title: str = ""
    record: str = ""
    mtime: float | None = None
    metadata: dict = field(default_factory=dict)
    # Filled by a ``prepare`` step where the document was read (see `iter_documents`).
    prepared: tuple | None = None
    # The text's UTF-8 bytes when the reader has them: bytes read that decoded as UTF-8
    # and that the reader kept unchanged (plain text); spares encoding the text again.
    utf8: bytes | None = None


class Item(NamedTuple):
    """One input to read.

    Attributes
    ----------
    id : str
        Id of its document (records add ``#key``).
    source : str
        Its name in the ledger: the path, or ``archive.zip!/member``.
    format : str
        Format name (see ``readers.FORMATS``).
    size : int
        Size in bytes (of the member, uncompressed, for archive members).
    mtime : float or None
        Modification time, seconds since the epoch.
    depth : int
        How many archives it is inside.
    """

    id: str
    source: str
    format: str
    size: int
    mtime: float | None = None
    depth: int = 0

    def entry(self, status: str, reason: str = "", *, encoding: str = "", record: str = "") -> LedgerEntry:
        """A ledger entry for this input (or one of its records)."""
        return LedgerEntry(self.source, status, reason, self.format, self.size, encoding, record)

    def document(
        self,
        text: str,
        *,
        title: str = "",
        encoding: str = "",
        record: str = "",
        key: str | None = None,
        metadata: dict | None = None,
        reason: str = "",
    ) -> tuple[RawDocument, LedgerEntry]:
        """A document and its "read" entry; ``key`` names a record within the input."""
        doc_id = self.id if key is None else f"{self.id}#{key}"
        doc = RawDocument(
            doc_id,
            text,
            self.source,
            self.format,
            self.size,
            encoding,
            title,
            record,
            self.mtime,
            metadata or {},
        )
        entry = self.entry("read", reason, encoding=encoding, record=record)
        entry.document_id = doc_id
        return doc, entry


# What readers yield: a document (None when nothing was read) and its ledger entry.
Outcome = tuple[RawDocument | None, LedgerEntry]
