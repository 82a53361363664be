"""Readers: from one input (a file or an archive member) of a known format to documents.

This module chooses the reader for a format and applies what holds for every format:
a reader that fails is recorded as a skip with the reason (never an exception for the
caller), texts longer than the limit are cut and marked "truncated", texts without
any non-space character are marked "empty", and text the output files could not hold
(lone surrogates from JSON escapes) is repaired. Archives hand each member back to
`read_bytes`, so a member is read exactly like a file.

A name that ends in a compression suffix after a known format (``corpus.jsonl.gz``,
``notes.txt.zst``: `format_and_compression`) is read in that format through the
decompressor (`dedup.ingest.compressed`), on disk or as an archive member. Record
files (JSONL, CSV, TSV) that are compressed or larger than ``max_file_bytes`` are read
a record at a time (`dedup.ingest.record_stream`), Parquet a batch of rows at a time.
"""

from __future__ import annotations

import io
from collections.abc import Callable, Iterator, Sequence
from typing import BinaryIO

from .archives import Counted, Member, iter_tar, iter_zip, read_bounded
from .budget import ExpansionBudget, ExpansionExceeded, MemberTally, TooCostly, WorkBudget
from .columnar import read_parquet
from .compressed import COMPRESSIONS, compressed_format, damage, decompressing, unsupported_compressed
from .document import Item, Outcome, RawDocument
from .encoding import damaged_utf8, decode_text
from .filters import member_reason
from .html_text import declared_charset, html_to_text
from .ledger import LedgerEntry
from .mail import read_eml, read_mbox, stream_mbox
from .markup import MARKUP_FORMATS, first_line_title, reduce_markup
from .office import read_docx, read_odt
from .optional import MissingParser
from .options import ReadOptions
from .pdf import read_pdf
from .record_stream import STREAMED_RECORD_FORMATS, stream_records
from .records import csv_records, json_records, jsonl_records, record_outcomes

__all__ = [
    "RawDocument",
    "FORMATS",
    "ARCHIVE_FORMATS",
    "STREAMED_FORMATS",
    "STREAMED_RECORD_FORMATS",
    "LARGE_FILE_FORMATS",
    "format_of",
    "format_and_compression",
    "decode_text",
    "read_bytes",
    "read_stream",
    "read_file_bytes",
]

# Extension → format name. Longer extensions first, so ".tar.gz" wins over ".gz".
FORMATS = {
    ".tar.gz": "tar.gz",
    ".tar.bz2": "tar.bz2",
    ".tar.xz": "tar.xz",
    ".tar.zst": "tar.zst",
    ".tgz": "tar.gz",
    ".tbz2": "tar.bz2",
    ".txz": "tar.xz",
    ".tzst": "tar.zst",
    ".tar": "tar",
    ".zip": "zip",
    ".txt": "text",
    ".text": "text",
    ".md": "markdown",
    ".markdown": "markdown",
    ".rst": "restructuredtext",
    ".adoc": "asciidoc",
    ".asciidoc": "asciidoc",
    ".asc": "asciidoc",
    ".html": "html",
    ".htm": "html",
    ".xhtml": "html",
    ".docx": "docx",
    ".odt": "odt",
    ".pdf": "pdf",
    ".eml": "email",
    ".mbox": "mbox",
    ".jsonl": "jsonl",
    ".ndjson": "jsonl",
    ".json": "json",
    ".csv": "csv",
    ".tsv": "tsv",
    ".parquet": "parquet",
}
ARCHIVE_FORMATS = frozenset({"zip", "tar", "tar.gz", "tar.bz2", "tar.xz", "tar.zst"})
# Read from an open file on disk rather than loaded whole: their size is bounded by the
# archive limits (or, for Parquet, read a batch of rows at a time).
STREAMED_FORMATS = ARCHIVE_FORMATS | {"parquet"}
# Read a record (a message) at a time when a file is larger than ``max_file_bytes``: the
# limit then bounds each record, not the file.
LARGE_FILE_FORMATS = STREAMED_RECORD_FORMATS | {"mbox"}
# One archive inside another is read; an archive inside that is not.
MAX_NESTING = 1

_LABELS = {
    "text": "text",
    "markdown": "Markdown",
    "restructuredtext": "reStructuredText",
    "asciidoc": "AsciiDoc",
    "html": "HTML",
    "docx": ".docx",
    "odt": "OpenDocument text",
    "pdf": "PDF",
    "email": "e-mail",
    "mbox": "mbox mailbox",
    "jsonl": "JSON Lines",
    "json": "JSON",
    "csv": "CSV",
    "tsv": "TSV",
    "parquet": "Parquet",
}


def format_of(path: str) -> str | None:
    """Format name from the file name, or None when we have no reader for it.

    The extension is looked up, not searched for: the name's last two suffixes first
    (``.tar.gz``), then its last one. A name that is only an extension (``.txt``) has none.

    >>> format_of("notes/Report.PDF"), format_of("corpus.tar.gz"), format_of("image.png")
    ('pdf', 'tar.gz', None)
    """
    name = path[path.rfind("/") + 1 :].lower()
    last = name.rfind(".")
    if last <= 0:
        return None
    before = name.rfind(".", 0, last)
    if before > 0 and name[before:] in FORMATS:
        return FORMATS[name[before:]]
    return FORMATS.get(name[last:])


def _one_line(err: BaseException) -> str:
    return (" ".join(str(err).split()) or type(err).__name__)[:200]


def format_and_compression(path: str) -> tuple[str | None, str]:
    """``(format, compression suffix)``: `format_of` the name, or of the name without a
    compression suffix (``.gz``, ``.bz2``, ``.xz``, ``.zst``) with the suffix; ``(None, "")``
    when we have no reader for it.

    >>> format_and_compression("corpus.jsonl.gz"), format_and_compression("notes.txt")
    (('jsonl', '.gz'), ('text', ''))
    """
    fmt = format_of(path)
    if fmt is not None:
        return fmt, ""
    found = compressed_format(path, format_of)
    return found if found is not None else (None, "")


# -- formats ------------------------------------------------------------------------------
def _read_text(data: bytes, item: Item, opts: ReadOptions) -> Iterator[Outcome]:
    declared = declared_charset(data) if item.format == "html" else None
    text, encoding, problem = decode_text(data, declared=declared)
    if text is None:
        yield None, item.entry("skipped", problem, encoding=encoding)
        return
    if item.format == "html":
        budget = WorkBudget(len(text), "the HTML tokenizer", opts.work_per_char)
        body, title = html_to_text(text, keep_all=opts.html_keep_all, budget=budget)
        title = title or first_line_title(body)
    elif item.format == "text":  # kept as it is
        body, title = text, first_line_title(text)
    else:
        body, title = reduce_markup(text, item.format, keep_quote_marks=opts.keep_quote_marks)
    doc, entry = item.document(body, title=title, encoding=encoding)
    if body is text and encoding == "utf-8":
        doc.utf8 = data  # decoded strictly, so valid UTF-8: no lone surrogate to clean
    yield doc, entry


def _read_records(data: bytes, item: Item, opts: ReadOptions) -> Iterator[Outcome]:
    text, encoding, problem = decode_text(data)
    if text is None and item.format in STREAMED_RECORD_FORMATS and damaged_utf8(data):
        # UTF-8 with a few bad bytes: read line by line, a bad line skipped with its reason.
        yield from stream_records(io.BytesIO(data), item, opts)
        return
    if text is None:
        yield None, item.entry("skipped", problem, encoding=encoding)
        return
    if item.format == "jsonl":
        triples = jsonl_records(text)
    elif item.format == "json":
        triples = json_records(text)
    else:
        triples = csv_records(text, "\t" if item.format == "tsv" else ",", opts.text_fields)
    yield from record_outcomes(triples, item, opts, encoding=encoding)


def _read_parquet_bytes(data: bytes, item: Item, opts: ReadOptions) -> Iterator[Outcome]:
    yield from read_parquet(io.BytesIO(data), item, opts)


_BYTES_READERS: dict[str, Callable[[bytes, Item, ReadOptions], Iterator[Outcome]]] = {
    **{fmt: _read_text for fmt in (*MARKUP_FORMATS, "html")},
    **{fmt: _read_records for fmt in ("jsonl", "json", "csv", "tsv")},
    "docx": read_docx,
    "odt": read_odt,
    "pdf": read_pdf,
    "email": read_eml,
    "mbox": read_mbox,
    "parquet": _read_parquet_bytes,
}


# -- archives -----------------------------------------------------------------------------
def _screen(item: Item, opts: ReadOptions) -> Callable[[str], tuple[str, str] | None]:
    """What to pass over in an archive before reading it: the same rules as for found files."""

    def screen(name: str) -> tuple[str, str] | None:
        member_id = f"{item.id}!/{name}"
        fmt, _ = format_and_compression(name)
        reason = member_reason(member_id, name, opts, container=fmt in ARCHIVE_FORMATS)
        if reason:
            return "skipped", reason
        if fmt is None:
            base = name.rsplit("/", 1)[-1]
            ext = "." + name.rsplit(".", 1)[-1] if "." in base else "(no extension)"
            return "skipped", unsupported_compressed(base) or f"unsupported file type {ext}"
        if fmt in ARCHIVE_FORMATS and item.depth + 1 > MAX_NESTING:
            return "skipped", "archive inside a nested archive: not opened (one level of nesting is read)"
        return None

    return screen


def _read_archive(
    handle: BinaryIO,
    item: Item,
    opts: ReadOptions,
    budget: ExpansionBudget | None,
    tally: MemberTally | None = None,
) -> Iterator[Outcome]:
    # ``budget``: the enclosing archive's, for a nested one; ``tally``: the run's member count.
    budget = ExpansionBudget(item.size, opts, tally=tally) if budget is None else budget.child(item.size)
    iterate = iter_zip if item.format == "zip" else iter_tar
    accounted = 0
    member: Member
    for member in iterate(handle, opts, budget, _screen(item, opts)):
        accounted += 1
        if not member.name:
            yield None, item.entry(member.status, member.reason)
            continue
        member_id = f"{item.id}!/{member.name}"
        fmt, compression = format_and_compression(member.name)
        child = Item(member_id, member_id, fmt or "", member.size or 0, member.mtime, item.depth + 1)
        if member.status or member.data is None:
            yield (
                None,
                child.entry(member.status or "skipped", member.reason or "not read", record=member.copy),
            )
        elif compression:
            handle = io.BytesIO(member.data)
            yield from _guarded(_read_compressed(handle, child, compression, opts, budget), child, opts)
        else:
            yield from read_bytes(member.data, child, opts, budget=budget)
    if accounted == 0:
        yield None, item.entry("empty", "the archive holds no files")


# -- single compressed files -------------------------------------------------------------
def _read_compressed(
    handle: BinaryIO,
    item: Item,
    suffix: str,
    opts: ReadOptions,
    budget: ExpansionBudget | None,
    tally: MemberTally | None = None,
) -> Iterator[Outcome]:
    """Outcomes of one compressed file (see `dedup.ingest.compressed`): record files a
    record at a time, others read whole up to ``max_file_bytes`` once decompressed.
    ``budget`` is the enclosing archive's, for an archive member."""
    budget = (
        ExpansionBudget(item.size, opts, tally=tally, bomb="a compression bomb?")
        if budget is None
        else budget.child(item.size)
    )
    produced = 0
    try:
        stream = Counted(decompressing(handle, suffix), budget)
        if item.format in STREAMED_RECORD_FORMATS:
            for outcome in stream_records(stream, item, opts):
                produced += 1
                yield outcome
            return
        data = read_bounded(stream, opts.max_file_bytes)
    except ExpansionExceeded as err:
        yield None, item.entry("refused", f"{'rest of the file ' if produced else ''}not read: {err}")
        return
    except Exception as err:  # the decompressors' complaints; a parser's errors go on up
        if not damage(err):
            raise
        reason = f"damaged {COMPRESSIONS[suffix]} file: {_one_line(err)}"
        yield None, item.entry("skipped", reason + ("; rest of the file not read" if produced else ""))
        return
    if len(data) > opts.max_file_bytes:
        reason = f"file too large: more than {opts.max_file_bytes} bytes once decompressed (raise --max-file-bytes)"
        yield None, item.entry("skipped", reason)
        return
    yield from _BYTES_READERS[item.format](data, item._replace(size=len(data)), opts)


# -- every format -------------------------------------------------------------------------
def _clean(value: str) -> str:
    # JSON escapes can produce lone surrogates, which no UTF-8 output can hold.
    if value.isascii():
        return value
    try:
        value.encode("utf-8")
    except UnicodeEncodeError:
        return value.encode("utf-8", "surrogatepass").decode("utf-8", "replace")
    return value


def _clean_entry(entry: LedgerEntry) -> None:
    """Repair the names and reason of an entry in place (one test when they are all ASCII)."""
    fields = (entry.input, entry.reason, entry.record, entry.document_id)
    if not "".join(fields).isascii():
        entry.input, entry.reason, entry.record, entry.document_id = map(_clean, fields)


def _finish(doc: RawDocument | None, entry: LedgerEntry, opts: ReadOptions) -> Outcome:
    _clean_entry(entry)
    if doc is None:
        return None, entry
    doc.id, doc.source, doc.text, doc.title = (
        entry.document_id,
        entry.input,
        doc.text if doc.utf8 is not None else _clean(doc.text),
        _clean(doc.title),
    )
    # Always a dict of its own, even where a reader shared one between documents.
    metadata = doc.metadata
    doc.metadata = (
        {_clean(k): _clean(v) if isinstance(v, str) else v for k, v in metadata.items()} if metadata else {}
    )
    if len(doc.text) > opts.max_text_chars:
        length = len(doc.text)
        doc.text = doc.text[: opts.max_text_chars]
        doc.utf8 = None
        entry.status = "truncated"
        entry.reason = (
            f"text cut to {opts.max_text_chars:,} of {length:,} characters (raise --max-text-chars)"
        )
    elif (not doc.text or doc.text.isspace()) and entry.status == "read":
        entry.status, entry.reason = "empty", "no text"
    return doc, entry


def _guarded(outcomes: Iterator[Outcome], item: Item, opts: ReadOptions) -> Iterator[Outcome]:
    """The reader's outcomes, finished; a reader that fails becomes a skip with its reason."""
    produced = 0
    try:
        for doc, entry in outcomes:
            produced += 1
            yield _finish(doc, entry, opts)
    except MissingParser as err:
        yield _finish(None, item.entry("skipped", str(err)), opts)
    except TooCostly as err:  # over its work budget: this input only, the run goes on
        reason = str(err) + ("; rest of the file not read" if produced else "")
        yield _finish(None, item.entry("skipped", reason), opts)
    except Exception as err:  # a parser's error on hostile bytes, whatever its kind
        label = _LABELS.get(item.format, item.format + " archive")
        reason = f"cannot be read as {label}: {_one_line(err)}"
        if produced:
            reason += "; rest of the file not read"
        yield _finish(None, item.entry("skipped", reason), opts)


def read_bytes(
    data: bytes, item: Item, opts: ReadOptions, *, budget: ExpansionBudget | None = None
) -> Iterator[Outcome]:
    """Documents and ledger entries from the bytes of one input of a known format.

    ``budget`` is the expansion budget of the archive the input is a member of. Lazy:
    the reader runs as the outcomes are taken.
    """
    if item.format in ARCHIVE_FORMATS:
        return _guarded(_read_archive(io.BytesIO(data), item, opts, budget), item, opts)
    return _guarded(_BYTES_READERS[item.format](data, item, opts), item, opts)


def read_stream(
    handle: BinaryIO,
    item: Item,
    opts: ReadOptions,
    tally: MemberTally | None = None,
    compression: str = "",
) -> Iterator[Outcome]:
    """Documents and ledger entries from an open file of one of `STREAMED_FORMATS`, a
    record file of `STREAMED_RECORD_FORMATS` (read a record at a time, whatever its
    size), a mailbox larger than the file limit (a message at a time; a seekable
    ``handle``), or a file compressed as ``compression`` says (``.gz`` ...: see
    `dedup.ingest.compressed`); ``tally`` counts the archive members of the whole run
    (`MemberTally`)."""
    if compression:
        yield from _guarded(_read_compressed(handle, item, compression, opts, None, tally), item, opts)
    elif item.format == "parquet":
        yield from _guarded(read_parquet(handle, item, opts), item, opts)
    elif item.format in STREAMED_RECORD_FORMATS:
        yield from _guarded(stream_records(handle, item, opts), item, opts)
    elif item.format == "mbox":
        yield from _guarded(stream_mbox(handle, item, opts), item, opts)
    else:
        yield from _guarded(_read_archive(handle, item, opts, None, tally), item, opts)


def read_file_bytes(
    data: bytes,
    *,
    doc_id: str,
    source: str,
    fmt: str,
    mtime: float | None,
    id_field: str | None,
    text_fields: Sequence[str],
) -> tuple[list[RawDocument], list[LedgerEntry]]:
    """Documents and ledger entries for the bytes of one file of a known format (all at once)."""
    opts = ReadOptions(id_field=id_field, text_fields=tuple(text_fields))
    docs, entries = [], []
    for doc, entry in read_bytes(data, Item(doc_id, source, fmt, len(data), mtime), opts):
        entries.append(entry)
        if doc is not None:
            docs.append(doc)
    return docs, entries
