"""Ingest: files, folders and archives → documents, with a ledger entry for every input."""

from .document import Item, RawDocument
from .encoding import decode_text
from .ledger import STATUSES, LedgerEntry, summarize
from .memory import Records, as_inputs, documents_of, input_names
from .options import ReadOptions
from .readers import FORMATS, format_of
from .walk import InputError, iter_documents, leaving_out

__all__ = [
    "STATUSES",
    "LedgerEntry",
    "summarize",
    "FORMATS",
    "Item",
    "RawDocument",
    "ReadOptions",
    "decode_text",
    "format_of",
    "InputError",
    "iter_documents",
    "leaving_out",
    "Records",
    "as_inputs",
    "documents_of",
    "input_names",
]
