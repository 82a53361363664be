"""Finding the inputs and reading them one at a time: `iter_documents`.

Folders are walked in a fixed (sorted) order. Document ids are paths relative to the
given folder (with several roots, relative to the folder that holds them all), with
``/`` separators on every system, so the same tree gives the same ids anywhere. A root
of ``-`` stands for a list of paths read from standard input (one per line, or
NUL-separated as ``find -print0`` writes them).

What is never read: a link to a folder (it can loop or leave the tree); a link to a file
outside the given folders, unless ``follow_links`` (a folder handed in for auditing must
not make the audit read a system file); the folders of the run's own outputs and work
(`leaving_out`, set by the command line for ``--out``), so an audit never reads what it
writes. Each is a ledger entry with the reason. Every file is opened by a path with no
link in its last component (a link is resolved when it is found) and with ``O_NOFOLLOW``,
so a file swapped for a link after the walk saw it is not read either.
"""

from __future__ import annotations

import contextlib
import errno
import os
import stat
import sys
from collections.abc import Callable, Iterable, Iterator, Sequence
from contextvars import ContextVar
from typing import IO, NamedTuple

from .budget import MemberTally
from .compressed import unsupported_compressed
from .document import Item, Outcome, RawDocument
from .filters import clean_name, file_reason, folder_reason
from .ledger import LedgerEntry
from .options import (
    DEFAULT_MAX_ARCHIVE_BYTES,
    DEFAULT_MAX_ARCHIVE_MEMBERS,
    DEFAULT_MAX_ARCHIVE_RATIO,
    DEFAULT_MAX_FILE_BYTES,
    DEFAULT_MAX_RUN_MEMBERS,
    DEFAULT_MAX_TEXT_CHARS,
    ReadOptions,
    file_too_large,
)
from .readers import (
    ARCHIVE_FORMATS,
    LARGE_FILE_FORMATS,
    STREAMED_FORMATS,
    format_and_compression,
    format_of,
    read_bytes,
    read_stream,
)

__all__ = ["InputError", "iter_documents", "STDIN", "leaving_out", "LINK_OUTSIDE"]

STDIN = "-"
LINK_OUTSIDE = "link to a file outside the audited folders (read it with --follow-links)"
# Folders not to read in this context, with the reason: see `leaving_out`.
_LEFT_OUT: ContextVar[tuple[tuple[str, str], ...]] = ContextVar("dedup_left_out", default=())


@contextlib.contextmanager
def leaving_out(folders: Iterable[tuple[str, str]]) -> Iterator[None]:
    """Within the block, `iter_documents` does not read ``folders`` (``(path, reason)``
    pairs) nor anything in them; each is one ledger entry with its reason.

    The command line leaves out its ``--out`` folder and work folder this way, so an audit
    never reads its own outputs, without the folders becoming settings of the audit
    (which are echoed into audit.json and must not depend on where it is written).
    A folder that does not exist yet is left out if it exists when the walk starts.
    """
    token = _LEFT_OUT.set(tuple(folders))
    try:
        yield
    finally:
        _LEFT_OUT.reset(token)


class InputError(Exception):
    """A path given by the user cannot be used (it does not exist, for example)."""


class _Found(NamedTuple):
    """A file found to read (a named tuple: one is made for every file found)."""

    # As the filesystem knows it, with no link in its last component: a file named by the
    # user or a link found inside the given folders is its real path, so that it is opened
    # with O_NOFOLLOW and a file swapped for a link after it was found is not read.
    path: str
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


class _Scope:
    """What a walk may read: the real paths of the given folders and files, and the
    folders left out (by device and inode, so any spelling of their path matches).

    Cost: one ``realpath`` per root and per link met; a folder met is compared by its
    inode, which the walk has already (a ``stat`` only on a match).
    """

    def __init__(self, roots: Sequence[str], left_out: Sequence[tuple[str, str]]) -> None:
        reals = [(os.path.realpath(r), os.path.isdir(r)) for r in roots]
        self.folders = tuple(real if real.endswith(os.sep) else real + os.sep for real, d in reals if d)
        self.files = {real for real, is_folder in reals if not is_folder}
        self.left: dict[tuple[int, int], str] = {}
        for folder, reason in left_out:
            with contextlib.suppress(OSError):
                info = os.stat(folder)
                self.left[(info.st_dev, info.st_ino)] = reason
        self._left_inodes = {inode for _, inode in self.left}

    def folder_left_out(self, entry: os.DirEntry) -> str:
        """Why a folder met in the walk is left out, or ``""``."""
        if not self.left or entry.inode() not in self._left_inodes:
            return ""
        info = entry.stat(follow_symlinks=False)
        return self.left.get((info.st_dev, info.st_ino), "")

    def path_left_out(self, path: str) -> str:
        """Why ``path`` is left out (it, or a folder it is in, is left out), or ``""``."""
        if not self.left:
            return ""
        current = os.path.realpath(path)
        while True:
            with contextlib.suppress(OSError):
                info = os.stat(current)
                if (info.st_dev, info.st_ino) in self.left:
                    return self.left[(info.st_dev, info.st_ino)]
            parent = os.path.dirname(current)
            if parent == current:
                return ""
            current = parent

    def link_target(self, path: str, opts: ReadOptions) -> tuple[str, str]:
        """``(target, "")`` for a link to a file that may be read, else ``("", reason)``.

        The target is its real path, read in its place (it has no link left in it)."""
        target = os.path.realpath(path)
        inside = target in self.files or target.startswith(self.folders)
        if not (inside or opts.follow_links):
            return "", LINK_OUTSIDE
        reason = self.path_left_out(target)
        return ("", reason) if reason else (target, "")


def _walk(
    root: str, base: str, opts: ReadOptions, entries: list[LedgerEntry], scope: _Scope
) -> Iterator[_Found]:
    """Files under root in sorted order; folders passed over and links not followed
    become ledger entries."""
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
        # Ids of the children: the folder's id once, then one component per child.
        folder_rel = _rel(folder, base)
        prefix = "" if folder_rel == "." else folder_rel + "/"
        for child in children:
            name = clean_name(child.name)
            rel = prefix + name
            try:
                if child.is_symlink() and child.is_dir(follow_symlinks=True):
                    # Never followed: a link to a folder can make a loop or leave the tree.
                    entries.append(LedgerEntry(rel, "skipped", "link to a folder, not followed"))
                    continue
                if child.is_dir(follow_symlinks=False):
                    reason = scope.folder_left_out(child) or folder_reason(rel, name, opts)
                    if reason:
                        entries.append(LedgerEntry(rel, "skipped", reason))
                    else:
                        subfolders.append(child.path)
                    continue
                if child.is_file(follow_symlinks=True):
                    target, reason = scope.link_target(child.path, opts) if child.is_symlink() else ("", "")
                    if reason:
                        entries.append(LedgerEntry(rel, "skipped", reason))
                    else:
                        yield _Found(target or child.path, rel)
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


def _identity(path: str) -> tuple[object, os.stat_result | None]:
    """What makes two paths the same file — device and inode (one stat call), else the real
    path — and the stat result, handed on to the reader so that each file is examined
    once (None when the stat fails: the reader then reports why)."""
    try:
        info = os.stat(path)
    except OSError:
        return os.path.realpath(path), None
    return (info.st_dev, info.st_ino), info


# A window of files is handed to the readers at once: at most this many files and bytes.
WINDOW_FILES = 128
WINDOW_BYTES = 16 * 2**20


def _windows(
    found: Iterator[_Found], walk_entries: list[LedgerEntry], seen_files: dict[object, str], max_files: int
):
    """Windows of events in walk order: ledger entries of the walk, and files to read.

    Read in this process, a window is one file, so the walk never runs ahead of the
    reading; workers get up to `WINDOW_FILES` files at once.

    A file that is the same as one seen before (a link, a root given twice) becomes an
    entry here, before any reading, so the order never depends on the readers. Read in
    this process, a file is examined by the reader instead (`_read_found` with
    ``seen``), right when its turn comes: the same order, one look-up of its path fewer.
    """
    window: list[LedgerEntry | _Sized] = []
    files = size = 0
    for item in found:
        window.extend(walk_entries)
        walk_entries.clear()
        if max_files == 1:
            yield [*window, _Sized(item)]
            window = []
            continue
        real, info = _identity(item.path)
        if real in seen_files:
            window.append(LedgerEntry(item.rel, "skipped", f"same file as {seen_files[real]}, read once"))
            continue
        seen_files[real] = item.rel
        sized = _Sized(item, info)
        window.append(sized)
        files += 1
        size += sized.size
        if files >= max_files or size >= WINDOW_BYTES:
            yield window
            window, files, size = [], 0, 0
    window.extend(walk_entries)
    walk_entries.clear()
    if window:
        yield window


class _Sized(NamedTuple):
    """A file to read, with the stat result taken when it was found (None when that failed)."""

    item: _Found
    info: os.stat_result | None = None

    @property
    def size(self) -> int:
        """Bytes when the file was found; 0 when unknown."""
        return self.info.st_size if self.info is not None else 0


# Files up to this size are read whole by a worker (archives never: they are streamed here).
WORKER_FILE_BYTES = 16 * 2**20
# Windows a pool of n workers has in hand at once (beyond the one being handed out here):
# enough that no worker waits while this process takes in a window, few enough that the
# texts read ahead stay a few windows' worth.
WINDOWS_AHEAD_PER_WORKER = 2


def _read_bundle(bundle: list[_Sized], opts: ReadOptions, prepare) -> list[list[Outcome]]:
    """The outcomes of each file of a bundle; ``prepare`` runs once on all their documents
    (one call of the compiled kernels for the bundle, not one per file)."""
    outcomes = [list(_read_found(sized.item, opts, None, sized.info)) for sized in bundle]
    if prepare is not None:
        docs = [doc for per_file in outcomes for doc, _ in per_file if doc is not None]
        if docs:
            prepare(docs)
    return outcomes


_WORKER: dict = {}


def _worker_start(opts: ReadOptions, prepare) -> None:
    _WORKER["opts"], _WORKER["prepare"] = opts, prepare


def _worker_read(bundle: list[_Sized]) -> list[list[Outcome]]:
    return _read_bundle(bundle, _WORKER["opts"], _WORKER["prepare"])


class _Readers:
    """Reads the files of each window, in this process or in a pool of worker processes."""

    def __init__(self, opts: ReadOptions, unchanged, workers: int, prepare, seen_files: dict) -> None:
        self.opts, self.unchanged, self.workers, self.prepare = opts, unchanged, max(1, workers), prepare
        self.seen_files = seen_files  # files read so far (identity → id), when read here
        # Archive members of the whole run; archives are always read here, never by workers.
        self.tally = MemberTally(opts.max_run_members)
        self._pool = None

    def _to_workers(self, sized: _Sized) -> bool:
        fmt = format_of(sized.item.rel)
        return fmt is not None and fmt not in ARCHIVE_FORMATS and sized.size <= WORKER_FILE_BYTES

    def events(self, windows):
        """Each event of the windows in order: an entry as is, a file as its outcomes.

        With workers, the files of a window (not archives, not larger than
        `WORKER_FILE_BYTES`) go to the pool as one bundle, and the pool works on the next
        windows while this process takes in the outcomes of the first; the rest are read
        here, lazily (an archive member by member), in their place.
        """
        if self.workers == 1:
            for window in windows:
                yield from self._take(window, None)
            return
        ahead = []  # (window, pending result of its bundle) in walk order
        for window in windows:
            pooled = [e for e in window if isinstance(e, _Sized) and self._to_workers(e)]
            if pooled and self._pool is None:
                self._pool = _start_pool(self.workers, self.opts, self.prepare)
            pending = None
            if pooled:
                if self._pool is not None:
                    pending = self._pool.apply_async(_worker_read, (pooled,))
                else:
                    pending = _Ready(_read_bundle(pooled, self.opts, self.prepare))
            ahead.append((window, pending))
            while len(ahead) > WINDOWS_AHEAD_PER_WORKER * self.workers:
                yield from self._take(*ahead.pop(0))
        while ahead:
            yield from self._take(*ahead.pop(0))

    def _take(self, window: list, pending):
        results = iter(pending.get()) if pending is not None else iter(())
        for event in window:
            if not isinstance(event, _Sized):
                yield event
            elif pending is not None and self._to_workers(event):
                yield next(results)
            elif self.workers == 1:  # examined here, in its turn (see `_windows`)
                yield _read_found(
                    event.item, self.opts, self.unchanged, seen=self.seen_files, tally=self.tally
                )
            else:
                yield _read_found(event.item, self.opts, self.unchanged, event.info, tally=self.tally)

    def close(self) -> None:
        if self._pool is not None:
            self._pool.terminate()
            self._pool.join()
            self._pool = None


class _Ready(NamedTuple):
    """A result already at hand, with the ``get`` of a pending one."""

    value: list

    def get(self) -> list:
        return self.value


def _start_pool(workers: int, opts: ReadOptions, prepare):
    """A pool of reading processes, or None where processes cannot be started (then read here)."""
    import multiprocessing

    methods = multiprocessing.get_all_start_methods()
    context = multiprocessing.get_context("fork" if "fork" in methods else None)
    try:
        return context.Pool(workers, initializer=_worker_start, initargs=(opts, prepare))
    except (OSError, ValueError):
        return None


# Formats whose file holds exactly one document, whose id is the file's path.
_SINGLE_DOCUMENT_FORMATS = frozenset(
    {"text", "markdown", "restructuredtext", "asciidoc", "html", "docx", "odt", "pdf", "email"}
)
UNCHANGED_REASON = "unchanged since the last index run (same modification time): not read again"


# Reading on past the examined size (a file that grew) goes in steps of this many bytes.
_GROWTH_STEP = 65536
# A link put in place of a file after the walk saw it is not followed (see `_Found`).
_NOFOLLOW = getattr(os, "O_NOFOLLOW", 0)
# Not blocking: a file that became a pipe since it was found must not stop the reading.
_READ_FLAGS = (
    os.O_RDONLY | getattr(os, "O_BINARY", 0) | getattr(os, "O_CLOEXEC", 0) | getattr(os, "O_NONBLOCK", 0)
)


def _open_descriptor(path: str) -> int:
    """A bare descriptor to read a file by: a file object would examine the file once
    more and buffer nothing. A link in the last component of the path is not followed
    (the open fails): every `_Found` path is free of one (see `_Found`)."""
    return os.open(path, _READ_FLAGS | _NOFOLLOW)


def _open_unfollowed(path: str, flags: int) -> int:
    """An ``opener`` for `open` that does not follow a link in the last component."""
    return os.open(path, flags | _NOFOLLOW)


def _read_limited(path: str, size: int, limit: int) -> bytes:
    """The bytes of a file examined at ``size`` bytes: all of them, or ``limit + 1`` when it
    has grown beyond the limit since (see `_read_descriptor`, which reads a file opened
    already)."""
    fd = _open_descriptor(path)
    try:
        return _read_descriptor(fd, size, limit)
    finally:
        os.close(fd)


def _read_descriptor(fd: int, size: int, limit: int) -> bytes:
    # Unbuffered, by the known size plus one byte, then on to the end in modest steps:
    # asking for ``limit + 1`` bytes at once would allocate a buffer of the limit's size
    # for every file, however small.
    parts = [os.read(fd, min(size, limit) + 1)]
    total = len(parts[0])
    if total == size <= limit:
        # Exactly the size examined, one byte short of what was asked: a regular file
        # reads short only at its end, so there is no need to ask again.
        return parts[0]
    while total <= limit:  # on to the end: it may have grown, or a read may have come back short
        more = os.read(fd, min(limit + 1 - total, _GROWTH_STEP))
        if not more:
            break
        parts.append(more)
        total += len(more)
    return parts[0] if len(parts) == 1 else b"".join(parts)


def _opened(path: str) -> tuple[int | None, object, os.stat_result | None]:
    """The file opened, its identity (device and inode) and its stat result, from one
    look-up of its path; ``(None, None, None)`` when it cannot be opened or examined so."""
    try:
        fd = _open_descriptor(path)
    except OSError:
        return None, None, None
    try:
        info = os.fstat(fd)
    except OSError:
        os.close(fd)
        return None, None, None
    return fd, (info.st_dev, info.st_ino), info


def _read_found(
    item: _Found,
    opts: ReadOptions,
    unchanged: Callable[[str, float], bool] | None = None,
    info: os.stat_result | None = None,
    seen: dict[object, str] | None = None,
    tally: MemberTally | None = None,
) -> Iterable[Outcome]:
    """Outcomes of one found file; problems before its reader runs are entries too.

    The file is examined and read when this is called; its reader runs as the outcomes
    are taken (an archive member by member).

    ``info`` is the file's stat result when it was found (it is examined again without it).
    ``seen`` (the files read so far, identity → id) asks for the file to be examined here
    first, as `_windows` does: one seen before becomes an entry. A walked file that is to
    be read is then opened at once and examined through its descriptor.
    """
    fmt, compression = format_and_compression(item.rel)
    name = item.rel.rsplit("/", 1)[-1]
    reason = file_reason(item.rel, name, opts, found=item.walked, container=fmt in ARCHIVE_FORMATS)
    fd = None
    if seen is not None:
        real = None
        if (
            item.walked
            and not reason
            and fmt is not None
            and fmt not in STREAMED_FORMATS
            and not compression
            and unchanged is None
        ):
            fd, real, info = _opened(item.path)
        if real is None:
            real, info = _identity(item.path)
        if real in seen:
            if fd is not None:
                os.close(fd)
            return _skipped(LedgerEntry(item.rel, "skipped", f"same file as {seen[real]}, read once"))
        seen[real] = item.rel
    try:
        return _read_examined(item, (fmt, compression), reason, opts, unchanged, info, fd, tally)
    finally:
        if fd is not None:
            os.close(fd)


def _skipped(entry: LedgerEntry) -> list[Outcome]:
    return [(None, entry)]


def _read_examined(
    item: _Found,
    kind: tuple[str | None, str],
    reason: str,
    opts: ReadOptions,
    unchanged: Callable[[str, float], bool] | None,
    info: os.stat_result | None,
    fd: int | None,
    tally: MemberTally | None = None,
) -> Iterable[Outcome]:
    # The file is read here, at once (``fd`` can be closed after); its reader runs lazily.
    # ``kind``: its format and compression suffix (`format_and_compression`).
    fmt, compression = kind
    if reason:
        return _skipped(LedgerEntry(item.rel, "skipped", reason, fmt or ""))
    if fmt is None:
        ext = os.path.splitext(item.rel)[1] or "(no extension)"  # the path may be a link's target
        reason = unsupported_compressed(item.rel.rsplit("/", 1)[-1]) or f"unsupported file type {ext}"
        return _skipped(LedgerEntry(item.rel, "skipped", clean_name(reason)))
    try:
        if info is None:
            info = os.stat(item.path)
        if not stat.S_ISREG(info.st_mode):
            return _skipped(LedgerEntry(item.rel, "skipped", "not a regular file", fmt))
        if unchanged is not None and fmt in _SINGLE_DOCUMENT_FORMATS and unchanged(item.rel, info.st_mtime):
            return _skipped(
                LedgerEntry(item.rel, "read", UNCHANGED_REASON, fmt, info.st_size, document_id=item.rel)
            )
        if (
            fmt in STREAMED_FORMATS
            or compression
            or (fmt in LARGE_FILE_FORMATS and info.st_size > opts.max_file_bytes)
        ):
            # Streamed: bounded by the archive limits (archives, compressed files) or read
            # a record at a time (record files, mailboxes), not by the size of the file.
            found = Item(item.rel, item.rel, fmt, info.st_size, info.st_mtime)
            return _streamed(item, found, opts, tally, compression)
        if info.st_size > opts.max_file_bytes:
            return _skipped(
                LedgerEntry(
                    item.rel, "skipped", file_too_large(info.st_size, opts.max_file_bytes), fmt, info.st_size
                )
            )
        limit = opts.max_file_bytes
        data = (
            _read_limited(item.path, info.st_size, limit)
            if fd is None
            else _read_descriptor(fd, info.st_size, limit)
        )
    except OSError as err:
        return _skipped(LedgerEntry(item.rel, "skipped", f"cannot be read: {err.strerror or err}", fmt))
    if len(data) > opts.max_file_bytes:  # it grew since it was examined
        if fmt in LARGE_FILE_FORMATS:
            return _streamed(item, Item(item.rel, item.rel, fmt, len(data), info.st_mtime), opts, tally)
        return _skipped(
            LedgerEntry(item.rel, "skipped", file_too_large(len(data), opts.max_file_bytes), fmt, len(data))
        )
    return read_bytes(data, Item(item.rel, item.rel, fmt, len(data), info.st_mtime), opts)


def _streamed(
    item: _Found, found: Item, opts: ReadOptions, tally: MemberTally | None, compression: str = ""
) -> Iterator[Outcome]:
    # Opened when the outcomes are taken, and open while they are.
    try:
        # Closed below, after the last outcome; links were resolved when the file was found.
        handle = open(item.path, "rb", opener=_open_unfollowed)  # noqa: SIM115
    except OSError as err:
        yield None, LedgerEntry(item.rel, "skipped", f"cannot be read: {err.strerror or err}", found.format)
        return
    with handle:
        yield from read_stream(handle, found, opts, tally, compression)


def _found_under(
    path: str, listed: bool, base: str, opts: ReadOptions, scope: _Scope, entries: list[LedgerEntry]
) -> Iterator[_Found]:
    """The files to read of one given path (a folder walked, a file as it is); a path not
    to read at all becomes an entry in ``entries`` instead."""
    if listed and not os.path.lexists(path):
        entries.append(
            LedgerEntry(_rel(path, base), "skipped", "no such file or folder (listed on standard input)")
        )
        return iter(())
    reason = scope.path_left_out(path)
    if reason:
        entries.append(LedgerEntry(_rel(path, base), "skipped", reason))
        return iter(())
    if os.path.isdir(path):
        return _walk(path, base, opts, entries, scope)
    # Named by the user: read wherever a link points, by its real path (see `_Found`).
    return iter([_Found(os.path.realpath(path), _rel(path, base), walked=False)])


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
    follow_links: bool = False,
    max_archive_members: int = DEFAULT_MAX_ARCHIVE_MEMBERS,
    max_run_members: int = DEFAULT_MAX_RUN_MEMBERS,
    keep_quote_marks: bool = False,
    stdin: IO | None = None,
    unchanged: Callable[[str, float], bool] | None = None,
    workers: int = 1,
    prepare: Callable[[list[RawDocument]], None] | None = None,
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
    workers : int
        Processes that read files in parallel (1: read in this process). Documents and
        ledger entries come out in the same order whatever the number.
    prepare : callable, optional
        ``prepare(documents)`` runs on the documents of each file where it is read (in a
        worker process when there are workers), e.g. to normalize them there; it must be
        a module-level function and may change the documents in place.

    The other parameters are those of `ReadOptions`. Folders left out by `leaving_out`
    around the call are not read.

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
        follow_links=follow_links,
        max_archive_members=max_archive_members,
        max_run_members=max_run_members,
        keep_quote_marks=keep_quote_marks,
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
    scope = _Scope([p for p, _ in paths], _LEFT_OUT.get())
    seen_files: dict[object, str] = {}
    seen_ids: set[str] = set()
    readers = _Readers(opts, unchanged, workers if unchanged is None else 1, prepare, seen_files)
    try:
        for path, listed in paths:
            walk_entries: list[LedgerEntry] = []
            found = _found_under(path, listed, base, opts, scope, walk_entries)
            window_files = WINDOW_FILES if readers.workers > 1 else 1
            for event in readers.events(_windows(found, walk_entries, seen_files, window_files)):
                if isinstance(event, LedgerEntry):
                    ledger.append(event)
                    continue
                for doc, entry in event:
                    if doc is not None and doc.id in seen_ids:
                        # Only a file named like an archive member or a record ("a.zip!", "b.csv#1").
                        entry.status, entry.reason = (
                            "skipped",
                            f"id {doc.id!r} repeats an earlier document",
                        )
                        entry.document_id = ""
                        doc = None
                    ledger.append(entry)
                    if doc is not None:
                        seen_ids.add(doc.id)
                        yield doc
                    elif entry.reason == UNCHANGED_REASON:
                        seen_ids.add(entry.document_id)
    finally:
        readers.close()
