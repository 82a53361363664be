"""What a check reads: submissions, references and templates, each with its ledger.

An input is a path (file, folder or archive, read by `dedup.ingest.iter_documents` with
its limits and its ledger) or an ``(id, text)`` pair given in memory; a pandas DataFrame
or pyarrow Table (or `dedup.ingest.Records`) gives its rows, as `dedup.audit` reads them. Every input ends in
the ledger with its role (``submission``, ``reference``, ``template``), so nothing is
left out without a trace; a document without a single word is recorded as empty.

Cost: that of reading; texts are yielded one at a time (references are never all held).
"""

from __future__ import annotations

import os
from collections.abc import Iterable, Iterator, Sequence
from typing import Any

from ..ingest import LedgerEntry, ReadOptions, Records, as_inputs, iter_documents
from ..ingest.memory import is_table
from .settings import CheckSettings

__all__ = ["Input", "read_texts", "index_texts", "ledger_rows", "is_path", "INDEX_FORMAT"]

# The format name, in the ledger, of a reference read from an index.
INDEX_FORMAT = "index"

# An input: a path, or an (id, text) pair.
Input = Any


def is_path(item: Input) -> bool:
    """Whether ``item`` is a path (``str`` or ``os.PathLike``) rather than an (id, text) pair."""
    return isinstance(item, (str, os.PathLike))


def _has_words(text: str) -> bool:
    return any(ch.isalnum() for ch in text)


def read_texts(
    items: Iterable[Input], settings: CheckSettings, role: str, ledger: list[tuple[str, LedgerEntry]]
) -> Iterator[tuple[str, str]]:
    """``(id, text)`` of every document of ``items``, in order; each input's entry goes to ``ledger``.

    Paths are read with `iter_documents` (in runs of consecutive paths, so ids stay relative to
    their common folder); pairs are taken as given. Raises `dedup.InputError` for a path that
    does not exist.
    """
    if is_table(items):
        yield from _read_rows(as_inputs(items), settings, role, ledger)
        return
    run: list[str] = []
    for item in items:
        if is_path(item):
            run.append(os.fspath(item))
            continue
        yield from _read_paths(run, settings, role, ledger)
        run = []
        ident, text = item
        ident, text = str(ident), str(text)
        if _has_words(text):
            ledger.append((role, LedgerEntry(ident, "read", "", "record", len(text), "", "", ident)))
            yield ident, text
        else:
            ledger.append((role, LedgerEntry(ident, "empty", "no words", "record", len(text), "", "", "")))
    yield from _read_paths(run, settings, role, ledger)


def _read_rows(
    records: Records, settings: CheckSettings, role: str, ledger: list[tuple[str, LedgerEntry]]
) -> Iterator[tuple[str, str]]:
    """The rows of a table, each a text with its ledger entry (as `dedup.audit` reads them)."""
    entries: list[LedgerEntry] = []
    taken = 0
    for doc in records.documents(entries, ReadOptions(max_text_chars=settings.max_text_chars)):
        ledger.extend((role, e) for e in entries[taken:])
        taken = len(entries)
        if _has_words(doc.text):
            yield doc.id, doc.text
        else:
            entries[-1].status, entries[-1].reason = "empty", "no words"
    ledger.extend((role, e) for e in entries[taken:])


def _read_paths(
    paths: Sequence[str], settings: CheckSettings, role: str, ledger: list[tuple[str, LedgerEntry]]
) -> Iterator[tuple[str, str]]:
    if not paths:
        return
    entries: list[LedgerEntry] = []
    taken = 0
    for doc in iter_documents(
        paths,
        id_field=settings.id_field,
        text_fields=settings.text_fields,
        max_file_bytes=settings.max_file_bytes,
        max_text_chars=settings.max_text_chars,
        include=settings.include,
        exclude=settings.exclude,
        keep_quote_marks=settings.exclude_quotes,
        ledger=entries,
    ):
        ledger.extend((role, e) for e in entries[taken:])
        taken = len(entries)
        if _has_words(doc.text):
            yield doc.id, doc.text
        elif entries and entries[-1].document_id == doc.id and entries[-1].status == "read":
            entries[-1].status, entries[-1].reason = "empty", "no words"
    ledger.extend((role, e) for e in entries[taken:])


def index_texts(path: str, role: str, ledger: list[tuple[str, LedgerEntry]]) -> Iterator[tuple[str, str]]:
    """``(id, text)`` of every distinct text of the index at ``path``, in its stored form.

    The index keeps texts normalized (lower case, markup removed), so passages in them show
    that form and their offsets point into it. A document whose text another indexed
    document has is compared once, under the first id, and says so in the ledger. Raises
    `dedup.index.IndexFileError` when ``path`` is not a usable index.
    """
    from ..index import open_index
    from ..index.stored import stored_texts

    with open_index(path) as index:
        for stored in stored_texts(index):
            first, *copies = stored.doc_ids
            size = len(stored.text)
            ledger.append((role, LedgerEntry(first, "read", "", INDEX_FORMAT, size, "", "", first)))
            for copy in copies:
                reason = f"same text as {first} in the index: compared once, under that id"
                ledger.append((role, LedgerEntry(copy, "read", reason, INDEX_FORMAT, size, "", "", first)))
            yield first, stored.text


def ledger_rows(ledger: Sequence[tuple[str, LedgerEntry]]) -> list[dict]:
    """The ledger as rows: the role, then the fields of each entry."""
    return [{"role": role, **entry.to_dict()} for role, entry in ledger]
