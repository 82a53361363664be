"""The review decisions file: its schema and its validator.

The HTML report exports this file; `dedup.index.decisions` imports it into an index.
Both read the schema from here (a leaf module, cheap to import).

Schema ``dedup-review-decisions``, version 1::

    {
      "schema": "dedup-review-decisions",
      "schema_version": 1,
      "audit_id": "<16 hex digits: the audit the decisions were made on>",
      "exported_at": "<ISO 8601 time>",
      "decisions": [
        {
          "kind": "cluster" | "pair",
          "cluster_id": "C00001",
          "documents": [{"id": "<document id>", "content_hash": "<32 hex digits>"}, ...],
          "decision": "confirmed-duplicate" | "not-duplicate" | "keep-both" | null,
          "comment": "<free text, may be empty>",
          "decided_at": "<ISO 8601 time>"
        }
      ]
    }

A pair lists its two documents, a cluster all its members. Content hashes (BLAKE2b of
the normalized text, as in ``audit.json``) let a later audit match a decision to the
same text even if cluster numbers change; a decision whose texts changed no longer holds.

The same schema is published as a JSON Schema (draft 2020-12) in the package,
``dedup/schemas/decisions.schema.json`` (`json_schema`), for other tools that write or
read these files; the tests check that it and `validate_decisions` accept the same files,
but for what a pattern cannot say and `validate_decisions` checks as well:

* a time is a real one: a month from 01 to 12, a day its month has, an hour below 24,
  a minute and a second below 60 (no leap second), a zone offset below 24 hours, and
  in UTC a time of the years 0001 to 9999 (RFC 3339 section 5.7; its ``date-time``);
* a text holds no unpaired surrogate (``"\\ud800"`` in JSON), which no UTF-8 text can
  hold (I-JSON, RFC 7493 section 2.1);
* objects and arrays nest at most `MAX_DEPTH` deep (`nesting_problem`; the file
  itself needs five levels).
"""

from __future__ import annotations

import calendar
import json
import re
from datetime import datetime, timedelta, timezone
from importlib import resources

__all__ = [
    "SCHEMA",
    "SCHEMA_VERSION",
    "DECISION_VALUES",
    "MAX_DEPTH",
    "validate_decisions",
    "json_schema",
    "nesting_problem",
    "place",
    "utc_time",
]

SCHEMA = "dedup-review-decisions"
SCHEMA_VERSION = 1
DECISION_VALUES = ("confirmed-duplicate", "not-duplicate", "keep-both")
# ASCII digits only (``\\d`` would take any Unicode digit): the JSON Schema holds the same patterns.
# Matched whole (`re.fullmatch`): ``$`` alone would let a line end follow, as JSON Schema's does not.
_HASH = re.compile(r"^[0-9a-f]{32}$")
_AUDIT_ID = re.compile(r"^[0-9a-f]{16}$")
_TIME = re.compile(
    r"^[0-9]{4}-[0-9]{2}-[0-9]{2}T[0-9]{2}:[0-9]{2}:[0-9]{2}(\.[0-9]+)?(Z|[+-][0-9]{2}:[0-9]{2})$"
)
_SURROGATE = re.compile(r"[\ud800-\udfff]")
# How deep objects and arrays may nest: far more than the file needs (5), far less than the
# JSON reader's recursion can follow.
MAX_DEPTH = 32
# What nests (brackets) and what does not count (strings, whose brackets are text).
_NESTING = re.compile(r'"[^"\\]*(?:\\.[^"\\]*)*"|[\[\]{}]')


def json_schema() -> dict:
    """The published JSON Schema of decisions files (``dedup/schemas/decisions.schema.json``)."""
    text = (
        resources.files("dedup")
        .joinpath("schemas")
        .joinpath("decisions.schema.json")
        .read_text(encoding="utf-8")
    )
    return json.loads(text)


def _time_fields(text: str) -> tuple[datetime | None, str]:
    """An ISO 8601 time that `_TIME` matches, as an aware datetime; else None and why not."""
    year, month, day = int(text[0:4]), int(text[5:7]), int(text[8:10])
    hour, minute, second = int(text[11:13]), int(text[14:16]), int(text[17:19])
    zone = "Z" if text.endswith("Z") else text[-6:]
    offset_hours, offset_minutes = (0, 0) if zone == "Z" else (int(zone[1:3]), int(zone[4:6]))
    if year < 1:
        return None, "there is no year 0000"
    if not 1 <= month <= 12:
        return None, f"there is no month {month:02d}"
    if not 1 <= day <= calendar.monthrange(year, month)[1]:
        return None, f"month {month:02d} of {year:04d} has no day {day:02d}"
    if hour > 23 or minute > 59 or second > 59:
        return None, "the hour must be below 24, the minute and the second below 60"
    if offset_hours > 23 or offset_minutes > 59:
        return None, f"the zone offset {zone} is not one (hours below 24, minutes below 60)"
    sign = -1 if zone.startswith("-") else 1
    zone_info = timezone(sign * timedelta(hours=offset_hours, minutes=offset_minutes))
    fraction = text[19:-1] if zone == "Z" else text[19:-6]
    micro = int((fraction[1:] + "000000")[:6]) if fraction else 0
    try:
        return datetime(year, month, day, hour, minute, second, micro, zone_info).astimezone(timezone.utc), ""
    except OverflowError:
        return None, "in UTC it falls outside the years 0001 to 9999"


def _time_problem(value: object) -> str:
    """Why ``value`` is not a usable ISO 8601 time ("" when it is)."""
    if not isinstance(value, str) or not _TIME.fullmatch(value):
        return "must be an ISO 8601 time"
    why = _time_fields(value)[1]
    return f"{_shown(value)} is not a real time: {why}" if why else ""


def utc_time(text: str) -> str:
    """A time `validate_decisions` accepts, as UTC ``YYYY-MM-DDTHH:MM:SS.ffffffZ``, so that
    times compare as text. Fractions beyond microseconds are cut; any other text raises
    ``ValueError``."""
    problem = _time_problem(text)
    if problem:
        raise ValueError(f"{_shown(text)} {problem}" if problem.startswith("must") else problem)
    return _time_fields(text)[0].strftime("%Y-%m-%dT%H:%M:%S.%fZ")


def _text_problem(value: str) -> str:
    """Why a text cannot be stored ("" when it can): an unpaired surrogate."""
    found = _SURROGATE.search(value)
    if found is None:
        return ""
    return (
        f"holds an unpaired surrogate (U+{ord(found.group()):04X} at character {found.start() + 1}), "
        "which no UTF-8 text can hold"
    )


def _shown(value: object, limit: int = 60) -> str:
    """A short quoted form of a value for a message (``repr``: escaped, it is the file's, not ours)."""
    text = repr(value)
    return text if len(text) <= limit else text[: limit - 1] + "…"


def nesting_problem(text: str) -> str:
    """Where a JSON text nests objects and arrays deeper than `MAX_DEPTH` ("" when it does not).

    Checked before parsing: the JSON reader follows nesting by recursion, so a file of a
    few thousand ``[`` would exhaust it. Cost: one regular-expression scan of the text.
    """
    depth = 0
    for found in _NESTING.finditer(text):
        mark = found.group()
        if mark in "[{":
            depth += 1
            if depth > MAX_DEPTH:
                return (
                    f"objects and arrays nest deeper than {MAX_DEPTH} levels at {place(text, found.start())}"
                )
        elif mark in "]}":
            depth -= 1
    return ""


def place(text: str, offset: int) -> str:
    """``line L, column C`` of a character of a text (both from 1), as a JSON reader names places."""
    line = text.count("\n", 0, offset) + 1
    return f"line {line}, column {offset - text.rfind(chr(10), 0, offset)}"


def validate_decisions(data: object) -> list[str]:
    """Problems with a decisions file, in words, each naming its place (``decision 3: …``);
    an empty list means it is valid. Cost O(size of the data)."""
    problems: list[str] = []
    if not isinstance(data, dict):
        return ["the file is not a JSON object"]
    if data.get("schema") != SCHEMA:
        problems.append(f"schema is {_shown(data.get('schema'))}, expected {SCHEMA!r}")
    if data.get("schema_version") != SCHEMA_VERSION or isinstance(data.get("schema_version"), bool):
        problems.append(f"schema_version is {_shown(data.get('schema_version'))}, expected {SCHEMA_VERSION}")
    if not isinstance(data.get("audit_id"), str) or not _AUDIT_ID.fullmatch(data["audit_id"]):
        problems.append("audit_id must be 16 hex digits")
    problems += [f"exported_at {why}" for why in [_time_problem(data.get("exported_at"))] if why]
    decisions = data.get("decisions")
    if not isinstance(decisions, list):
        return problems + ["decisions must be a list"]
    for n, d in enumerate(decisions, 1):
        problems += [f"decision {n}: {why}" for why in _decision_problems(d)]
    return problems


def _decision_problems(d: object) -> list[str]:
    """Problems with one decision of the file."""
    if not isinstance(d, dict):
        return ["not an object"]
    problems = []
    if d.get("kind") not in ("cluster", "pair"):
        problems.append("kind must be 'cluster' or 'pair'")
    if d.get("decision") is not None and d.get("decision") not in DECISION_VALUES:
        problems.append(f"decision must be one of {', '.join(DECISION_VALUES)} or null")
    for key in ("comment", "cluster_id"):
        value = d.get(key)
        why = _text_problem(value) if isinstance(value, str) else "must be text"
        problems += [f"{key} {why}"] if why else []
    problems += [f"decided_at {why}" for why in [_time_problem(d.get("decided_at"))] if why]
    docs = d.get("documents")
    if not isinstance(docs, list) or len(docs) < 2:
        return problems + ["documents must list at least two documents"]
    if d.get("kind") == "pair" and len(docs) != 2:
        problems.append("a pair has exactly two documents")
    for doc in docs:
        if not isinstance(doc, dict) or not isinstance(doc.get("id"), str):
            problems.append("every document needs an id")
        elif _text_problem(doc["id"]):
            problems.append(f"document id {_shown(doc['id'])} {_text_problem(doc['id'])}")
        elif not isinstance(doc.get("content_hash"), str) or not _HASH.fullmatch(doc["content_hash"]):
            problems.append(f"document {_shown(doc['id'])} needs a 32-hex-digit content_hash")
    return problems
