"""E-mail: single messages (``.eml``) and mailboxes (``.mbox``), with the standard library.

A message's text is its body: the first plain-text part that is not an attachment,
else the first HTML part reduced to text. The subject becomes the title; sender, date
and message id become metadata (the date as ISO text, so ``--keeper newest`` can use
it). The lenient ``compat32`` parser is used because it never raises on malformed
headers, which real mailboxes are full of.
"""

from __future__ import annotations

import email
import email.header
import email.utils
import re
from collections.abc import Iterator
from email.message import Message
from typing import BinaryIO

from .budget import WorkBudget
from .document import Item, Outcome
from .encoding import decode_text
from .html_text import html_to_text
from .options import ReadOptions, record_too_large

__all__ = ["read_eml", "read_mbox", "stream_mbox", "split_mbox"]

_FROM_LINE = re.compile(rb"^From ", re.M)
_QUOTED_FROM = re.compile(rb"^>(>*From )", re.M)


def _header(message: Message, name: str) -> str:
    raw = message.get(name)
    if raw is None:
        return ""
    try:
        value = str(email.header.make_header(email.header.decode_header(str(raw))))
    except Exception:  # an unknown charset or a broken encoded word: keep it as written
        value = str(raw)
    # Raw 8-bit header bytes arrive as lone surrogates; they are nearly always UTF-8.
    value = value.encode("utf-8", "surrogateescape").decode("utf-8", "replace")
    return " ".join(value.split())


def _iso_date(value: str) -> str:
    if not value:
        return ""
    try:
        return email.utils.parsedate_to_datetime(value).isoformat()
    except (TypeError, ValueError, IndexError, OverflowError):
        return ""


def _body_part(message: Message) -> Message | None:
    plain = html = None
    for part in message.walk():
        if part.is_multipart():
            continue
        disposition = str(part.get("Content-Disposition", "")).split(";")[0].strip().lower()
        if disposition == "attachment":
            continue
        kind = part.get_content_type()
        if kind == "text/plain" and plain is None:
            plain = part
        elif kind == "text/html" and html is None:
            html = part
    return plain if plain is not None else html


def _part_text(part: Message) -> tuple[str | None, str, str]:
    """``(text, encoding, problem)`` of one body part."""
    payload = part.get_payload(decode=True)
    if not isinstance(payload, bytes):
        payload = str(part.get_payload()).encode("utf-8", "surrogateescape")
    charset = part.get_content_charset()
    if charset:
        try:
            return payload.decode(charset), charset, ""
        except (LookupError, UnicodeDecodeError):
            pass  # a wrong or unknown declared charset: find out ourselves
    return decode_text(payload)


def _message_outcome(data: bytes, item: Item, opts: ReadOptions, *, record: str = "", key=None) -> Outcome:
    message = email.message_from_bytes(data)
    part = _body_part(message)
    text, encoding = "", ""
    if part is not None:
        decoded, encoding, problem = _part_text(part)
        if decoded is None:
            return None, item.entry(
                "skipped", f"{record + ': ' if record else ''}message body: {problem}", record=record
            )
        text = (
            html_to_text(
                decoded,
                keep_all=opts.html_keep_all,
                budget=WorkBudget(len(decoded), "the HTML tokenizer", opts.work_per_char),
            )[0]
            if part.get_content_type() == "text/html"
            else decoded
        )
    metadata = {
        "from": _header(message, "From"),
        "to": _header(message, "To"),
        "date": _iso_date(_header(message, "Date")),
        "message_id": _header(message, "Message-ID"),
    }
    metadata = {k: v for k, v in metadata.items() if v}
    return item.document(
        text.strip(),
        title=_header(message, "Subject")[:200],
        encoding=encoding,
        record=record,
        key=key,
        metadata=metadata,
    )


def read_eml(data: bytes, item: Item, opts: ReadOptions) -> Iterator[Outcome]:
    """One document from a single message."""
    nul = data.find(b"\x00")
    if nul >= 0:
        yield None, item.entry("skipped", f"binary data: NUL byte at offset {nul}")
        return
    yield _message_outcome(data, item, opts)


def split_mbox(data: bytes) -> tuple[bytes, Iterator[bytes]]:
    """``(text before the first message, messages)``; each message without its ``From `` line.

    Messages start at lines beginning with ``From `` (as the standard library's mailbox
    module reads them); ``>From`` quoting in bodies is undone.
    """
    starts = [m.start() for m in _FROM_LINE.finditer(data)]
    preamble = data[: starts[0]] if starts else data

    def messages() -> Iterator[bytes]:
        for i, start in enumerate(starts):
            end = starts[i + 1] if i + 1 < len(starts) else len(data)
            first_line_end = data.find(b"\n", start, end)
            body = data[first_line_end + 1 : end] if first_line_end >= 0 else b""
            yield _QUOTED_FROM.sub(rb"\1", body)

    return preamble, messages()


_NOT_MBOX = "not an mbox mailbox: it does not start with a 'From ' line"


def _mbox_message(number: int, message: bytes, item: Item, opts: ReadOptions) -> Outcome:
    label = f"message {number}"
    try:
        return _message_outcome(message, item, opts, record=label, key=label)
    except Exception as err:  # one broken message, not the whole mailbox
        reason = f"{label}: cannot be read: {' '.join(str(err).split())[:200] or type(err).__name__}"
        return None, item.entry("skipped", reason, record=label)


def read_mbox(data: bytes, item: Item, opts: ReadOptions) -> Iterator[Outcome]:
    """One document per message of a mailbox, named ``box.mbox#message N``."""
    nul = data.find(b"\x00")
    if nul >= 0:
        yield None, item.entry("skipped", f"binary data: NUL byte at offset {nul}")
        return
    preamble, messages = split_mbox(data)
    if preamble.strip():
        yield None, item.entry("skipped", _NOT_MBOX)
        return
    count = 0
    for count, message in enumerate(messages, 1):
        yield _mbox_message(count, message, item, opts)
    if count == 0:
        yield None, item.entry("empty", "no messages")


def _first_nul(stream: BinaryIO) -> int:
    """Offset of the first NUL byte of a seekable stream (-1: none), read a MiB at a time;
    the stream is back at its start after."""
    offset = 0
    try:
        while chunk := stream.read(1 << 20):
            found = chunk.find(b"\x00")
            if found >= 0:
                return offset + found
            offset += len(chunk)
        return -1
    finally:
        stream.seek(0)


def stream_mbox(stream: BinaryIO, item: Item, opts: ReadOptions) -> Iterator[Outcome]:
    """`read_mbox` of a mailbox larger than ``max_file_bytes``, read from a seekable stream a
    line at a time: the limit then bounds each message (a longer one is passed over
    without being held, and recorded as skipped), and every other message reads as in a
    file read whole. A first pass looks for NUL bytes (a binary file is skipped whole, as
    when read whole). Memory: one message and one line."""
    nul = _first_nul(stream)
    if nul >= 0:
        yield None, item.entry("skipped", f"binary data: NUL byte at offset {nul}")
        return
    limit = opts.max_file_bytes
    count, lines, size, preamble = 0, None, 0, False  # lines: None before the first message
    line_start = True
    while piece := stream.readline(limit + 1):
        starts_message = line_start and piece.startswith(b"From ")
        line_start = piece.endswith(b"\n")
        if starts_message:
            if count:
                yield _finished_message(count, lines, size, item, opts)
            elif preamble:
                yield None, item.entry("skipped", _NOT_MBOX)
                return
            count, lines, size = count + 1, [], 0
            while not line_start and (piece := stream.readline(limit + 1)):  # the rest of a long From line
                line_start = piece.endswith(b"\n")
        elif lines is None:
            preamble = preamble or bool(piece.strip())
        else:
            size += len(piece)
            if size <= limit:
                lines.append(piece)
            elif lines:
                lines = []  # a message over the limit is not held
    if count:
        yield _finished_message(count, lines, size, item, opts)
    elif preamble:
        yield None, item.entry("skipped", _NOT_MBOX)
    else:
        yield None, item.entry("empty", "no messages")


def _finished_message(number: int, lines: list[bytes], size: int, item: Item, opts: ReadOptions) -> Outcome:
    if size > opts.max_file_bytes:
        label = f"message {number}"
        reason = f"{label}: {record_too_large(opts.max_file_bytes)}"
        return None, item.entry("skipped", reason, record=label)
    return _mbox_message(number, _QUOTED_FROM.sub(rb"\1", b"".join(lines)), item, opts)
