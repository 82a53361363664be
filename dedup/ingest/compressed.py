"""Single compressed files: ``name.jsonl.gz``, ``notes.txt.bz2``, ``page.html.xz``, ``corpus.csv.zst``.

A compressed file holds one file; its format is the name without the compression suffix
(`compressed_format`), and its document ids are those the file would have uncompressed,
with the suffix kept: ``a/b.txt.gz`` is the document ``a/b.txt.gz``, and its records
``a/b.jsonl.gz#line 3``, so that an id always names the file on disk. ``.gz``, ``.bz2``
and ``.xz`` are read with the standard library; ``.zst`` needs the ``zstandard`` package
(part of the ``dedup[docs]`` extra), and without it such a file is skipped with the
reason saying so.

A compressed file is read as a stream, never written out: every byte that comes out of
the decompressor is counted against the same `ExpansionBudget` as an archive's members
(``max_archive_ratio`` times the compressed size, at most ``max_archive_bytes``), so a
compression bomb stops at its allowance and is recorded as refused. Record files
(JSONL, CSV, TSV) are read a record at a time, whatever their size; other formats are
read into memory whole, at most ``max_file_bytes`` of them once decompressed, as an
archive member is. A damaged or cut-off file is recorded as skipped with the
decompressor's complaint (after the records read before the damage).
"""

from __future__ import annotations

import bz2
import gzip
import io
import lzma
import zlib
from typing import BinaryIO

from .optional import load

__all__ = [
    "COMPRESSIONS",
    "compressed_format",
    "unsupported_compressed",
    "decompressing",
    "damage",
    "DAMAGE_ERRORS",
    "zstd_complete",
]

# Suffix → what the ledger and the messages call it.
COMPRESSIONS = {".gz": "gzip", ".bz2": "bzip2", ".xz": "xz", ".zst": "zstd"}
# What the decompressors raise on damaged or cut-off data (zstandard's error is added
# when the package is loaded: see `damage`).
DAMAGE_ERRORS: tuple[type[BaseException], ...] = (
    OSError,  # gzip: bad magic, CRC check failed
    EOFError,  # every decompressor: the data ended before the end of the stream
    zlib.error,
    lzma.LZMAError,
)


def compressed_format(path: str, format_of) -> tuple[str, str] | None:
    """``(format, suffix)`` of a compressed single file, or None when the name does not
    end in a compression suffix after a format we read.

    ``format_of`` is the reader's lookup of a format by name (passed in, so that this
    module does not depend on the readers). Archives keep their own names (``.tar.gz``
    is an archive, read member by member), and a compressed archive of another kind
    (``.zip.gz``) is not read.

    >>> from dedup.ingest.readers import format_of
    >>> compressed_format("corpus/part-1.jsonl.gz", format_of), compressed_format("a.tar.gz", format_of)
    (('jsonl', '.gz'), None)
    """
    name = path[path.rfind("/") + 1 :]
    dot = name.rfind(".")
    if dot <= 0:
        return None
    suffix = name[dot:].lower()
    if suffix not in COMPRESSIONS or format_of(path) is not None:
        return None
    inner = format_of(name[:dot])
    if inner is None or inner == "zip" or inner.startswith("tar"):
        return None
    return inner, suffix


def unsupported_compressed(name: str) -> str:
    """Why a file name ending in a compression suffix is not read (it is not one of
    `compressed_format`), or ``""`` for any other name.

    >>> unsupported_compressed("scan.png.gz"), unsupported_compressed("dump.gz")
    ('unsupported file type .png.gz', 'unsupported file type .gz (the format is told by the name before it, as in name.jsonl.gz)')
    """
    dot = name.rfind(".")
    suffix = name[dot:].lower() if dot > 0 else ""
    if suffix not in COMPRESSIONS:
        return ""
    inner = name[:dot]
    inner_dot = inner.rfind(".")
    if inner_dot > 0:
        return f"unsupported file type {inner[inner_dot:]}{name[dot:]}"
    return f"unsupported file type {name[dot:]} (the format is told by the name before it, as in name.jsonl{suffix})"


_ZSTD_MAGIC = 0xFD2FB528
_SKIPPABLE = 0x184D2A50  # to 0x184D2A5F: a skippable frame (RFC 8878, section 3.1.2)


def _zstd_frame_end(handle: BinaryIO, start: int, blocks: list[int]) -> int | None:
    """Where the zstd frame at ``start`` ends, from its header and block headers (RFC 8878,
    section 3.1.1), or None when its magic number is not one of a frame; ``blocks[0]``
    counts the blocks passed (it stops past `_MAX_BLOCKS`)."""
    handle.seek(start)
    head = handle.read(8)
    if len(head) < 5:
        return start + 5  # cut off in its magic number or header
    magic = int.from_bytes(head[:4], "little")
    if magic & ~0xF == _SKIPPABLE:
        return start + 8 + int.from_bytes(head[4:8], "little")
    if magic != _ZSTD_MAGIC:
        return None
    flags = head[4]
    single_segment = (flags >> 5) & 1
    size_bytes = (0 if not single_segment else 1, 2, 4, 8)[flags >> 6]
    position = start + 5 + (1 - single_segment) + (0, 1, 2, 4)[flags & 3] + size_bytes
    while blocks[0] <= _MAX_BLOCKS:
        blocks[0] += 1
        handle.seek(position)
        header = handle.read(3)
        if len(header) < 3:
            return position + 3
        value = int.from_bytes(header, "little")
        position += 3 + (1 if (value >> 1) & 3 == 1 else value >> 3)
        if value & 1:  # the last block, then the checksum when the frame has one
            return position + 4 * ((flags >> 2) & 1)
    return position


# Blocks examined at most by `zstd_complete` (a few seconds' work): past them a file is
# taken to be whole. Real files have far fewer (a block holds up to 128 KB of output).
_MAX_BLOCKS = 1_000_000


def zstd_complete(handle: BinaryIO) -> bool:
    """True unless the zstd data of ``handle`` is cut off inside a frame (its last block,
    header or checksum is missing). Other damage is left to the decompressor to find.
    Cost: one small read per block, at most `_MAX_BLOCKS` of them."""
    total = handle.seek(0, 2)
    position, blocks = 0, [0]
    while position < total:
        end = _zstd_frame_end(handle, position, blocks)
        if end is None or blocks[0] > _MAX_BLOCKS:
            return True
        position = end
    return position == total


class _Checked(io.RawIOBase):
    """A decompressed zstd stream that raises `EOFError` at its end when its input was cut
    off inside a frame (zstandard's reader ends quietly where its input does)."""

    def __init__(self, reader: BinaryIO, handle: BinaryIO) -> None:
        self._reader, self._handle = reader, handle

    def readable(self) -> bool:
        return True

    def readinto(self, buffer) -> int:
        data = self._reader.read(len(buffer))
        if not data and not zstd_complete(self._handle):
            raise EOFError("compressed file ended before the end-of-stream marker was reached")
        buffer[: len(data)] = data
        return len(data)


def _zstd_reader(handle: BinaryIO) -> BinaryIO:
    zstandard = load("zstandard", ".zst")
    reader = zstandard.ZstdDecompressor().stream_reader(handle, read_across_frames=True, closefd=False)
    return io.BufferedReader(_Checked(reader, handle))


def decompressing(handle: BinaryIO, suffix: str) -> BinaryIO:
    """A stream of the decompressed bytes of ``handle``, compressed as ``suffix`` says.

    Raises `MissingParser` for ``.zst`` without the ``zstandard`` package. Nothing is
    read until the stream is.
    """
    if suffix == ".gz":
        return gzip.GzipFile(fileobj=handle, mode="rb")
    if suffix == ".bz2":
        return bz2.BZ2File(handle)
    if suffix == ".xz":
        return lzma.LZMAFile(handle)
    return _zstd_reader(handle)


def damage(err: BaseException) -> bool:
    """True when ``err`` is a decompressor's complaint about damaged or cut-off data."""
    if isinstance(err, DAMAGE_ERRORS) and not isinstance(err, UnicodeError):
        return True
    return type(err).__name__ == "ZstdError"
