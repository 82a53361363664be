"""The published JSON Schemas of dedup's outputs (`dedup.schemas`): valid schemas, real outputs
valid, broken outputs refused, and in step with the code that writes the outputs.

Reference: JSON Schema draft 2020-12 (https://json-schema.org/draft/2020-12/json-schema-core and
json-schema-validation), checked with the jsonschema package's ``Draft202012Validator``. The real
outputs are those of the command line on the bundled demo corpus and on invented classes.
"""

from __future__ import annotations

import contextlib
import copy
import dataclasses
import importlib.util
import io
import json
from pathlib import Path

import pytest
from jsonschema import Draft202012Validator

import dedup
from dedup.check import CheckSettings
from dedup.check.passages import EXCLUDED_ORDER
from dedup.check.result import MATCH_COLUMNS
from dedup.cli import main
from dedup.cluster.actions import ACTIONS, RETIRING_ACTIONS
from dedup.index.decisions_file import DECISION_VALUES
from dedup.index.history import FAIL_ON, STATES
from dedup.ingest import STATUSES
from dedup.report.files import ACTION_COLUMNS, LEDGER_COLUMNS, OUTPUT_NAMES, PAIR_COLUMNS
from dedup.report.migration import REDIRECT_COLUMNS
from dedup.report.records import PASSAGE_COLUMNS
from dedup.schemas import SUFFIX, UnknownSchemaError, load_schema, schema_names, schema_text
from dedup.settings import CANDIDATE_METHODS, HASH_SCHEMES, KEEPER_POLICIES, MEASURES, AuditSettings

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "fixtures" / "demo" / "kb"
DEMO_CLASS = ROOT / "fixtures" / "demo-class"
DRAFT = "https://json-schema.org/draft/2020-12/schema"
# The outputs the schemas are published for: the contract the README points users to.
PUBLISHED = ["audit", "audit-summary", "check", "decisions", "redirects", "run", "similar"]
# The demo's own settings (README), which find the planted near-duplicates.
DEMO_SETTINGS = ["--measure", "containment", "--threshold", "0.9", "--prefer", "current/**"]
RECORDS = ["--id-field", "id", "--text-field", "body"]
# Cosine, with every kind of warning (a crowded TF-IDF space, oversize LSH buckets, a preferred
# path that matches nothing), document dates and URLs in the redirects.
COSINE = [
    "--measure", "cosine", "--threshold", "0.7", "--keeper", "newest", "--prefer", "nowhere/**",
    "--tfidf-features", "512", "--candidates", "lsh", "--bucket-limit", "2",
    "--base-url", "https://kb.example.org/", *RECORDS, "--no-report",
]  # fmt: skip
# Searches of an index of the demo: a text, and a document of it with the other ranking.
SEARCHES = [
    ["how do I reset my VPN password when I am locked out", "-k", "3"],
    ["--file", str(DEMO / "current" / "it" / "vpn-password-reset.md"), "--ranking", "tfidf", "--terms", "2"],
]
AUDIT_VARIANTS = {"default": [], "containment": [*DEMO_SETTINGS, *RECORDS, "--no-report"], "cosine": COSINE}


def _run(argv: list[str]) -> tuple[int, str]:
    """Run the command line in this process; its exit code and what it printed."""
    printed = io.StringIO()
    with contextlib.redirect_stdout(printed):
        code = main(argv)
    return code, printed.getvalue()


def _read(path: Path):
    return json.loads(path.read_text(encoding="utf-8"))


def _audit(out: Path, *options: str) -> dict:
    """``dedup audit`` of the demo into ``out``: its JSON outputs by schema name."""
    code, printed = _run(["audit", str(DEMO), "--out", str(out), "--json", "--quiet", *options])
    assert code in (0, 1), printed
    return {
        "audit": _read(out / "audit.json"),
        "run": _read(out / "run.json"),
        "redirects": _read(out / "redirects.json"),
        "audit-summary": json.loads(printed),
    }


def _errors(name: str, data) -> list[str]:
    validator = Draft202012Validator(load_schema(name))
    return [f"{list(e.absolute_path)}: {e.message[:300]}" for e in validator.iter_errors(data)]


class _Runs:
    """Each audit variant and each class check run once for the module, when first asked for."""

    def __init__(self, tmp_path_factory):
        self.tmp, self.made = tmp_path_factory, {}

    def audit(self, variant: str) -> dict:
        if variant not in self.made:
            out = self.tmp.mktemp(f"audit-{variant}") / "out"
            self.made[variant] = _audit(out, *AUDIT_VARIANTS[variant])
        return self.made[variant]

    def check(self, klass: str) -> dict:
        if klass not in self.made:
            root = self.tmp.mktemp(klass)
            given = _small_class(root) if klass == "small-class" else _demo_class()
            code, printed = _run(["check", *given, "--out", str(root / "out"), "--no-report", "--quiet"])
            assert code == 0, printed
            self.made[klass] = _read(root / "out" / "check.json")
        return self.made[klass]


@pytest.fixture(scope="module")
def runs(tmp_path_factory):
    return _Runs(tmp_path_factory)


@pytest.fixture(scope="module", params=sorted(AUDIT_VARIANTS))
def audit_outputs(request, runs):
    return runs.audit(request.param)


def _decisions_file(audit: dict) -> dict:
    """Decisions as the report exports them, on the first four clusters: one of each kind."""
    hashes = {d["id"]: d["content_hash"] for d in audit["documents"]}
    chosen = [
        ("cluster", "keep-both", "two editions"),
        ("pair", "confirmed-duplicate", ""),
        ("cluster", None, "look again"),
        ("pair", "not-duplicate", ""),
    ]
    decisions = []
    for n, (cluster, (kind, decision, comment)) in enumerate(zip(audit["clusters"], chosen)):
        members = [m["document_id"] for m in cluster["members"]]
        decisions.append(
            {
                "kind": kind,
                "cluster_id": cluster["id"],
                "documents": [
                    {"id": m, "content_hash": hashes[m]} for m in members[: 2 if kind == "pair" else None]
                ],
                "decision": decision,
                "comment": comment,
                "decided_at": f"2024-05-01T09:{n:02d}:00.000Z",
            }
        )
    return {
        "schema": "dedup-review-decisions",
        "schema_version": 1,
        "audit_id": audit["audit_id"],
        "exported_at": "2024-05-01T10:00:00.000Z",
        "decisions": decisions,
    }


@pytest.fixture(scope="module")
def index_outputs(tmp_path_factory):
    """A scheduled audit with an index: the first, accepted as the baseline; review decisions
    imported; the second, with the reviews applied and compared with the baseline; two searches."""
    root = tmp_path_factory.mktemp("index")
    index = str(root / "kb.index")
    first = _audit(root / "first", *DEMO_SETTINGS, *RECORDS, "--no-report", "--index", index, "--accept")
    decisions = _decisions_file(first["audit"])
    (root / "decisions.json").write_text(json.dumps(decisions), encoding="utf-8")
    code, printed = _run(["decisions", "import", str(root / "decisions.json"), "--index", index])
    assert code == 0, printed
    second = _audit(
        root / "second", *DEMO_SETTINGS, *RECORDS, "--no-report", "--index", index, "--fail-on", "new"
    )
    searches = []
    for argv in SEARCHES:
        code, printed = _run(["similar", *argv, "--index", index, "--json"])
        assert code == 0, printed
        searches.append(json.loads(printed))
    return {"first": first, "second": second, "decisions": decisions, "similar": searches}


def _small_class(root: Path) -> list[str]:
    """The invented class of tests/submissions (its texts, written as its fixture writes them)."""
    spec = importlib.util.spec_from_file_location(
        "check_texts", ROOT / "tests" / "submissions" / "check_texts.py"
    )
    texts = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(texts)
    subs, refs = root / "subs", root / "refs"
    subs.mkdir(parents=True)
    refs.mkdir()
    (refs / "brisk.txt").write_text(texts.SOURCE + "\n", encoding="utf-8")
    (refs / "tolland.txt").write_text(texts.OTHER_SOURCE + "\n", encoding="utf-8")
    essays = {
        "copier.txt": texts.essay(
            "My essay begins with a short opening of my own words.", texts.SOURCE, "The end."
        ),
        "quoter.txt": texts.essay(
            "I rely on one account.", f'As the chronicle says, "{texts.SOURCE}" (Hale 2011, p. 4).'
        ),
        "pair-a.txt": texts.essay(
            "First student writing about markets and ice.", texts.SHARED, "A closing line."
        ),
        "pair-b.txt": texts.essay(
            "Second student, an entirely different opening.", texts.SHARED, "Another ending."
        ),
        "clean.txt": texts.essay(
            "Nothing here comes from anywhere else: a walk past the old mill on a foggy morning."
        ),
    }
    for name, text in essays.items():
        (subs / name).write_text(text, encoding="utf-8")
    return [str(subs), "--against", str(refs), "--min-words", "12"]


def _demo_class() -> list[str]:
    """The bundled demo class, with its assignment as the template."""
    subs, refs = DEMO_CLASS / "submissions", DEMO_CLASS / "references"
    return [str(subs), "--against", str(refs), "--template", str(DEMO_CLASS / "assignment.txt")]


@pytest.fixture(scope="module", params=["demo-class", "small-class"])
def check_output(request, runs):
    return runs.check(request.param)


# -- the schemas themselves ------------------------------------------------------------------


def test_every_published_schema_is_a_valid_draft_2020_12_schema():
    assert schema_names() == sorted(PUBLISHED)
    for name in schema_names():
        schema = load_schema(name)
        Draft202012Validator.check_schema(schema)
        assert schema["$schema"] == DRAFT, name
        assert schema["title"].strip() and schema["description"].strip(), name


def test_the_schemas_ship_inside_the_package_and_are_read_as_shipped():
    folder = Path(dedup.__file__).parent / "schemas"
    assert sorted(p.name[: -len(SUFFIX)] for p in folder.glob("*" + SUFFIX)) == schema_names()
    for name in schema_names():
        assert schema_text(name) == (folder / (name + SUFFIX)).read_text(encoding="utf-8")
        assert load_schema(name) == json.loads(schema_text(name))
    changed = load_schema("audit")
    changed["title"] = "changed"
    assert load_schema("audit")["title"] != "changed"


@pytest.mark.parametrize("name", ["nope", "audit.schema.json", "../schemas/audit", "", "AUDIT"])
def test_an_unknown_name_is_a_key_error_that_lists_the_schemas(name):
    for read in (schema_text, load_schema):
        with pytest.raises(KeyError) as caught:
            read(name)
        assert isinstance(caught.value, UnknownSchemaError)
        message = str(caught.value)
        assert repr(name) in message and all(known in message for known in PUBLISHED), message


# Subschemas that only add conditions to an object described beside them.
_CONDITIONS = ("if", "then", "else")


def _walk(node, where: str = "$"):
    """Every schema object inside ``node`` with where it is (conditions left out)."""
    if isinstance(node, dict):
        yield where, node
        for key, value in node.items():
            if key not in _CONDITIONS:
                yield from _walk(value, f"{where}.{key}")
    elif isinstance(node, list):
        for n, value in enumerate(node):
            yield from _walk(value, f"{where}[{n}]")


def _target(schema: dict, sub: dict) -> dict:
    """``sub`` or, for a ``$ref`` to this schema's ``$defs``, what it names."""
    if "$ref" in sub:
        return schema["$defs"][sub["$ref"].removeprefix("#/$defs/")]
    return sub


def test_every_property_is_described_in_words():
    missing = []
    for name in schema_names():
        schema = load_schema(name)
        for where, node in _walk(schema):
            properties = node.get("properties") if node.get("type") == "object" else None
            for key, sub in (properties or {}).items():
                described = sub.get("description") or _target(schema, sub).get("description")
                if not (isinstance(described, str) and len(described.split()) >= 2):
                    missing.append(f"{name}: {where}.properties.{key}")
    assert missing == []


def test_every_object_whose_keys_are_known_is_closed():
    open_objects = []
    for name in schema_names():
        for where, node in _walk(load_schema(name)):
            described = node.get("type") == "object" and isinstance(node.get("properties"), dict)
            if described and node.get("additionalProperties") is not False:
                open_objects.append(f"{name}: {where}")
    assert open_objects == []


def test_a_definition_shared_by_several_schemas_is_the_same_in_each():
    seen: dict[str, tuple[str, dict]] = {}
    for name in schema_names():
        for key, definition in load_schema(name).get("$defs", {}).items():
            first = seen.setdefault(key, (name, definition))
            assert definition == first[1], f"$defs.{key} differs between {first[0]} and {name}"
    assert "delta" in load_schema("audit")["$defs"] and "delta" in load_schema("audit-summary")["$defs"]


def _at(schema: dict, *path: str) -> dict:
    node = schema
    for key in path:
        node = _target(schema, node)[key]
    return _target(schema, node)


def test_the_settings_described_are_the_settings_of_the_code():
    audit_settings = _at(load_schema("audit"), "properties", "settings")
    assert list(audit_settings["properties"]) == [f.name for f in dataclasses.fields(AuditSettings)]
    assert audit_settings["required"] == list(audit_settings["properties"])
    check_settings = _at(load_schema("check"), "properties", "settings")
    assert list(check_settings["properties"]) == [f.name for f in dataclasses.fields(CheckSettings)]
    assert check_settings["required"] == list(check_settings["properties"])


def test_the_enums_are_the_values_the_code_gives():
    audit, summary, check = load_schema("audit"), load_schema("audit-summary"), load_schema("check")
    settings = _at(audit, "properties", "settings", "properties")
    expected = [
        (settings["measure"]["enum"], MEASURES),
        (settings["keeper_policy"]["enum"], KEEPER_POLICIES),
        (settings["candidates"]["enum"], CANDIDATE_METHODS),
        (settings["hash_scheme"]["enum"], HASH_SCHEMES),
        (_at(audit, "$defs", "action", "properties", "action")["enum"], ACTIONS),
        (_at(audit, "$defs", "member", "properties", "action")["enum"], ACTIONS),
        (_at(audit, "$defs", "ledger_entry", "properties", "status")["enum"], STATUSES),
        (_at(audit, "$defs", "delta_entry", "properties", "status")["enum"], STATES),
        (_at(summary, "properties", "fail_on")["enum"], FAIL_ON),
        (_at(load_schema("redirects"), "properties", "redirects", "items", "properties", "action")["enum"], RETIRING_ACTIONS),
        (_at(load_schema("decisions"), "$defs", "decision", "properties", "decision")["enum"], (*DECISION_VALUES, None)),
        (_at(check, "$defs", "match", "properties", "reason")["enum"], ("", *EXCLUDED_ORDER)),
        (_at(check, "$defs", "submission", "properties", "excluded_by_reason", "propertyNames")["enum"], EXCLUDED_ORDER),
    ]  # fmt: skip
    for described, given in expected:
        assert list(described) == list(given)
    counted = _at(audit, "$defs", "summary", "properties", "inputs", "properties")
    assert set(STATUSES) <= set(counted)
    assert set(_at(summary, "properties", "outputs", "properties")) == set(OUTPUT_NAMES)


def test_the_csv_columns_are_fields_of_the_json_records():
    audit, check = load_schema("audit"), load_schema("check")
    pairs = [
        (PAIR_COLUMNS, _at(audit, "$defs", "pair")),
        (ACTION_COLUMNS, _at(audit, "$defs", "action")),
        (LEDGER_COLUMNS, _at(audit, "$defs", "ledger_entry")),
        (PASSAGE_COLUMNS, _at(audit, "$defs", "passage")),
        (MATCH_COLUMNS, _at(check, "$defs", "match")),
        (REDIRECT_COLUMNS, _at(load_schema("redirects"), "properties", "redirects", "items")),
    ]
    for columns, record in pairs:
        assert set(columns) <= set(record["properties"]), columns


# -- real outputs are valid ------------------------------------------------------------------


def test_the_outputs_of_an_audit_are_valid(audit_outputs):
    for name, data in audit_outputs.items():
        assert _errors(name, data) == [], name
    assert set(audit_outputs["audit-summary"]["outputs"]) <= set(OUTPUT_NAMES)


def test_the_cosine_variant_holds_every_kind_of_warning_and_the_optional_fields(runs):
    # What the "cosine" variant is there for: were these missing, its validation would not test them.
    out = runs.audit("cosine")
    kinds = {w["kind"] for w in out["audit"]["warnings"]}
    assert kinds == {"oversize-bucket", "tfidf-collisions", "prefer-matches-nothing"}
    assert all("date" in d for d in out["audit"]["documents"])
    assert any(r["from_url"] for r in out["redirects"]["redirects"])


def test_the_outputs_of_audits_with_an_index_are_valid(index_outputs):
    for run in ("first", "second"):
        for name, data in index_outputs[run].items():
            assert _errors(name, data) == [], (run, name)
    assert _errors("decisions", index_outputs["decisions"]) == []
    for search in index_outputs["similar"]:
        assert search["results"] and _errors("similar", search) == []


def test_the_index_run_holds_what_its_validation_is_for(index_outputs):
    first, second = index_outputs["first"]["audit"], index_outputs["second"]["audit"]
    assert first["delta"]["previous"] is None and first["delta"]["baseline"] is not None
    delta = second["delta"]
    assert delta["basis"] == "baseline" and delta["previous"] is not None and delta["documents"] is not None
    clusters = {c["review"]["status"] for c in second["clusters"] if c.get("review")}
    assert {"reviewed", "partly-reviewed", "commented"} <= clusters
    members = {m["review"]["status"] for c in second["clusters"] for m in c["members"] if "review" in m}
    assert {"reviewed", "confirmed", "commented", "unreviewed"} <= members
    assert any(p.get("review") for p in second["pairs"]) and "reviewed_clusters" in second["summary"]
    assert index_outputs["second"]["audit-summary"]["delta"] == delta


def test_the_outputs_of_a_class_check_are_valid(check_output):
    assert _errors("check", check_output) == []
    statuses = {m["status"] for m in check_output["matches"]}
    assert statuses == {"counted", "excluded"}  # both branches of the status rule are met


# -- broken outputs are refused ----------------------------------------------------------------


def _resolve(data, path: list) -> list:
    """``path`` with each dict in it replaced by the index of the first list item holding its fields."""
    out, node = [], data
    for step in path:
        if isinstance(step, dict):
            step = next(i for i, item in enumerate(node) if all(item.get(k) == v for k, v in step.items()))
        out.append(step)
        node = node[step]
    return out


DROP, ADD = object(), object()
BREAKAGES = [
    # (schema, path, change): drop the key at path, add a key ("extra") to the object at path, or set a value.
    ("audit", ["audit_id"], DROP),
    ("audit", ["audit_id"], "XYZ"),
    ("audit", ["schema_version"], "2.0"),
    ("audit", [], ADD),
    ("audit", ["settings"], ADD),
    ("audit", ["settings", "measure"], "overlap"),
    ("audit", ["summary", "clusters"], DROP),
    ("audit", ["summary"], ADD),
    ("audit", ["actions", 0, "action"], "delete"),
    ("audit", ["actions", 0], ADD),
    ("audit", ["documents", 0, "status"], "gone"),
    ("audit", ["documents", 0, "content_hash"], "abc"),
    ("audit", ["ledger", 0, "status"], "lost"),
    ("audit", ["pairs", 0, "kind"], "similar"),
    ("audit", ["pairs", 0, "jaccard"], 1.5),
    ("audit", ["pairs", 0], ADD),
    ("audit", ["clusters", 0, "kind"], "partial"),
    ("audit", ["clusters", 0, "members", 0, "role"], "owner"),
    ("audit", ["clusters", 0, "members", 0, "action"], DROP),
    ("audit", ["clusters", 0, "members", 0], ADD),
    ("audit", ["clusters", 0, "review", "status"], "maybe"),
    ("audit", ["clusters", 0, "members", 0, "review", "decided_on"], "document"),
    ("audit", ["passages", 0, "moved"], "no"),
    ("audit", ["unique_runs", 0, "action"], "retire"),
    ("audit", ["warnings"], [{"kind": "made-up", "message": "no such warning"}]),
    ("audit", ["delta", "basis"], "yesterday"),
    ("audit", ["delta", "clusters", 0, "status"], "gone"),
    ("audit", ["delta", "clusters", 0, "from_clusters"], DROP),
    ("audit", ["delta", "index", "refreshed"], "yes"),
    ("audit-summary", ["exit_code"], 3),
    ("audit-summary", ["fail_on"], "sometimes"),
    ("audit-summary", ["outputs", "audit.json"], DROP),
    ("audit-summary", ["outputs"], ADD),
    ("run", ["total_seconds"], DROP),
    ("run", ["started"], "yesterday"),
    ("run", ["stages_seconds", "ingest"], -1),
    ("run", [], ADD),
    ("redirects", ["redirects", 0, "action"], "keep"),
    ("redirects", ["redirects", 0], ADD),
    ("redirects", ["base_url"], DROP),
    ("similar", ["ranking"], "pagerank"),
    ("similar", ["results", 0, "snippet"], DROP),
    ("similar", ["results", 0, "terms", 0], ADD),
    ("similar", ["results", 0, "cosine"], 1.2),
    ("decisions", ["decisions", 0], ADD),
    ("decisions", ["decisions", 0, "documents", 0], ADD),
    ("decisions", ["decisions", 0, "decision"], "maybe"),
    ("check", ["schema"], "dedup-check/2"),
    ("check", ["caution"], DROP),
    ("check", ["settings", "min_words"], 0),
    ("check", ["summary", "groups"], DROP),
    ("check", ["submissions", 0], ADD),
    ("check", ["submissions", 0, "excluded_by_reason"], {"copied": 1}),
    ("check", ["submissions", 0, "top_source_kind"], "web"),
    ("check", ["matches", {"status": "counted"}, "status"], "flagged"),
    ("check", ["matches", {"status": "counted"}, "reason"], "quoted"),
    ("check", ["matches", {"status": "excluded"}, "reason"], ""),
    ("check", ["groups", 0, "group"], "X1"),
    ("check", ["ledger", 0, "role"], "teacher"),
]


@pytest.fixture(scope="module")
def samples(runs, index_outputs):
    """One real output per schema: the richest of those made above."""
    second = index_outputs["second"]
    return {
        "audit": second["audit"],
        "audit-summary": second["audit-summary"],
        "run": second["run"],
        "redirects": runs.audit("cosine")["redirects"],
        "similar": index_outputs["similar"][0],
        "decisions": index_outputs["decisions"],
        "check": runs.check("small-class"),
    }


def _label(name: str, path: list, change) -> str:
    where = ".".join(
        ",".join(f"{k}={v}" for k, v in s.items()) if isinstance(s, dict) else str(s) for s in path
    )
    what = "drop" if change is DROP else "add" if change is ADD else "set"
    return f"{name}:{where or '$'}:{what}"


@pytest.mark.parametrize("name, path, change", BREAKAGES, ids=[_label(*case) for case in BREAKAGES])
def test_a_broken_output_is_refused_where_it_is_broken(samples, name, path, change):
    data = copy.deepcopy(samples[name])
    assert _errors(name, data) == []
    where = _resolve(data, path)
    parent = data
    for step in where[:-1] if change is not ADD else where:
        parent = parent[step]
    if change is ADD:
        parent["extra"] = 1
    elif change is DROP:
        del parent[where[-1]]
    else:
        parent[where[-1]] = change
    validator = Draft202012Validator(load_schema(name))
    errors = list(validator.iter_errors(data))
    assert errors, (name, path)
    # The error is where the change was made (or about the object holding it).
    paths = [list(e.absolute_path) for e in errors]
    assert any(p == where[: len(p)] or where == p[: len(where)] for p in paths), paths
