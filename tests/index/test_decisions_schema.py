"""The published JSON Schema of decisions files and the validator the import uses accept the same files.

Reference: a small validator of the JSON Schema keywords the schema uses (draft 2020-12 semantics: type,
const, enum, pattern, required, properties, items, minItems, maxItems, $ref to $defs, if/then), written here
from the specification, so the check needs no extra package.
"""

from __future__ import annotations

import copy
import json
import re
from pathlib import Path

import pytest

import dedup
from dedup.index.decisions_file import _AUDIT_ID, _HASH, _TIME, json_schema, validate_decisions

_TYPES = {
    "object": lambda v: isinstance(v, dict),
    "array": lambda v: isinstance(v, list),
    "string": lambda v: isinstance(v, str),
    "integer": lambda v: isinstance(v, int) and not isinstance(v, bool),
    "null": lambda v: v is None,
}


def _same(a, b) -> bool:
    """JSON equality: 1 and true differ, 1 and 1.0 do not."""
    if isinstance(a, bool) or isinstance(b, bool):
        return type(a) is type(b) and a == b
    return a == b


def schema_errors(value, schema: dict, root: dict, where: str = "$") -> list[str]:
    """Where ``value`` breaks ``schema`` (empty: valid)."""
    if "$ref" in schema:
        target = root
        for part in schema["$ref"].removeprefix("#/").split("/"):
            target = target[part]
        return schema_errors(value, target, root, where)
    errors = []
    if "type" in schema and not _TYPES[schema["type"]](value):
        return [f"{where}: not {schema['type']}"]
    if "const" in schema and not _same(value, schema["const"]):
        errors.append(f"{where}: not {schema['const']!r}")
    if "enum" in schema and not any(_same(value, option) for option in schema["enum"]):
        errors.append(f"{where}: not one of {schema['enum']}")
    if isinstance(value, str) and "pattern" in schema and not re.search(schema["pattern"], value, re.ASCII):
        errors.append(f"{where}: does not match")
    if isinstance(value, dict):
        errors += [f"{where}: {key} missing" for key in schema.get("required", []) if key not in value]
        for key, sub in schema.get("properties", {}).items():
            if key in value:
                errors += schema_errors(value[key], sub, root, f"{where}.{key}")
    if isinstance(value, list):
        if len(value) < schema.get("minItems", 0) or len(value) > schema.get("maxItems", len(value)):
            errors.append(f"{where}: {len(value)} items")
        for n, item in enumerate(value):
            errors += schema_errors(item, schema.get("items", {}), root, f"{where}[{n}]")
    if "if" in schema and not schema_errors(value, schema["if"], root, where):
        errors += schema_errors(value, schema.get("then", {}), root, where)
    return errors


def _valid_file(result) -> dict:
    hash_of = {d["id"]: d["content_hash"] for d in result.documents}
    cluster = result.clusters[0]
    members = [
        {"id": m["document_id"], "content_hash": hash_of[m["document_id"]]} for m in cluster["members"]
    ]
    return {
        "schema": "dedup-review-decisions",
        "schema_version": 1,
        "audit_id": result.audit_id,
        "exported_at": "2024-05-02T10:00:00.000Z",
        "decisions": [
            {
                "kind": "cluster",
                "cluster_id": cluster["id"],
                "documents": members,
                "decision": "keep-both",
                "comment": "two editions",
                "decided_at": "2024-05-01T09:00:00+02:00",
            },
            {
                "kind": "pair",
                "cluster_id": cluster["id"],
                "documents": members[:2],
                "decision": None,
                "comment": "",
                "decided_at": "2024-05-01T09:30:00Z",
            },
        ],
    }


def _breakages():
    """(name, change) pairs: each makes a valid file invalid in one place."""

    def put(path, value):
        def change(data):
            target = data
            for key in path[:-1]:
                target = target[key]
            if value is KeyError:
                del target[path[-1]]
            else:
                target[path[-1]] = value

        return change

    return [
        ("schema", put(["schema"], "something-else")),
        ("version", put(["schema_version"], 2)),
        ("version true", put(["schema_version"], True)),
        ("audit id", put(["audit_id"], "XYZ")),
        ("exported_at", put(["exported_at"], "yesterday")),
        ("unicode digits", put(["exported_at"], "٢٠٢٤-05-02T10:00:00Z")),
        ("no decisions", put(["decisions"], KeyError)),
        ("decisions not a list", put(["decisions"], {})),
        ("kind", put(["decisions", 0, "kind"], "group")),
        ("decision", put(["decisions", 0, "decision"], "maybe")),
        ("comment", put(["decisions", 0, "comment"], None)),
        ("cluster id", put(["decisions", 0, "cluster_id"], 3)),
        ("decided_at", put(["decisions", 1, "decided_at"], "2024-05-01")),
        ("one document", put(["decisions", 0, "documents"], [{"id": "a", "content_hash": "0" * 32}])),
        (
            "pair of three",
            put(["decisions", 1, "documents"], [{"id": c, "content_hash": "0" * 32} for c in "abc"]),
        ),
        ("hash", put(["decisions", 0, "documents", 0, "content_hash"], "0" * 31)),
        ("document id", put(["decisions", 0, "documents", 1, "id"], 7)),
        ("not an object", lambda data: data.clear() or data.update({"decisions": "x"})),
    ]


@pytest.fixture(scope="module")
def valid(tmp_path_factory):
    from benchmarks.corpus import synthetic_documents

    texts = [t for _, t in synthetic_documents(3, seed=21, doc_bytes=1500)]
    root = tmp_path_factory.mktemp("schema")
    for name, text in (
        ("a.txt", texts[0]),
        ("b.txt", texts[0]),
        ("c.txt", texts[0] + " end"),
        ("d.txt", texts[1]),
    ):
        (root / name).write_text(text, encoding="utf-8")
    return _valid_file(dedup.audit([str(root)]))


def test_the_schema_ships_in_the_package_and_holds_the_validators_patterns():
    schema = json_schema()
    path = Path(dedup.__file__).parent / "schemas" / "decisions.schema.json"
    assert json.loads(path.read_text(encoding="utf-8")) == schema
    assert schema["$defs"]["time"]["pattern"] == _TIME.pattern
    assert schema["$defs"]["document"]["properties"]["content_hash"]["pattern"] == _HASH.pattern
    assert schema["properties"]["audit_id"]["pattern"] == _AUDIT_ID.pattern


def test_a_file_as_the_report_exports_it_is_valid_for_both(valid):
    assert schema_errors(valid, json_schema(), json_schema()) == []
    assert validate_decisions(valid) == []


@pytest.mark.parametrize("name, change", _breakages(), ids=[name for name, _ in _breakages()])
def test_each_breakage_is_refused_by_both(valid, name, change):
    broken = copy.deepcopy(valid)
    change(broken)
    assert schema_errors(broken, json_schema(), json_schema()), name
    assert validate_decisions(broken), name
