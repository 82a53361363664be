"""Finding the inputs: folders are walked in a fixed (sorted) order.

Document ids are paths relative to the given folder (with several roots, relative to
the folder that holds them all), with ``/`` separators on every system, so the same
tree gives the same ids anywhere.
"""

from __future__ import annotations

import os
import stat
from collections.abc import Iterator, Sequence
from dataclasses import dataclass

from .ledger import LedgerEntry
from .readers import RawDocument, format_of, read_file_bytes

__all__ = ["InputError", "iter_documents"]


class InputError(Exception):
    """A path given by the user cannot be used (it does not exist, for example)."""


@dataclass(frozen=True)
class _Found:
    path: str  # as the filesystem knows it
    rel: str  # id base, posix separators


def _base_of(roots: Sequence[str]) -> str:
    folders = [os.path.abspath(r if os.path.isdir(r) else os.path.dirname(r) or ".") for r in roots]
    if len(folders) == 1:
        return folders[0]
    return os.path.commonpath(folders)


def _rel(path: str, base: str) -> str:
    return os.path.relpath(os.path.abspath(path), base).replace(os.sep, "/")


def _walk(root: str, base: str, include_hidden: bool, entries: list[LedgerEntry]) -> Iterator[_Found]:
    """Files under root in sorted order; hidden and linked folders become ledger entries."""
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
            if child.name.startswith(".") and not include_hidden:
                kind = "folder" if child.is_dir(follow_symlinks=False) else "file"
                entries.append(LedgerEntry(rel, "skipped", f"hidden {kind} (read it with --include-hidden)"))
                continue
            try:
                if child.is_symlink() and child.is_dir(follow_symlinks=True):
                    entries.append(LedgerEntry(rel, "skipped", "link to a folder, not followed"))
                    continue
                if child.is_dir(follow_symlinks=False):
                    subfolders.append(child.path)
                    continue
                if child.is_file(follow_symlinks=True):
                    yield _Found(child.path, rel)
                else:
                    entries.append(
                        LedgerEntry(rel, "skipped", "not a regular file (device, socket, broken link)")
                    )
            except OSError as err:
                entries.append(LedgerEntry(rel, "skipped", f"cannot be examined: {err.strerror}"))
        # Reverse so that popping from the stack visits folders in sorted order.
        stack.extend(reversed(subfolders))


def iter_documents(
    roots: Sequence[str],
    *,
    id_field: str | None = None,
    text_fields: Sequence[str] = ("text",),
    max_file_bytes: int = 50_000_000,
    include_hidden: bool = False,
    ledger: list[LedgerEntry],
) -> Iterator[RawDocument]:
    """Documents from files and folders, appending one ledger entry per input to ``ledger``.

    Raises
    ------
    InputError
        When a given root does not exist (before anything is read).

    Notes
    -----
    Lazy: files are read one at a time as the generator is consumed.
    """
    missing = [r for r in roots if not os.path.exists(r)]
    if missing:
        raise InputError(f"no such file or folder: {missing[0]}")
    base = _base_of(roots)
    seen: dict[str, str] = {}
    for root in roots:
        found: Iterator[_Found]
        found = (
            _walk(root, base, include_hidden, ledger)
            if os.path.isdir(root)
            else iter([_Found(root, _rel(root, base))])
        )
        for item in found:
            real = os.path.realpath(item.path)
            if real in seen:
                ledger.append(LedgerEntry(item.rel, "skipped", f"same file as {seen[real]}, read once"))
                continue
            seen[real] = item.rel
            fmt = format_of(item.path)
            if fmt is None:
                ext = os.path.splitext(item.path)[1] or "(no extension)"
                ledger.append(LedgerEntry(item.rel, "skipped", f"unsupported file type {ext}"))
                continue
            try:
                info = os.stat(item.path)
                if not stat.S_ISREG(info.st_mode):
                    ledger.append(LedgerEntry(item.rel, "skipped", "not a regular file", fmt))
                    continue
                if info.st_size > max_file_bytes:
                    ledger.append(
                        LedgerEntry(
                            item.rel,
                            "skipped",
                            f"file too large: {info.st_size} bytes, limit {max_file_bytes} (raise --max-file-bytes)",
                            fmt,
                            info.st_size,
                        )
                    )
                    continue
                with open(item.path, "rb") as handle:
                    data = handle.read(max_file_bytes + 1)
            except OSError as err:
                ledger.append(LedgerEntry(item.rel, "skipped", f"cannot be read: {err.strerror}", fmt))
                continue
            docs, entries = read_file_bytes(
                data,
                doc_id=item.rel,
                source=item.rel,
                fmt=fmt,
                mtime=info.st_mtime,
                id_field=id_field,
                text_fields=text_fields,
            )
            ledger.extend(entries)
            yield from docs
