"""Readers: from the bytes of one file to documents and ledger entries.

Every reader returns ``(documents, entries)``; a problem with the file or one of its
records becomes a ledger entry with a reason, never an exception for the caller.
"""

from __future__ import annotations

import codecs
import csv
import io
import json
from collections.abc import Sequence
from dataclasses import dataclass, field

from .html_text import html_to_text
from .ledger import LedgerEntry

__all__ = ["RawDocument", "FORMATS", "format_of", "decode_text", "read_file_bytes"]

# Extension → format name.
FORMATS = {
    ".txt": "text",
    ".text": "text",
    ".md": "markdown",
    ".markdown": "markdown",
    ".rst": "restructuredtext",
    ".html": "html",
    ".htm": "html",
    ".xhtml": "html",
    ".jsonl": "jsonl",
    ".ndjson": "jsonl",
    ".csv": "csv",
    ".tsv": "tsv",
}

_BOMS = (
    (codecs.BOM_UTF32_LE, "utf-32-le"),
    (codecs.BOM_UTF32_BE, "utf-32-be"),
    (codecs.BOM_UTF8, "utf-8-sig"),
    (codecs.BOM_UTF16_LE, "utf-16-le"),
    (codecs.BOM_UTF16_BE, "utf-16-be"),
)


@dataclass
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


def format_of(path: str) -> str | None:
    """Format name from the file name, or None when we have no reader for it."""
    lower = path.lower()
    dot = lower.rfind(".")
    return FORMATS.get(lower[dot:]) if dot >= 0 else None


def decode_text(data: bytes) -> tuple[str | None, str, str]:
    """``(text, encoding, problem)``: text is None when the bytes are not text we can read."""
    for bom, name in _BOMS:
        if data.startswith(bom):
            try:
                return data[len(bom) :].decode(name.replace("-sig", "")), name, ""
            except UnicodeDecodeError as err:
                return None, name, f"not valid {name} text: byte {err.start + len(bom)} cannot be decoded"
    nul = data.find(b"\x00")
    if nul >= 0:
        return None, "", f"binary data: NUL byte at offset {nul}"
    try:
        return data.decode("utf-8"), "utf-8", ""
    except UnicodeDecodeError as err:
        bad = data[err.start : err.start + 1].hex()
        return None, "", f"not UTF-8 text: byte 0x{bad} at offset {err.start} cannot be decoded"


def _title_of_markup(text: str) -> str:
    for line in text.splitlines():
        stripped = line.strip()
        if stripped:
            return stripped.lstrip("#").strip()[:200]
    return ""


def _join_fields(record: dict, text_fields: Sequence[str]) -> tuple[str | None, str]:
    present = [f for f in text_fields if f in record]
    if not present:
        return None, f"no field {', '.join(repr(f) for f in text_fields)}"
    parts = []
    for f in present:
        value = record[f]
        if value is None:
            continue
        parts.append(
            value if isinstance(value, str) else json.dumps(value, ensure_ascii=False, sort_keys=True)
        )
    return "\n\n".join(parts), ""


def _record_documents(
    records: list[tuple[str, dict | None, str]],
    *,
    doc_id: str,
    source: str,
    fmt: str,
    size: int,
    encoding: str,
    id_field: str | None,
    text_fields: Sequence[str],
    mtime: float | None,
) -> tuple[list[RawDocument], list[LedgerEntry]]:
    """Documents from parsed records ``(record label, record or None, problem)``."""
    docs: list[RawDocument] = []
    entries: list[LedgerEntry] = []
    seen_ids: set[str] = set()
    for label, record, problem in records:
        entry = LedgerEntry(
            input=source, status="skipped", format=fmt, size=size, encoding=encoding, record=label
        )
        entries.append(entry)
        if record is None:
            entry.reason = problem
            continue
        text, missing = _join_fields(record, text_fields)
        if text is None:
            entry.reason = f"{label}: {missing}; choose the text with --text-field"
            continue
        key = label
        if id_field:
            value = record.get(id_field)
            if value is None or str(value).strip() == "":
                entry.reason = f"{label}: no value in id field {id_field!r}"
                continue
            key = str(value)
        rid = f"{doc_id}#{key}"
        if rid in seen_ids:
            entry.reason = f"{label}: id {key!r} repeats an earlier record of this file"
            continue
        seen_ids.add(rid)
        entry.document_id = rid
        entry.status = "read"
        title = record.get("title") if isinstance(record.get("title"), str) else ""
        metadata = {
            k: v for k, v in record.items() if k not in text_fields and isinstance(v, (str, int, float))
        }
        docs.append(RawDocument(rid, text, source, fmt, size, encoding, title or "", label, mtime, metadata))
    return docs, entries


def _jsonl_records(text: str) -> list[tuple[str, dict | None, str]]:
    out = []
    for number, line in enumerate(text.splitlines(), 1):
        if not line.strip():
            continue
        label = f"line {number}"
        try:
            value = json.loads(line)
        except json.JSONDecodeError as err:
            out.append((label, None, f"{label}: not valid JSON ({err.msg} at column {err.colno})"))
            continue
        if not isinstance(value, dict):
            out.append((label, None, f"{label}: a JSON {type(value).__name__}, not an object with fields"))
            continue
        out.append((label, value, ""))
    return out


def _csv_records(text: str, delimiter: str, text_fields: Sequence[str]) -> tuple[list, str]:
    reader = csv.reader(io.StringIO(text, newline=""), delimiter=delimiter)
    try:
        header = next(reader)
    except StopIteration:
        return [], ""
    except csv.Error as err:
        return [], f"cannot read the header row: {err}"
    missing = [f for f in text_fields if f not in header]
    if len(missing) == len(text_fields):
        columns = ", ".join(header[:12]) + (" …" if len(header) > 12 else "")
        return (
            [],
            f"no column {', '.join(repr(f) for f in text_fields)} (columns: {columns}); choose with --text-field",
        )
    out = []
    try:
        for row in reader:
            label = f"row {reader.line_num}"
            if not any(cell.strip() for cell in row):
                continue
            if len(row) != len(header):
                out.append((label, None, f"{label}: {len(row)} cells where the header has {len(header)}"))
                continue
            out.append((label, dict(zip(header, row)), ""))
    except csv.Error as err:
        out.append(
            (
                f"row {reader.line_num}",
                None,
                f"row {reader.line_num}: broken CSV ({err}); rest of file not read",
            )
        )
    return out, ""


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
    """Documents and ledger entries for the bytes of one file of a known format."""
    size = len(data)
    text, encoding, problem = decode_text(data)
    if text is None:
        return [], [LedgerEntry(source, "skipped", problem, fmt, size, encoding)]
    if fmt in ("jsonl", "csv", "tsv"):
        if fmt == "jsonl":
            records, file_problem = _jsonl_records(text), ""
        else:
            records, file_problem = _csv_records(text, "\t" if fmt == "tsv" else ",", text_fields)
        if file_problem:
            return [], [LedgerEntry(source, "skipped", file_problem, fmt, size, encoding)]
        if not records:
            return [], [LedgerEntry(source, "empty", "no records", fmt, size, encoding)]
        return _record_documents(
            records,
            doc_id=doc_id,
            source=source,
            fmt=fmt,
            size=size,
            encoding=encoding,
            id_field=id_field,
            text_fields=text_fields,
            mtime=mtime,
        )
    if fmt == "html":
        body, title = html_to_text(text)
        title = title or _title_of_markup(body)
    else:
        body, title = text, _title_of_markup(text)
    entry = LedgerEntry(source, "read", "", fmt, size, encoding, document_id=doc_id)
    return [RawDocument(doc_id, body, source, fmt, size, encoding, title, "", mtime)], [entry]
