"""The index commands through `dedup.cli_index` with a parser built here: output, JSON and exit codes."""

from __future__ import annotations

import json

from index_helpers import sqlite

import dedup
from dedup.cli_index import audit_with_index, delta_lines


def test_build_update_info_and_similar(tmp_path, write_corpus, corpus_files, base_texts, cli):
    root = write_corpus(corpus_files)
    index = str(tmp_path / "c.index")
    code, out, err = cli("index", "build", str(root), "--index", index, "--quiet")
    assert (code, out) == (0, "")
    code, out, _ = cli("index", "update", "--index", index, "--json")
    summary = json.loads(out)
    assert code == 0 and summary["kind"] == "update" and summary["unchanged"] == len(corpus_files)
    code, out, _ = cli("index", "info", "--index", index, "--check", "--json")
    info = json.loads(out)
    assert (
        code == 0 and info["integrity_check"] == ["ok"] and info["documents"]["present"] == len(corpus_files)
    )
    code, out, _ = cli("similar", base_texts[2][:600], "--index", index, "--json", "-k", "2")
    results = json.loads(out)["results"]
    assert code == 0 and [r["document_id"] for r in results][:1] == ["c/one.txt"]
    assert set(results[0]) >= {
        "score",
        "cosine",
        "terms",
        "jaccard_estimate",
        "jaccard",
        "copies",
        "containment",
        "snippet",
    }
    code, out, _ = cli("similar", "--file", str(root / "c/two.txt"), "--index", index)
    lines = out.splitlines()
    assert code == 0 and "c/two.txt" in lines[0] and lines[0].split()[1] == "bm25"
    assert "holds 100% of the query" in lines[1] and "MinHash estimate" in lines[1]
    assert lines[2].strip().startswith("“") and len(lines[2].split()) >= 24  # the passage that matches


def test_similar_without_a_query_says_how_to_give_one(tmp_path, write_corpus, corpus_files, cli):
    root = write_corpus(corpus_files)
    index = str(tmp_path / "c.index")
    assert cli("index", "build", str(root), "--index", index, "--quiet")[0] == 0
    code, out, err = cli("similar", "--index", index)
    assert code == 2 and out == "" and err.count("\n") == 1
    assert "give the text to search for, as TEXT or with --file FILE" in err and "not both" not in err
    code, _, err = cli("similar", "words", "--file", str(root / "c/two.txt"), "--index", index)
    assert code == 2 and "not both" in err
    code, _, err = cli("similar", "the and of it", "--index", index)
    assert code == 2 and "only stop words" in err


def test_baseline_command(tmp_path, write_corpus, corpus_files, cli):
    root = write_corpus(corpus_files)
    index = str(tmp_path / "b.index")
    assert cli("index", "build", str(root), "--index", index, "--quiet")[0] == 0
    code, _, err = cli("index", "baseline", "--index", index)
    assert code == 2 and "no audit recorded yet" in err and err.count("\n") == 1
    result = dedup.audit([str(root)])
    audit_with_index(index, result)
    code, out, _ = cli("index", "baseline", "--index", index, "--json")
    baseline = json.loads(out)
    assert code == 0 and baseline["audit_id"] == result.audit_id and baseline["clusters"] == 3
    code, out, _ = cli("index", "info", "--index", index, "--json")
    assert json.loads(out)["baseline"]["audit_id"] == result.audit_id
    code, out, _ = cli("index", "info", "--index", index)
    assert f"baseline: audit {result.audit_id}" in out


def test_usage_errors_are_one_line_and_exit_2(tmp_path, write_corpus, corpus_files, cli):
    root = write_corpus(corpus_files)
    index = str(tmp_path / "c.index")
    (tmp_path / "notes.txt").write_text("not an index at all, just words in a file" * 3)
    checks = [
        ("similar", "words", "--index", str(tmp_path / "notes.txt")),
        ("similar", "words", "--index", str(tmp_path / "missing.index")),
        ("index", "update", "--index", index),
        ("index", "build", str(tmp_path / "no-such-folder"), "--index", index),
    ]
    for argv in checks:
        code, out, err = cli(*argv)
        assert code == 2 and err.startswith("dedup: error: ") and err.count("\n") == 1, (argv, err)
    assert cli("index", "build", str(root), "--index", index, "--quiet")[0] == 0
    for argv in [
        ("index", "update", "--index", index, "--seed", "9"),
        ("index", "build", str(root), "--index", index),
        ("similar", "...", "--index", index),
        ("similar", "--index", index),
        ("decisions", "import", str(tmp_path / "notes.txt"), "--index", index),
        ("index",),
    ]:
        code, out, err = cli(*argv)
        assert code == 2 and err.startswith("dedup: error: ") and err.count("\n") == 1, (argv, err)
    with sqlite(index) as connection:
        connection.execute("UPDATE meta SET value = '7' WHERE key = 'schema_version'")
    code, _, err = cli("index", "info", "--index", index)
    assert code == 2 and "newer dedup" in err


def test_decisions_import_command(tmp_path, write_corpus, corpus_files, cli):
    root = write_corpus(corpus_files)
    result = dedup.audit([str(root)])
    hash_of = {d["id"]: d["content_hash"] for d in result.documents}
    data = {
        "schema": "dedup-review-decisions",
        "schema_version": 1,
        "audit_id": result.audit_id,
        "exported_at": "2024-05-02T10:00:00Z",
        "decisions": [
            {
                "kind": "pair",
                "cluster_id": "C00003",
                "documents": [{"id": d, "content_hash": hash_of[d]} for d in ("c/one.txt", "c/two.txt")],
                "decision": "keep-both",
                "comment": "",
                "decided_at": "2024-05-02T09:00:00Z",
            }
        ],
    }
    path = tmp_path / "decisions.json"
    path.write_text(json.dumps(data))
    index = str(tmp_path / "d.index")
    code, out, _ = cli("decisions", "import", str(path), "--index", index)
    assert code == 0 and "1 new" in out
    code, out, _ = cli("decisions", "import", str(path), "--index", index)
    assert code == 0 and "0 new, 1 already" in out


def test_audit_with_index_exit_codes_and_summary_lines(tmp_path, write_corpus, corpus_files, capsys):
    root = write_corpus(corpus_files)
    index = str(tmp_path / "a.index")
    delta, code = audit_with_index(index, dedup.audit([str(root)]), "new")
    assert code == 1 and delta["counts"]["new"] == 3
    lines = delta_lines(delta)
    assert "no earlier audit" in lines[0] and sum(" new" in line for line in lines[1:4]) == 3
    assert any(line.startswith("index: 12 documents (12 added") for line in lines)
    assert lines[-1].startswith("no baseline: accept today's clusters with --accept")
    delta, code = audit_with_index(index, dedup.audit([str(root)]), "changed")
    assert (
        code == 0 and "0 new, 0 grown, 0 changed, 0 shrunk, 0 resolved, 3 unchanged" in delta_lines(delta)[0]
    )
    assert audit_with_index(index, dedup.audit([str(root)]), "any")[1] == 1
    (tmp_path / "bad.index").write_text("plain text, not an index, long enough for a header" * 2)
    delta, code = audit_with_index(str(tmp_path / "bad.index"), dedup.audit([str(root)]), "new")
    assert (delta, code) == (None, 2) and "not a dedup index" in capsys.readouterr().err
