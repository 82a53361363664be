"""Zip and tar archives read in place, one member at a time.

Nothing is ever extracted to disk: a member's bytes are read into memory (at most
``max_file_bytes``), handed on, and dropped before the next member is read. Members
whose path is absolute or climbs out of the archive (``../``) are refused, links are
not followed, and the expansion of the whole archive is counted against its
`ExpansionBudget`, as are its members: at most ``max_archive_members`` per archive and
``max_run_members`` in a run. A zip lists its members at its end and the standard
library reads that whole list before the first member, so the list is counted first
(`_zip_member_count`, without keeping it) and an archive that lists too many is refused
before it is opened.

Tar archives are read as a stream (``.tar``, ``.tar.gz``/``.tgz``, ``.tar.bz2``,
``.tar.xz``, and ``.tar.zst`` with the ``zstandard`` package): the decompressor is ours,
so every byte it produces is counted before the tar reader sees it, pax headers
included. A single compressed file that is not an archive (``notes.txt.gz``) is read
by `dedup.ingest.compressed`.
"""

from __future__ import annotations

import bz2
import calendar
import gzip
import io
import lzma
import re
import stat
import struct
import tarfile
import zipfile
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from typing import BinaryIO

from .budget import ExpansionBudget, ExpansionExceeded
from .compressed import decompressing
from .filters import clean_name
from .options import ReadOptions, file_too_large

__all__ = ["Member", "iter_zip", "iter_tar", "unsafe_path", "read_bounded", "Counted"]

_CHUNK = 1 << 16
_DRIVE = re.compile(r"^[A-Za-z]:")

# Decides before a member is read: ``(status, reason)`` to pass it over, or None to read it.
Screen = Callable[[str], "tuple[str, str] | None"]


@dataclass
class Member:
    """One member of an archive, read or accounted for.

    ``name`` is its path inside the archive (``""`` for a problem of the archive
    itself); ``status`` is empty when ``data`` holds its bytes, else the ledger status
    with ``reason``. A second member of the same name is told apart by ``copy``
    ("copy 2"), so that each has its own ledger entry.
    """

    name: str
    size: int | None = None
    mtime: float | None = None
    data: bytes | None = None
    status: str = ""
    reason: str = ""
    copy: str = ""


_REPEATED = "repeats an earlier member of the same name"


def _repeat(seen: dict[str, int], member: Member) -> bool:
    """Count the member's name; True (and ``copy`` set) when the name came before."""
    seen[member.name] = seen.get(member.name, 0) + 1
    if seen[member.name] == 1:
        return False
    member.copy = f"copy {seen[member.name]}"
    member.status, member.reason = "skipped", _REPEATED
    return True


def unsafe_path(name: str) -> str:
    """Why a member path could escape the archive if extracted, or ``""``.

    >>> unsafe_path("../../etc/passwd"), unsafe_path("/etc/passwd"), unsafe_path("a/b.txt")
    ("unsafe path in the archive: '..' leads outside it", 'unsafe path in the archive: absolute path', '')
    """
    if "\x00" in name:
        return "unsafe path in the archive: NUL byte in the name"
    path = name.replace("\\", "/")
    if path.startswith("/") or _DRIVE.match(path):
        return "unsafe path in the archive: absolute path"
    if ".." in path.split("/"):
        return "unsafe path in the archive: '..' leads outside it"
    return ""


def _display(name: str) -> str:
    name = clean_name(name)
    while name.startswith("./"):
        name = name[2:]
    return name


def _one_line(err: BaseException) -> str:
    text = " ".join(str(err).split()) or type(err).__name__
    return text[:200]


def _zip_mtime(info: zipfile.ZipInfo) -> float | None:
    try:
        return float(calendar.timegm((*info.date_time, 0, 0, 0)))
    except (TypeError, ValueError, OverflowError):
        return None


def read_bounded(handle: BinaryIO, limit: int) -> bytes:
    """At most ``limit + 1`` bytes, in small reads so no single read can balloon."""
    chunks: list[bytes] = []
    total = 0
    while total <= limit:
        chunk = handle.read(min(_CHUNK, limit + 1 - total))
        if not chunk:
            break
        chunks.append(chunk)
        total += len(chunk)
    return b"".join(chunks)


# The zip format's end-of-archive records and the fixed part of a central directory entry
# (PKWARE APPNOTE.TXT 4.3.12, 4.3.14-4.3.16).
_END = struct.Struct("<4s4H2LH")
_END64_LOCATOR = struct.Struct("<4sLQL")
_END64 = struct.Struct("<4sQ2H2L4Q")
_ENTRY_SIZE = 46
_ENTRY_LENGTHS = struct.Struct("<3H")  # name, extra field and comment lengths, at offset 28


def _central_directory(handle: BinaryIO) -> tuple[int, int] | None:
    """``(start, size)`` of a zip's list of members, found from its end records as the
    standard library finds it (data prepended to the archive allowed); None when not found."""
    end = handle.seek(0, io.SEEK_END)
    tail_size = min(end, _END.size + 0xFFFF)
    handle.seek(end - tail_size)
    tail = handle.read(tail_size)
    at = tail.rfind(b"PK\x05\x06")
    if at < 0 or len(tail) - at < _END.size:
        return None
    record = end - tail_size + at
    size = _END.unpack_from(tail, at)[5]
    start = record - size
    if record >= _END64_LOCATOR.size + _END64.size:
        handle.seek(record - _END64_LOCATOR.size - _END64.size)
        zip64 = handle.read(_END64.size + _END64_LOCATOR.size)
        if zip64[_END64.size : _END64.size + 4] == b"PK\x06\x07" and zip64[:4] == b"PK\x06\x06":
            size = _END64.unpack_from(zip64)[8]
            start = record - _END64_LOCATOR.size - _END64.size - size
    return (start, size) if start >= 0 else None


def _zip_member_count(handle: BinaryIO, limit: int) -> int:
    """Entries in a zip's list of members, counted up to ``limit + 1`` without keeping them
    (0 when the list cannot be found: the standard library then says what is wrong).
    Cost: reads the list up to that entry, in 64 KB pieces."""
    found = _central_directory(handle)
    count = 0
    if found is not None:
        start, size = found
        handle.seek(start)
        buffer, offset, position = b"", 0, 0
        while position < size and count <= limit:
            if offset + _ENTRY_SIZE > len(buffer):
                buffer, offset = buffer[offset:] + handle.read(_CHUNK), 0
                if len(buffer) < _ENTRY_SIZE:
                    break
            if buffer[offset : offset + 4] != b"PK\x01\x02":
                break
            length = _ENTRY_SIZE + sum(_ENTRY_LENGTHS.unpack_from(buffer, offset + 28))
            count += 1
            position += length
            offset += length
            if offset > len(buffer):  # a long entry: go on from its end
                handle.seek(start + position)
                buffer, offset = b"", 0
    handle.seek(0)
    return count


def iter_zip(
    handle: BinaryIO, opts: ReadOptions, budget: ExpansionBudget, screen: Screen
) -> Iterator[Member]:
    """Members of a zip archive in the archive's own order, each read or accounted for;
    past the member limits, one entry for the rest."""
    try:
        if _zip_member_count(handle, opts.max_archive_members) > opts.max_archive_members:
            yield Member("", status="refused", reason=f"not read: {budget.too_many_members()}")
            return
        archive = zipfile.ZipFile(handle)
        infos = archive.infolist()
    except Exception as err:  # zipfile raises many kinds on hostile bytes
        yield Member("", status="skipped", reason=f"not a readable zip archive: {_one_line(err)}")
        return
    seen: dict[str, int] = {}
    exhausted = ""
    with archive:
        for info in infos:
            if info.is_dir():
                continue
            too_many = budget.admit_member()
            if too_many:
                yield Member("", status="refused", reason=f"rest of the archive not read: {too_many}")
                return
            name = _display(info.filename)
            member = Member(name, info.file_size, _zip_mtime(info))
            mode = info.external_attr >> 16
            if _repeat(seen, member):
                pass
            elif unsafe_path(info.filename):
                member.status, member.reason = "refused", unsafe_path(info.filename)
            elif stat.S_ISLNK(mode):
                member.status, member.reason = "skipped", "link inside an archive, not followed"
            elif (verdict := screen(name)) is not None:
                member.status, member.reason = verdict
            elif info.flag_bits & 0x1:
                member.status, member.reason = "skipped", "encrypted archive member: needs a password"
            elif info.file_size > opts.max_file_bytes:
                member.status, member.reason = "skipped", file_too_large(info.file_size, opts.max_file_bytes)
            elif exhausted or info.file_size > budget.remaining():
                exhausted = exhausted or budget.why()
                member.status, member.reason = "refused", f"archive limit: {exhausted}"
            else:
                try:
                    with archive.open(info) as stream:
                        data = read_bounded(stream, min(opts.max_file_bytes, budget.remaining()))
                    budget.take(len(data))
                except ExpansionExceeded as err:
                    exhausted = str(err)
                    member.status, member.reason = "refused", f"archive limit: {exhausted}"
                except Exception as err:  # damaged data: CRC, zlib, unsupported method ...
                    member.status, member.reason = "skipped", f"damaged archive member: {_one_line(err)}"
                else:
                    if len(data) > opts.max_file_bytes:
                        member.status, member.reason = (
                            "skipped",
                            file_too_large(len(data), opts.max_file_bytes),
                        )
                    else:
                        member.data, member.size = data, len(data)
            yield member


class Counted(io.RawIOBase):
    """A read-only stream that counts every byte against the budget as it is read."""

    def __init__(self, raw: BinaryIO, budget: ExpansionBudget) -> None:
        self._raw = raw
        self._budget = budget

    def readable(self) -> bool:
        return True

    def read(self, size: int = -1) -> bytes:
        data = self._raw.read(_CHUNK if size is None or size < 0 else size)
        self._budget.take(len(data))
        return data

    def readinto(self, buffer) -> int:
        data = self.read(len(buffer))
        buffer[: len(data)] = data
        return len(data)


def _decompressed(handle: BinaryIO) -> BinaryIO:
    magic = handle.read(6)
    handle.seek(0)
    if magic.startswith(b"\x1f\x8b"):
        return gzip.GzipFile(fileobj=handle, mode="rb")
    if magic.startswith(b"BZh"):
        return bz2.BZ2File(handle)
    if magic.startswith(b"\xfd7zXZ\x00"):
        return lzma.LZMAFile(handle)
    if magic.startswith(b"\x28\xb5\x2f\xfd"):  # zstd: needs the zstandard package
        return decompressing(handle, ".zst")
    return handle


def _tar_mtime(info: tarfile.TarInfo) -> float | None:
    try:
        return float(info.mtime)
    except (TypeError, ValueError, OverflowError):
        return None


def _tar_kind(info: tarfile.TarInfo) -> str:
    if info.issym() or info.islnk():
        return "link inside an archive, not followed"
    if not info.isreg():
        return "not a regular file (device or pipe inside an archive)"
    return ""


def iter_tar(
    handle: BinaryIO, opts: ReadOptions, budget: ExpansionBudget, screen: Screen
) -> Iterator[Member]:
    """Members of a tar archive (plain, gzip, bzip2 or xz) in stream order."""
    count = 0
    current: Member | None = None
    try:
        # Stream mode reads the members in order and never seeks; closing it is not
        # needed (it owns no file) and the generator may stop between members.
        archive = tarfile.open(fileobj=Counted(_decompressed(handle), budget), mode="r|")  # noqa: SIM115
        seen: dict[str, int] = {}
        for info in archive:
            if info.isdir():
                continue
            too_many = budget.admit_member()
            if too_many:
                yield Member("", status="refused", reason=f"rest of the archive not read: {too_many}")
                return
            name = _display(info.name)
            current = member = Member(name, info.size, _tar_mtime(info))
            if _repeat(seen, member):
                pass
            elif unsafe_path(info.name):
                member.status, member.reason = "refused", unsafe_path(info.name)
            elif _tar_kind(info):
                member.status, member.reason = "skipped", _tar_kind(info)
            elif (verdict := screen(name)) is not None:
                member.status, member.reason = verdict
            elif info.size > opts.max_file_bytes:
                member.status, member.reason = "skipped", file_too_large(info.size, opts.max_file_bytes)
            elif info.size > budget.remaining():
                # Moving past it would expand it anyway: stop here.
                raise ExpansionExceeded(budget.why())
            else:
                stream = archive.extractfile(info)
                member.data = stream.read() if stream is not None else b""
            current = None
            count += 1
            yield member
    except ExpansionExceeded as err:
        if current is not None:
            current.data, current.status, current.reason = None, "refused", f"archive limit: {err}"
            yield current
        yield Member("", status="refused", reason=f"rest of the archive not read: {err}")
    except Exception as err:  # damaged or not a tar: tarfile, gzip, bz2 and lzma errors
        if current is not None:
            current.data, current.status, current.reason = None, "skipped", f"damaged: {_one_line(err)}"
            yield current
        elif count == 0:
            yield Member("", status="skipped", reason=f"not a readable tar archive: {_one_line(err)}")
            return
        yield Member("", status="skipped", reason=f"damaged archive: {_one_line(err)}; rest not read")
