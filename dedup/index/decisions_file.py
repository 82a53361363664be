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
read these files; the tests check that it and `validate_decisions` accept the same files.
"""

from __future__ import annotations

import json
import re
from importlib import resources

__all__ = ["SCHEMA", "SCHEMA_VERSION", "DECISION_VALUES", "validate_decisions", "json_schema"]

SCHEMA = "dedup-review-decisions"
SCHEMA_VERSION = 1
DECISION_VALUES = ("confirmed-duplicate", "not-duplicate", "keep-both")
# ASCII digits only (``\\d`` would take any Unicode digit): the JSON Schema holds the same patterns.
_HASH = re.compile(r"^[0-9a-f]{32}$")
_AUDIT_ID = re.compile(r"^[0-9a-f]{16}$")
_TIME = re.compile(
    r"^[0-9]{4}-[0-9]{2}-[0-9]{2}T[0-9]{2}:[0-9]{2}:[0-9]{2}(\.[0-9]+)?(Z|[+-][0-9]{2}:[0-9]{2})$"
)


def json_schema() -> dict:
    """The published JSON Schema of decisions files (``dedup/schemas/decisions.schema.json``)."""
    text = (
        resources.files("dedup")
        .joinpath("schemas")
        .joinpath("decisions.schema.json")
        .read_text(encoding="utf-8")
    )
    return json.loads(text)


def validate_decisions(data: object) -> list[str]:
    """Problems with a decisions file, in words; an empty list means it is valid."""
    problems: list[str] = []
    if not isinstance(data, dict):
        return ["the file is not a JSON object"]
    if data.get("schema") != SCHEMA:
        problems.append(f"schema is {data.get('schema')!r}, expected {SCHEMA!r}")
    if data.get("schema_version") != SCHEMA_VERSION or isinstance(data.get("schema_version"), bool):
        problems.append(f"schema_version is {data.get('schema_version')!r}, expected {SCHEMA_VERSION}")
    if not isinstance(data.get("audit_id"), str) or not _AUDIT_ID.match(data["audit_id"]):
        problems.append("audit_id must be 16 hex digits")
    if not isinstance(data.get("exported_at"), str) or not _TIME.match(data["exported_at"]):
        problems.append("exported_at must be an ISO 8601 time")
    decisions = data.get("decisions")
    if not isinstance(decisions, list):
        return problems + ["decisions must be a list"]
    for n, d in enumerate(decisions, 1):
        where = f"decision {n}"
        if not isinstance(d, dict):
            problems.append(f"{where}: not an object")
            continue
        if d.get("kind") not in ("cluster", "pair"):
            problems.append(f"{where}: kind must be 'cluster' or 'pair'")
        if d.get("decision") is not None and d.get("decision") not in DECISION_VALUES:
            problems.append(f"{where}: decision must be one of {', '.join(DECISION_VALUES)} or null")
        if not isinstance(d.get("comment"), str):
            problems.append(f"{where}: comment must be text")
        if not isinstance(d.get("cluster_id"), str):
            problems.append(f"{where}: cluster_id must be text")
        if not isinstance(d.get("decided_at"), str) or not _TIME.match(d["decided_at"]):
            problems.append(f"{where}: decided_at must be an ISO 8601 time")
        docs = d.get("documents")
        if not isinstance(docs, list) or len(docs) < 2:
            problems.append(f"{where}: documents must list at least two documents")
            continue
        if d.get("kind") == "pair" and len(docs) != 2:
            problems.append(f"{where}: a pair has exactly two documents")
        for doc in docs:
            if not isinstance(doc, dict) or not isinstance(doc.get("id"), str):
                problems.append(f"{where}: every document needs an id")
            elif not isinstance(doc.get("content_hash"), str) or not _HASH.match(doc["content_hash"]):
                problems.append(f"{where}: document {doc['id']!r} needs a 32-hex-digit content_hash")
    return problems
