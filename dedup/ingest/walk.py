"""Finding the inputs and reading them one at a time: `iter_documents`.

Folders are walked in a fixed (sorted) order. Document ids are paths relative to the
given folder (with several roots, relative to the folder that holds them all), with
``/`` separators on every system, so the same tree gives the same ids anywhere. A root
of ``-`` stands for a list of paths read from standard input (one per line, or
NUL-separated as ``find -print0`` writes them).
"""

from __future__ import annotations

import errno
import os
import stat
import sys
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass
from typing import IO

from .document import Item, Outcome, RawDocument
from .filters import clean_name, file_reason, folder_reason
from .ledger import LedgerEntry
from .options import (
    DEFAULT_MAX_ARCHIVE_BYTES,
    DEFAULT_MAX_ARCHIVE_RATIO,
    DEFAULT_MAX_FILE_BYTES,
    DEFAULT_MAX_TEXT_CHARS,
    ReadOptions,
)
from .readers import ARCHIVE_FORMATS, STREAMED_FORMATS, format_of, read_bytes, read_stream

__all__ = ["InputError", "iter_documents", "STDIN"]

STDIN = "-"


class InputError(Exception):
    """A path given by the user cannot be used (it does not exist, for example)."""


@dataclass(frozen=True)
class _Found:
    path: str  # as the filesystem knows it
    rel: str  # id base, posix separators, printable
    walked: bool = True  # found inside a folder (not named by the user)


def _base_of(roots: Sequence[str]) -> str:
    folders = [os.path.abspath(r if os.path.isdir(r) else os.path.dirname(r) or ".") for r in roots]
    if not folders:
        return os.path.abspath(".")
    if len(folders) == 1:
        return folders[0]
    return os.path.commonpath(folders)


def _rel(path: str, base: str) -> str:
    return clean_name(os.path.relpath(os.path.abspath(path), base).replace(os.sep, "/"))


def _listed_paths(stream: IO) -> list[str]:
    """Paths listed on standard input; bytes that are not UTF-8 pass through as the OS gives them."""
    raw = stream.buffer.read() if hasattr(stream, "buffer") else stream.read()
    text = os.fsdecode(raw) if isinstance(raw, bytes) else raw
    separator = "\0" if "\0" in text else "\n"
    return [p.rstrip("\r") if separator == "\n" else p for p in text.split(separator) if p.strip()]


def _link_reason(path: str) -> str:
    try:
        os.stat(path)
    except OSError as err:
        if err.errno == errno.ELOOP:
            return "link loop, not followed"
        if err.errno == errno.ENOENT:
            return "broken link (its target does not exist)"
        return f"cannot be examined: {err.strerror}"
    return "not a regular file (device, socket or pipe)"


def _walk(root: str, base: str, opts: ReadOptions, entries: list[LedgerEntry]) -> Iterator[_Found]:
    """Files under root in sorted order; folders passed over become ledger entries."""
    stack = [root]
    while stack:
        folder = stack.pop()
        try:
            with os.scandir(folder) as it:
                children = sorted(it, key=lambda e: e.name)
        except OSError as err:
            entries.append(
                LedgerEntry(_rel(folder, base), "skipped", f"folder cannot be read: {err.strerror}")
            )
            continue
        subfolders = []
        for child in children:
            rel = _rel(child.path, base)
            name = clean_name(child.name)
            try:
                if child.is_symlink() and child.is_dir(follow_symlinks=True):
                    # Never followed: a link to a folder can make a loop or leave the tree.
                    entries.append(LedgerEntry(rel, "skipped", "link to a folder, not followed"))
                    continue
                if child.is_dir(follow_symlinks=False):
                    reason = folder_reason(rel, name, opts)
                    if reason:
                        entries.append(LedgerEntry(rel, "skipped", reason))
                    else:
                        subfolders.append(child.path)
                    continue
                if child.is_file(follow_symlinks=True):
                    yield _Found(child.path, rel)
                elif child.is_symlink():
                    entries.append(LedgerEntry(rel, "skipped", _link_reason(child.path)))
                else:
                    entries.append(LedgerEntry(rel, "skipped", "not a regular file (device, socket or pipe)"))
            except OSError as err:
                if err.errno == errno.ELOOP:
                    entries.append(LedgerEntry(rel, "skipped", "link loop, not followed"))
                else:
                    entries.append(LedgerEntry(rel, "skipped", f"cannot be examined: {err.strerror}"))
        # Reverse so that popping from the stack visits folders in sorted order.
        stack.extend(reversed(subfolders))


def _identity(path: str) -> object:
    """What makes two paths the same file: device and inode (one stat call), else the real path."""
    try:
        info = os.stat(path)
    except OSError:
        return os.path.realpath(path)
    return (info.st_dev, info.st_ino)


def _too_large(size: int, opts: ReadOptions) -> str:
    return f"file too large: {size} bytes, limit {opts.max_file_bytes} (raise --max-file-bytes)"


# Formats whose file holds exactly one document, whose id is the file's path.
_SINGLE_DOCUMENT_FORMATS = frozenset(
    {"text", "markdown", "restructuredtext", "asciidoc", "html", "docx", "odt", "pdf", "email"}
)
UNCHANGED_REASON = "unchanged since the last index run (same modification time): not read again"


def _read_found(
    item: _Found, opts: ReadOptions, unchanged: Callable[[str, float], bool] | None = None
) -> Iterator[Outcome]:
    """Outcomes of one found file; problems before its reader runs are entries too."""
    fmt = format_of(item.rel)
    name = item.rel.rsplit("/", 1)[-1]
    reason = file_reason(item.rel, name, opts, found=item.walked, container=fmt in ARCHIVE_FORMATS)
    if reason:
        yield None, LedgerEntry(item.rel, "skipped", reason, fmt or "")
        return
    if fmt is None:
        ext = os.path.splitext(item.path)[1] or "(no extension)"
        yield None, LedgerEntry(item.rel, "skipped", f"unsupported file type {clean_name(ext)}")
        return
    try:
        info = os.stat(item.path)
        if not stat.S_ISREG(info.st_mode):
            yield None, LedgerEntry(item.rel, "skipped", "not a regular file", fmt)
            return
        if unchanged is not None and fmt in _SINGLE_DOCUMENT_FORMATS and unchanged(item.rel, info.st_mtime):
            yield (
                None,
                LedgerEntry(item.rel, "read", UNCHANGED_REASON, fmt, info.st_size, document_id=item.rel),
            )
            return
        found = Item(item.rel, item.rel, fmt, info.st_size, info.st_mtime)
        if fmt in STREAMED_FORMATS:
            # Streamed: bounded by the archive limits, not by the size of the file.
            with open(item.path, "rb") as handle:
                yield from read_stream(handle, found, opts)
            return
        if info.st_size > opts.max_file_bytes:
            yield None, LedgerEntry(item.rel, "skipped", _too_large(info.st_size, opts), fmt, info.st_size)
            return
        with open(item.path, "rb") as handle:
            data = handle.read(opts.max_file_bytes + 1)
    except OSError as err:
        yield None, LedgerEntry(item.rel, "skipped", f"cannot be read: {err.strerror or err}", fmt)
        return
    if len(data) > opts.max_file_bytes:  # it grew since it was examined
        yield None, LedgerEntry(item.rel, "skipped", _too_large(len(data), opts), fmt, len(data))
        return
    yield from read_bytes(data, Item(item.rel, item.rel, fmt, len(data), info.st_mtime), opts)


def iter_documents(
    roots: Sequence[str],
    *,
    id_field: str | None = None,
    text_fields: Sequence[str] = ("text",),
    max_file_bytes: int = DEFAULT_MAX_FILE_BYTES,
    include_hidden: bool = False,
    ledger: list[LedgerEntry],
    max_text_chars: int = DEFAULT_MAX_TEXT_CHARS,
    max_archive_ratio: float = DEFAULT_MAX_ARCHIVE_RATIO,
    max_archive_bytes: int = DEFAULT_MAX_ARCHIVE_BYTES,
    html_keep_all: bool = False,
    include: Sequence[str] = (),
    exclude: Sequence[str] = (),
    include_vcs: bool = False,
    stdin: IO | None = None,
    unchanged: Callable[[str, float], bool] | None = None,
) -> Iterator[RawDocument]:
    """Documents from files, folders and archives, appending one ledger entry per input to ``ledger``.

    Parameters
    ----------
    roots : sequence of str
        Files and folders; ``-`` reads a list of paths from ``stdin``.
    ledger : list of LedgerEntry
        Receives an entry for every input (file, archive member, record) as it is read.
    stdin : text or binary stream, optional
        Where ``-`` reads its paths (default: ``sys.stdin``).
    unchanged : callable, optional
        ``unchanged(id, mtime)``: for an index update, true when a one-document file is
        known with this modification time; it is then not read again, and its ledger
        entry (status ``read``, reason `UNCHANGED_REASON`) names the document.

    The other parameters are those of `ReadOptions`.

    Raises
    ------
    InputError
        When a given root does not exist (before anything is read).
    ValueError
        When a limit is not a positive number.

    Notes
    -----
    Lazy: files are read one at a time as the generator is consumed, archive members
    one at a time, records a batch at a time. Each document's entry is in the ledger
    before the document is yielded.
    """
    opts = ReadOptions(
        id_field=id_field,
        text_fields=tuple(text_fields),
        max_file_bytes=max_file_bytes,
        max_text_chars=max_text_chars,
        max_archive_ratio=max_archive_ratio,
        max_archive_bytes=max_archive_bytes,
        html_keep_all=html_keep_all,
        include=tuple(include),
        exclude=tuple(exclude),
        include_hidden=include_hidden,
        include_vcs=include_vcs,
    )
    missing = [r for r in roots if r != STDIN and not os.path.exists(r)]
    if missing:
        raise InputError(f"no such file or folder: {missing[0]}")
    paths: list[tuple[str, bool]] = []  # (path, listed on standard input)
    for root in roots:
        if root == STDIN:
            if not any(listed for _, listed in paths):
                paths.extend((p, True) for p in _listed_paths(stdin if stdin is not None else sys.stdin))
        else:
            paths.append((root, False))
    base = _base_of([p for p, _ in paths])
    seen_files: dict[object, str] = {}
    seen_ids: set[str] = set()
    for path, listed in paths:
        if listed and not os.path.lexists(path):
            ledger.append(
                LedgerEntry(_rel(path, base), "skipped", "no such file or folder (listed on standard input)")
            )
            continue
        found: Iterator[_Found]
        if os.path.isdir(path):
            found = _walk(path, base, opts, ledger)
        else:
            found = iter([_Found(path, _rel(path, base), walked=False)])
        for item in found:
            real = _identity(item.path)
            if real in seen_files:
                ledger.append(LedgerEntry(item.rel, "skipped", f"same file as {seen_files[real]}, read once"))
                continue
            seen_files[real] = item.rel
            for doc, entry in _read_found(item, opts, unchanged):
                if doc is not None and doc.id in seen_ids:
                    # Only a file named like an archive member or a record ("a.zip!", "b.csv#1").
                    entry.status, entry.reason = "skipped", f"id {doc.id!r} repeats an earlier document"
                    entry.document_id = ""
                    doc = None
                ledger.append(entry)
                if doc is not None:
                    seen_ids.add(doc.id)
                    yield doc
                elif entry.reason == UNCHANGED_REASON:
                    seen_ids.add(entry.document_id)
