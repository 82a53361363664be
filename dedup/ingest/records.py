"""Records files (JSONL, JSON arrays, CSV, TSV): one document per record.

Parsing yields ``(label, record or None, problem)`` triples one record at a time, so a
large file is never held as a list of records. The label ("line 7", "row 12",
"item 3") is what a person looks for in the file: line numbers are physical lines
(a CSV record with quoted newlines is labelled by its first line). A triple with an
empty label is a problem of the whole file (a missing text column, say).

JSON's grammar has no NaN or Infinity (RFC 8259, section 6), and a number too large for
a float would become infinity: such a record is recorded as not valid, because the
outputs, which are strict JSON, could not hold it.

A broken record costs only itself where the format allows it (JSONL lines, CSV rows);
in a JSON array, whose structure a broken item destroys, the rest of the file is
recorded as not read.

JSONL and CSV are also read a line at a time (`jsonl_line_records`, `csv_line_records`),
and JSON a piece of text at a time (`json_piece_records`), for files too large to hold
(`dedup.ingest.record_stream`), with the same labels and problems as the whole-text
readers, which go through the same code.
"""

from __future__ import annotations

import csv
import datetime
import io
import json
import math
import re
from collections.abc import Iterable, Iterator, Sequence
from typing import NamedTuple

from .document import Item, Outcome
from .options import ReadOptions, record_too_large

__all__ = [
    "jsonl_records",
    "jsonl_line_records",
    "json_records",
    "json_piece_records",
    "TextProblem",
    "csv_records",
    "csv_line_records",
    "record_outcomes",
    "join_fields",
    "Passed",
    "Line",
]

Triple = tuple[str, dict | None, str]

_JSON_WHITESPACE = " \t\n\r"
# csv refuses fields longer than its limit (128 KiB by default); a long text field is
# legitimate here and the file size is bounded already.
_CSV_FIELD_CEILING = 2**31 - 1


def _not_a_number(name: str) -> float:
    raise ValueError(f"{name} is not a JSON number")


def _finite(text: str) -> float:
    value = float(text)
    if math.isinf(value):
        raise ValueError(f"the number {text[:40]} is too large")
    return value


# Strict JSON numbers only (see the module's notes). Cost: a Python call per float.
_DECODER = json.JSONDecoder(parse_constant=_not_a_number, parse_float=_finite)


def _message(err: json.JSONDecodeError) -> str:
    # "Unterminated string starting at" is followed by our own "at line L column C".
    return err.msg.removesuffix(" at")


def _json_problem(err: Exception, text: str = "", offset: int = 0) -> str:
    if isinstance(err, json.JSONDecodeError):
        return f"not valid JSON ({_message(err)} at line {err.lineno} column {err.colno})"
    if isinstance(err, RecursionError):
        line = text.count("\n", 0, offset) + 1
        return f"not valid JSON (nested too deeply, from line {line})"
    return f"not valid JSON ({err})"


def _not_object(label: str, value: object) -> str:
    kind = {list: "list", str: "string", bool: "true/false", type(None): "null"}.get(type(value), "number")
    return f"{label}: a JSON {kind}, not an object with fields"


class Passed(NamedTuple):
    """A line that a record reader could not take (too long, or not in the file's
    encoding), with the reason and the double quotes it held (for CSV, whose rows may
    span lines inside quotes)."""

    reason: str
    quotes: int = 0


# A line of a record file: its text (with its line end), or why it was passed over.
Line = str | Passed


def _jsonl_line(number: int, line: str) -> Triple | None:
    """The record of one JSON Lines line (without its line end); None for a blank line."""
    if not line.strip():
        return None
    label = f"line {number}"
    try:
        value = _DECODER.decode(line)
    except (ValueError, RecursionError) as err:
        return label, None, f"{label}: {_json_problem(err)}"
    return (label, value, "") if isinstance(value, dict) else (label, None, _not_object(label, value))


def jsonl_records(text: str) -> Iterator[Triple]:
    """Records of a JSON Lines text; a broken line is a problem of that line only."""
    # Split on "\n" only: JSON strings may hold U+2028 and other characters that
    # str.splitlines would take for line ends.
    for number, line in enumerate(text.split("\n"), 1):
        triple = _jsonl_line(number, line)
        if triple is not None:
            yield triple


def jsonl_line_records(lines: Iterable[Line]) -> Iterator[Triple]:
    """Records of JSON Lines given a line at a time (each ending in ``"\\n"`` but the
    last), as `jsonl_records` reads them; a line passed over is a skipped record."""
    for number, line in enumerate(lines, 1):
        if isinstance(line, Passed):
            yield f"line {number}", None, f"line {number}: {line.reason}"
            continue
        triple = _jsonl_line(number, line[:-1] if line.endswith("\n") else line)
        if triple is not None:
            yield triple


def _skip_space(text: str, i: int) -> int:
    while i < len(text) and text[i] in _JSON_WHITESPACE:
        i += 1
    return i


class TextProblem(Exception):
    """The text of a record file read piece by piece cannot be read on (bytes not in its
    encoding): ``reason`` says why. Raised by the pieces given to `json_piece_records`."""

    def __init__(self, reason: str) -> None:
        super().__init__(reason)
        self.reason = reason


class _ValueTooLarge(Exception):
    """The JSON value being read is longer than the limit; ``passed``: the text is already
    past it (it was read whole before its length was known)."""

    def __init__(self, passed: bool) -> None:
        super().__init__()
        self.passed = passed


# Characters read at a time when a JSON text is given in pieces; where a string ends
# (or escapes); where a value outside strings may end.
_PIECE = 1 << 16
_IN_STRING = re.compile(r'["\\]')
_OUTSIDE = re.compile(r'[\[\]{}",]')


class _JsonText:
    """A JSON text read piece by piece (`json_piece_records`): ``text[pos:]`` is what is
    not parsed yet, and ``text[0]`` is at line ``_line``, column ``_col`` of the file. The
    text parsed is dropped as more is read, so memory holds one value and a piece."""

    def __init__(self, pieces: Iterator[str]) -> None:
        self._pieces = pieces
        self.text, self.pos, self.ended = "", 0, False
        self.problem = ""  # why the text could not be read on, when it could not
        self._line, self._col = 1, 1

    @classmethod
    def whole(cls, text: str) -> _JsonText:
        """A text given whole: nothing more to read."""
        read = cls(iter(()))
        read.text, read.ended = text, True
        return read

    def read_more(self, at_least: int = 1) -> bool:
        """Append at least ``at_least`` more characters (fewer at the end of the file);
        False when there were none."""
        got, count = [], 0
        while count < at_least and not self.ended:
            try:
                piece = next(self._pieces, None)
            except TextProblem as err:
                piece, self.problem = None, err.reason
            if piece is None:
                self.ended = True
            else:
                got.append(piece)
                count += len(piece)
        if got:
            self._forget()
            self.text += "".join(got)
        return bool(got)

    def _forget(self) -> None:
        # Drop the text before ``pos``, counting its lines for `where`.
        newlines = self.text.count("\n", 0, self.pos)
        if newlines:
            self._line += newlines
            self._col = self.pos - self.text.rfind("\n", 0, self.pos)
        else:
            self._col += self.pos
        self.text, self.pos = self.text[self.pos :], 0

    def skip_space(self) -> bool:
        """Move past white space; False at the end of the file."""
        while True:
            self.pos = _skip_space(self.text, self.pos)
            if self.pos < len(self.text):
                return True
            if not self.read_more():
                return False

    def next_is(self, char: str) -> bool:
        return self.pos < len(self.text) and self.text[self.pos] == char

    def where(self, i: int) -> str:
        """``line L column C`` of ``text[i]`` in the file."""
        newlines = self.text.count("\n", 0, i)
        if newlines:
            return f"line {self._line + newlines} column {i - self.text.rfind(chr(10), 0, i)}"
        return f"line {self._line} column {self._col + i}"

    def line_of(self, i: int) -> int:
        return self._line + self.text.count("\n", 0, i)

    def decode(self, limit: int):
        """The JSON value at ``pos``, moving past it; reads on while the end of what is read
        may cut it. Raises ValueError or RecursionError for JSON that is not valid,
        `_ValueTooLarge` when the value holds more than ``limit`` characters."""
        while True:
            try:
                value, end = _DECODER.raw_decode(self.text, self.pos)
            except json.JSONDecodeError as err:
                if self.ended or not _maybe_cut(err, len(self.text)):
                    raise
            else:
                if self.ended or (end < len(self.text) and not _number_may_go_on(value, self.text[end])):
                    start, self.pos = self.pos, end
                    if end - start > limit:
                        raise _ValueTooLarge(passed=True)
                    return value
            if len(self.text) - self.pos > limit:
                raise _ValueTooLarge(passed=False)
            self.read_more(max(_PIECE, len(self.text) - self.pos))

    def pass_value(self) -> bool:
        """Move past the value at ``pos`` without holding it (strings and brackets counted);
        False when the file ends inside it. For a value over the limit."""
        i, depth, in_string = self.pos, 0, False
        while True:
            found = (_IN_STRING if in_string else _OUTSIDE).search(self.text, i)
            # Nothing found in what is read, or an escape whose character is not read yet.
            if found is None or (found.group() == "\\" and found.end() >= len(self.text)):
                self.pos = len(self.text) if found is None else found.start()
                if not self.read_more():
                    return False
                i = self.pos
                continue
            char, i = found.group(), found.end()
            if in_string:
                in_string, i = (True, i + 1) if char == "\\" else (False, i)
            elif char == '"':
                in_string = True
            elif char in "[{":
                depth += 1
            elif depth > 1 or (char == "," and depth == 1):
                depth -= char != ","
            else:  # the value's own closing bracket, or what follows a value without one
                self.pos = i if depth == 1 else found.start()
                return True


def _number_may_go_on(value, after: str) -> bool:
    # "1" read from "1e5" cut after "1e": the number goes on in the next piece.
    return isinstance(value, (int, float)) and not isinstance(value, bool) and after in "0123456789.eE+-"


def _maybe_cut(err: json.JSONDecodeError, read: int) -> bool:
    """Whether a decoding error may come from the end of what is read cutting the value
    (it is then read again with more text); a real error stays where it is."""
    return err.pos >= read - 8 or err.msg.startswith("Unterminated string")


def _problem(err: Exception, read: _JsonText, start: int) -> str:
    if read.problem:
        return read.problem
    if isinstance(err, json.JSONDecodeError):
        return f"not valid JSON ({_message(err)} at {read.where(err.pos)})"
    if isinstance(err, RecursionError):
        return f"not valid JSON (nested too deeply, from line {read.line_of(start)})"
    return f"not valid JSON ({err})"


def json_records(text: str) -> Iterator[Triple]:
    """Records of a JSON file: an array of objects (item by item), or one object."""
    return _json_records(_JsonText.whole(text), len(text) + 1)


def json_piece_records(pieces: Iterable[str], limit: int) -> Iterator[Triple]:
    """`json_records` of a JSON text given in pieces (a file too large to hold), with the
    same labels and problems; an item of more than ``limit`` characters is passed over
    without being held and is a skipped record. The pieces may raise `TextProblem`: the
    rest of the file is then recorded as not read, with its reason."""
    read = _JsonText(iter(pieces))
    read.read_more()
    return _json_records(read, limit)


def _json_records(read: _JsonText, limit: int) -> Iterator[Triple]:
    if not read.skip_space():
        if read.problem:
            yield "", None, read.problem
        return
    if not read.next_is("["):
        yield from _json_object(read, limit)
        return
    read.pos += 1
    number = 0
    while True:
        more = read.skip_space()
        if number == 0 and read.next_is("]"):
            read.pos += 1
            break
        number += 1
        label, start = f"item {number}", read.pos
        try:
            value = read.decode(limit)
        except _ValueTooLarge as err:
            yield label, None, f"{label}: {record_too_large(limit)}"
            if not err.passed and not read.pass_value():
                yield "", None, read.problem or f"not valid JSON (the file ends inside {label})"
                return
        except (ValueError, RecursionError) as err:
            yield label, None, f"{label}: {_problem(err, read, start)}; rest of file not read"
            return
        else:
            yield (label, value, "") if isinstance(value, dict) else (label, None, _not_object(label, value))
        more = read.skip_space()
        if read.next_is(","):
            read.pos += 1
            continue
        if read.next_is("]"):
            read.pos += 1
            break
        where = read.where(read.pos) if more else "the end of the file"
        yield (
            "",
            None,
            read.problem or f"not valid JSON (expected ',' or ']' at {where}); rest of file not read",
        )
        return
    if read.skip_space():
        yield "", None, f"not valid JSON (extra data after the array at {read.where(read.pos)})"
    elif read.problem:
        yield "", None, read.problem


def _json_object(read: _JsonText, limit: int) -> Iterator[Triple]:
    # A file of one value: one object is one record.
    start = read.pos
    try:
        value = read.decode(limit)
    except _ValueTooLarge:
        yield "item 1", None, f"item 1: {record_too_large(limit)}"
        return
    except (ValueError, RecursionError) as err:
        yield "", None, _problem(err, read, start)
        return
    if read.skip_space():
        yield "", None, f"not valid JSON (extra data at {read.where(read.pos)})"
    elif read.problem:
        yield "", None, read.problem
    elif isinstance(value, dict):
        yield "item 1", value, ""
    else:
        yield "", None, _not_object("the file", value).replace(", not an object", ", not objects")


class _RowTooLarge(Exception):
    """The row being read is longer than the limit, or holds a line passed over."""

    def __init__(self, reason: str) -> None:
        super().__init__(reason)
        self.reason = reason


class _RowLines:
    """The lines of a CSV text handed to `csv.reader`, counted: physical lines taken
    (for the rows' labels), and characters and double quotes of the row being read, so
    that a row longer than ``limit`` stops with `_RowTooLarge` and the rest of it can be
    passed over (`skip_row`) without holding it. An iterator class, not a generator: it
    goes on after raising."""

    def __init__(self, lines: Iterable[Line], limit: int) -> None:
        self._lines = iter(lines)
        self.limit = limit
        self.number = 0
        self.chars = self.quotes = 0

    def __iter__(self) -> _RowLines:
        return self

    def __next__(self) -> str:
        line = next(self._lines)
        self.number += 1
        self.quotes += line.quotes if isinstance(line, Passed) else line.count('"')
        if isinstance(line, Passed):
            raise _RowTooLarge(line.reason)
        self.chars += len(line)
        if self.chars > self.limit:
            raise _RowTooLarge(record_too_large(self.limit))
        return line

    def start_row(self) -> None:
        self.chars = self.quotes = 0

    def skip_row(self) -> None:
        """Pass the rest of a row: lines until its double quotes pair up (a quoted field
        that spans lines is still open while their count is odd)."""
        while self.quotes % 2:
            line = next(self._lines, None)
            if line is None:
                return
            self.number += 1
            self.quotes += line.quotes if isinstance(line, Passed) else line.count('"')


def csv_records(text: str, delimiter: str, text_fields: Sequence[str]) -> Iterator[Triple]:
    """Records of a CSV or TSV text with a header row."""
    return csv_line_records(io.StringIO(text, newline=""), delimiter, text_fields, len(text) + 1)


def _csv_header(reader, lines: _RowLines, text_fields: Sequence[str]) -> tuple[list | None, str]:
    """``(header, problem)`` of a CSV text: its first row, or None and why not."""
    try:
        header = next(reader)
    except StopIteration:
        return None, ""
    except (csv.Error, _RowTooLarge) as err:
        return None, f"cannot read the header row: {err}"
    if all(f not in header for f in text_fields):
        columns = ", ".join(header[:12]) + (" …" if len(header) > 12 else "")
        wanted = ", ".join(repr(f) for f in text_fields)
        return None, f"no column {wanted} (columns: {columns}); choose with --text-field"
    return header, ""


def csv_line_records(
    lines: Iterable[Line], delimiter: str, text_fields: Sequence[str], limit: int
) -> Iterator[Triple]:
    """Records of a CSV or TSV text with a header row, given a line at a time (each with
    its line end, as ``open(..., newline="")`` gives them).

    A row longer than ``limit`` characters, or holding a line passed over, is a skipped
    record and the rows after it are read on; memory holds one row at a time. The csv
    module's field size limit (process-wide) is raised to ``limit`` while the rows are
    read and put back when the generator ends or is closed.
    """
    previous = csv.field_size_limit()
    if previous < limit + 1:
        csv.field_size_limit(min(limit + 1, _CSV_FIELD_CEILING))
    try:
        yield from _csv_rows(lines, delimiter, text_fields, limit)
    finally:
        csv.field_size_limit(previous)


def _csv_rows(
    lines: Iterable[Line], delimiter: str, text_fields: Sequence[str], limit: int
) -> Iterator[Triple]:
    """`csv_line_records` with the field size limit already raised."""
    counted = _RowLines(lines, limit)
    reader = csv.reader(counted, delimiter=delimiter)
    header, problem = _csv_header(reader, counted, text_fields)
    if header is None:
        if problem:
            yield "", None, problem
        return
    while True:
        end_of_previous = counted.number
        counted.start_row()
        label = f"row {end_of_previous + 1}"
        try:
            row = next(reader)
        except StopIteration:
            return
        except _RowTooLarge as err:
            counted.skip_row()
            reader = csv.reader(counted, delimiter=delimiter)
            yield label, None, f"{label}: {err.reason}"
            continue
        except csv.Error as err:
            yield label, None, f"{label}: broken CSV ({err}); rest of file not read"
            return
        if not any(cell.strip() for cell in row):
            continue  # a blank line is not a record
        if len(row) != len(header):
            yield label, None, f"{label}: {len(row)} cells where the header has {len(header)}"
            continue
        yield label, dict(zip(header, row)), ""


def _as_text(value: object) -> str:
    if isinstance(value, str):
        return value
    return json.dumps(value, ensure_ascii=False, sort_keys=True, default=str)


def join_fields(record: dict, text_fields: Sequence[str]) -> tuple[str | None, str]:
    """``(text, problem)``: the text fields present, joined by a blank line; None when none is."""
    present = [f for f in text_fields if f in record]
    if not present:
        return None, f"no field {', '.join(repr(f) for f in text_fields)}"
    return "\n\n".join(_as_text(record[f]) for f in present if record[f] is not None), ""


def _metadata(record: dict, text_fields: Sequence[str]) -> dict:
    # Scalars only (dates for --keeper newest/oldest, authors, ...); dates as ISO text.
    out = {}
    for key, value in record.items():
        if key in text_fields:
            continue
        if isinstance(value, (datetime.date, datetime.datetime)):
            value = value.isoformat()
        if isinstance(value, float) and not math.isfinite(value):
            continue  # NaN from a Parquet column: no JSON output could hold it
        if isinstance(value, (str, int, float)):
            out[str(key)] = value
    return out


def record_outcomes(
    triples: Iterable[Triple], item: Item, opts: ReadOptions, *, encoding: str = ""
) -> Iterator[Outcome]:
    """Documents and entries for the records of one input; one entry per record."""
    seen_keys: set[str] = set()
    any_record = False
    for label, record, problem in triples:
        any_record = True
        if record is None:
            yield None, item.entry("skipped", problem, encoding=encoding, record=label)
            continue
        text, missing = join_fields(record, opts.text_fields)
        if text is None:
            reason = f"{label}: {missing}; choose the text with --text-field"
            yield None, item.entry("skipped", reason, encoding=encoding, record=label)
            continue
        key = label
        if opts.id_field:
            value = record.get(opts.id_field)
            if value is None or str(value).strip() == "":
                reason = f"{label}: no value in id field {opts.id_field!r}"
                yield None, item.entry("skipped", reason, encoding=encoding, record=label)
                continue
            key = value if isinstance(value, str) else _as_text(value)
        if key in seen_keys:
            reason = f"{label}: id {key!r} repeats an earlier record of this file"
            yield None, item.entry("skipped", reason, encoding=encoding, record=label)
            continue
        seen_keys.add(key)
        title = record.get("title")
        yield item.document(
            text,
            title=title if isinstance(title, str) else "",
            encoding=encoding,
            record=label,
            key=key,
            metadata=_metadata(record, opts.text_fields),
        )
    if not any_record:
        yield None, item.entry("empty", "no records", encoding=encoding)
