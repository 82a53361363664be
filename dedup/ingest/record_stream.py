"""Record files read from a stream a record at a time: JSONL, JSON, CSV and TSV of any size.

A record file is one document per record, so its size says nothing about the size of a
document: a 57 MB JSON Lines file of abstracts is the normal case for corpus work. A
record file larger than ``max_file_bytes``, or a compressed one, is therefore not read
whole: its lines (a JSON file: pieces of its text) are read one at a time, and the
per-file limit becomes a per-record one. A record (a JSONL line, a CSV row, an item of a
JSON array) longer than ``max_file_bytes`` bytes is passed over without being held, and
recorded as skipped with the reason; every other record is read exactly as in a file
read whole (the same labels, ids and ledger entries), its text cut at
``max_text_chars`` like any document's.

The encoding is told from the first MiB (`HEAD_BYTES`) by `decode_text`, as for a
whole file: a byte-order mark, UTF-16/32, UTF-8, or a recorded guess; UTF-8 with a
few bad bytes (`damaged_utf8`) is read as UTF-8. A line that does not decode is a
skipped record with the reason, not the end of the file; in a JSON file, whose
structure has no lines to resume at, the rest of the file is recorded as not read. A stream that fails (a damaged compressed file, an archive limit) gives the
records before the failure, then raises it. Memory: the first MiB, and one record at a
time.
"""

from __future__ import annotations

import codecs
import io
import re
from collections.abc import Iterator
from typing import BinaryIO

from .document import Item, Outcome
from .encoding import GUESSED, damaged_utf8, decode_text
from .options import ReadOptions, record_too_large
from .records import (
    Line,
    Passed,
    TextProblem,
    csv_line_records,
    json_piece_records,
    jsonl_line_records,
    record_outcomes,
)

__all__ = ["STREAMED_RECORD_FORMATS", "HEAD_BYTES", "stream_records"]

STREAMED_RECORD_FORMATS = frozenset({"jsonl", "json", "csv", "tsv"})
HEAD_BYTES = 1 << 20
_CHUNK = 1 << 16
_BOMS = {
    "utf-8-sig": codecs.BOM_UTF8,
    "utf-16-le": codecs.BOM_UTF16_LE,
    "utf-16-be": codecs.BOM_UTF16_BE,
    "utf-32-le": codecs.BOM_UTF32_LE,
    "utf-32-be": codecs.BOM_UTF32_BE,
}
_WIDE = {"utf-16-le": 2, "utf-16-be": 2, "utf-32-le": 4, "utf-32-be": 4}
# A carriage return not followed by a line feed ends a CSV line too (as
# ``open(..., newline="")`` reads it), though it does not end a JSON Lines line.
_BARE_CR = re.compile(r"(?<=\r)(?!\n)")


class _Failing(io.RawIOBase):
    """A stream that failed while its head was read: reading on raises its error again,
    so that the records of the head come first and the failure after them."""

    def __init__(self, error: Exception) -> None:
        self._error = error

    def readable(self) -> bool:
        return True

    def readinto(self, buffer) -> int:
        raise self._error


class _Prefixed(io.RawIOBase):
    """The bytes already read from a stream (``head``), then the rest of the stream."""

    def __init__(self, head: bytes, rest: BinaryIO) -> None:
        self._head, self._rest = memoryview(head), rest

    def readable(self) -> bool:
        return True

    def readinto(self, buffer) -> int:
        if self._head:
            count = min(len(buffer), len(self._head))
            buffer[:count] = self._head[:count]
            self._head = self._head[count:]
            return count
        data = self._rest.read(len(buffer))
        buffer[: len(data)] = data
        return len(data)


def _sample(head: bytes, whole: bool) -> bytes:
    """The head cut so that no character is cut in two: after its last line end, or, in
    a single line, before the character that the cut would split (UTF-8); at a multiple
    of four bytes when it holds NUL bytes (UTF-16/32). The whole head when it is all of
    the file."""
    if whole:
        return head
    if b"\x00" in head:
        return head[: len(head) - len(head) % 4]
    end = head.rfind(b"\n") + 1
    if end:
        return head[:end]
    end = max(len(head) - 4, 0)
    while end and 0x80 <= head[end] < 0xC0:  # a UTF-8 continuation byte
        end -= 1
    return head[:end] or head


def _head(stream: BinaryIO) -> tuple[bytes, Exception | None]:
    """The first `HEAD_BYTES` of the stream, and the error that stopped reading them, if
    one did (a damaged compressed file, an archive limit): the bytes before it are read."""
    chunks: list[bytes] = []
    total = 0
    try:
        while total < HEAD_BYTES:
            chunk = stream.read(min(_CHUNK, HEAD_BYTES - total))
            if not chunk:
                break
            chunks.append(chunk)
            total += len(chunk)
    except Exception as err:  # raised again after the records read before it (`_Failing`)
        return b"".join(chunks), err
    return b"".join(chunks), None


def _text_encoding(head: bytes, whole: bool) -> tuple[str, str, str]:
    """``(codec, recorded, problem)`` told from the head: the codec to read on with (empty
    when the file is not text), the encoding as the ledger records it, and why not."""
    sample = _sample(head, whole)
    _, recorded, problem = decode_text(sample)
    if problem and damaged_utf8(sample):  # UTF-8 with bad bytes: they cost their lines only
        return "utf-8", "utf-8", ""
    if problem:
        return "", recorded, problem
    codec = recorded[len(GUESSED) :] if recorded.startswith(GUESSED) else recorded
    return codec, recorded, ""


def _byte_lines(stream: BinaryIO, limit: int) -> Iterator[bytes | Passed]:
    """Lines ending in ``b"\\n"`` (the last may not), at most ``limit`` bytes before it;
    a longer line is read through in pieces and given as `Passed`."""
    while True:
        line = stream.readline(limit + 1)
        if not line:
            return
        if len(line) <= limit or line.endswith(b"\n"):
            yield line
            continue
        quotes = line.count(b'"')
        while not line.endswith(b"\n"):
            line = stream.readline(_CHUNK)
            if not line:
                break
            quotes += line.count(b'"')
        yield Passed(record_too_large(limit), quotes)


def _decoded(lines: Iterator[bytes | Passed], codec: str, csv_lines: bool) -> Iterator[Line]:
    """Each line decoded on its own: a line that does not decode is `Passed` with the reason."""
    for line in lines:
        if isinstance(line, Passed):
            yield line
            continue
        try:
            text = line.decode(codec)
        except UnicodeDecodeError as err:
            bad = line[err.start : err.start + 1].hex()
            reason = f"not {codec} text: byte 0x{bad} at offset {err.start} of the line cannot be decoded"
            yield Passed(reason, line.count(b'"'))
            continue
        if csv_lines and "\r" in text[:-2]:
            yield from (piece for piece in _BARE_CR.split(text) if piece)
        else:
            yield text


def _wide_lines(stream: BinaryIO, codec: str, limit: int, csv_lines: bool) -> Iterator[Line]:
    """Lines of UTF-16/32 text, at most ``limit`` bytes' worth of characters each; a
    byte that does not decode ends the file (it cannot be told where the next line starts)."""
    reader = io.TextIOWrapper(stream, encoding=codec, errors="strict", newline="" if csv_lines else "\n")
    chars = max(1, limit // _WIDE[codec])
    while True:
        line = reader.readline(chars + 1)
        if not line:
            return
        if len(line) <= chars or line.endswith(("\n", "\r")):
            yield line
            continue
        quotes = line.count('"')
        while not line.endswith(("\n", "\r")):
            line = reader.readline(_CHUNK)
            if not line:
                break
            quotes += line.count('"')
        yield Passed(record_too_large(limit), quotes)


def _lines(stream: BinaryIO, codec: str, limit: int, csv_lines: bool) -> Iterator[Line]:
    if codec in _WIDE:
        return _wide_lines(stream, codec, limit, csv_lines)
    return _decoded(_byte_lines(stream, limit), "utf-8" if codec == "utf-8-sig" else codec, csv_lines)


def _text_pieces(stream: BinaryIO, codec: str) -> Iterator[str]:
    """The stream's text a piece at a time; bytes that do not decode end it (the text
    before them given) with `TextProblem`, at their offset in the file (counted after the
    byte-order mark)."""
    decoder = codecs.getincrementaldecoder(codec)(errors="strict")
    offset = 0
    while True:
        data = stream.read(_CHUNK)
        pending = len(decoder.getstate()[0])  # bytes of a character cut by the last read
        try:
            piece = decoder.decode(data, final=not data)
        except UnicodeDecodeError as err:
            good = err.object[: err.start].decode(codec)  # the text before the byte is read
            if good:
                yield good
            bad = err.object[err.start : err.start + 1].hex()
            at = offset - pending + err.start
            raise TextProblem(f"not {codec} text: byte 0x{bad} at offset {at} cannot be decoded") from None
        offset += len(data)
        if piece:
            yield piece
        if not data:
            return


def stream_records(stream: BinaryIO, item: Item, opts: ReadOptions) -> Iterator[Outcome]:
    """Documents and ledger entries of a JSONL, JSON, CSV or TSV file read from
    ``stream`` a line (JSON: a piece) at a time (see the module's notes); errors of the
    stream itself (a damaged compressed file) are raised to the caller, after the
    records read before them.
    """
    head, error = _head(stream)
    codec, recorded, problem = _text_encoding(head, error is None and len(head) < HEAD_BYTES)
    if problem:
        if error is not None:
            raise error
        yield None, item.entry("skipped", problem, encoding=recorded)
        return
    bom = _BOMS.get(codec, b"")
    if bom and head.startswith(bom):
        head = head[len(bom) :]
    if error is not None:  # the last line of the head may be cut: it goes with the error
        head = head[: head.rfind(b"\n") + 1]
    buffered = io.BufferedReader(_Prefixed(head, stream if error is None else _Failing(error)), _CHUNK)
    limit = opts.max_file_bytes
    if item.format == "jsonl":
        triples = jsonl_line_records(_lines(buffered, codec, limit, False))
    elif item.format == "json":
        triples = json_piece_records(
            _text_pieces(buffered, "utf-8" if codec == "utf-8-sig" else codec), limit
        )
    else:
        delimiter = "\t" if item.format == "tsv" else ","
        triples = csv_line_records(_lines(buffered, codec, limit, True), delimiter, opts.text_fields, limit)
    yield from record_outcomes(triples, item, opts, encoding=recorded)
