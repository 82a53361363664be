"""Ingest: files and folders → documents, with a ledger entry for every input."""

from .ledger import STATUSES, LedgerEntry, summarize
from .readers import FORMATS, RawDocument, decode_text, format_of
from .walk import InputError, iter_documents

__all__ = [
    "STATUSES",
    "LedgerEntry",
    "summarize",
    "FORMATS",
    "RawDocument",
    "decode_text",
    "format_of",
    "InputError",
    "iter_documents",
]
