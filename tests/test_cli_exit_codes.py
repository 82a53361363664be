"""Exit codes that tell the truth: a run that read no document, or too few of its inputs,
exits with code 4 and says why on stderr, and still writes its outputs; no recall is claimed
when nothing was compared."""

from __future__ import annotations

import csv
import json
import os

import pytest

from dedup.cli import LEFT_OUT_ON_PURPOSE, input_problems, main, unread_inputs

# Invented texts: each a paragraph of its own, so no two are near-duplicates.
TOPICS = ("lanterns", "orchards", "ferries", "quarries", "beehives", "glaciers")


def text(topic: str, extra: str = "") -> str:
    return (
        f"The small guide to {topic} explains in plain words how the keepers of {topic} plan "
        f"their week, which tools they carry, and why the old {topic} records are kept in a dry "
        f"cupboard near the door. {extra}"
    )


BINARY = b"\x00\x01\x02 not text at all \x00"


def _ledger(out) -> list[dict]:
    with open(out / "ledger.csv", encoding="utf-8") as handle:
        return list(csv.DictReader(handle))


def test_no_document_read_exits_4_writes_outputs_and_claims_no_recall(write_corpus, tmp_path, capsys):
    root = write_corpus({f"f{i}.txt": BINARY for i in range(8)})
    out = tmp_path / "out"
    assert main(["audit", str(root), "-o", str(out)]) == 4
    captured = capsys.readouterr()
    assert "no document was read" in captured.err and "binary data: 8" in captured.err
    assert "ledger.csv" in captured.err and "Traceback" not in captured.err
    assert "expected recall" not in captured.out and "nothing to compare" in captured.out
    rows = _ledger(out)  # written all the same, for a reviewer
    assert len(rows) == 8 and {r["status"] for r in rows} == {"skipped"}
    assert (out / "audit.json").is_file() and (out / "report.html").is_file()


def test_an_empty_folder_and_only_empty_texts_read_no_document(write_corpus, tmp_path, capsys):
    empty = tmp_path / "empty"
    empty.mkdir()
    assert main(["audit", str(empty), "-o", str(tmp_path / "o1"), "-q"]) == 4
    assert "hold no input" in capsys.readouterr().err
    root = write_corpus({"blank.md": "  \n\t\n"})
    assert main(["audit", str(root), "-o", str(tmp_path / "o2"), "-q"]) == 4
    assert "1 had no text" in capsys.readouterr().err


@pytest.mark.parametrize(
    "good, bad, extra, code",
    [
        (1, 2, [], 4),  # 2 of 3 not read: above the default share 0.5
        (1, 1, [], 0),  # 1 of 2: not above 0.5
        (1, 2, ["--max-skipped-share", "0.7"], 0),
        (1, 1, ["--max-skipped-share", "0.4"], 4),
        (2, 1, ["--fail-on", "skipped"], 4),
        (3, 0, ["--fail-on", "skipped"], 0),
    ],
)
def test_the_share_of_inputs_not_read_decides(write_corpus, tmp_path, capsys, good, bad, extra, code):
    files = {f"good{i}.txt": text(TOPICS[i]) for i in range(good)}
    files.update({f"bad{i}.txt": BINARY for i in range(bad)})
    root = write_corpus(files)
    assert main(["audit", str(root), "-o", str(tmp_path / "out"), "-q", *extra]) == code
    err = capsys.readouterr().err
    assert ("inputs not read" in err) == (code == 4)
    if code == 4:
        assert f"{bad} of {good + bad} inputs could not be read" in err


def test_inputs_left_out_on_purpose_are_not_inputs_not_read(write_corpus, tmp_path, capsys):
    """Hidden files, version-control folders, --exclude, --include, links not followed, a file
    seen twice, a type that is no text and the audit's own outputs are choices, not failures."""
    outside = tmp_path / "outside.txt"
    outside.write_text(text("ferries"), encoding="utf-8")
    root = write_corpus(
        {
            "keep.md": text("lanterns"),
            ".hidden.md": text("orchards"),
            ".git/notes.md": text("quarries"),
            "drafts/draft.md": text("beehives"),
            "other.rst": text("glaciers"),
            "picture.png": b"\x89PNG\r\n\x1a\n",
        }
    )
    os.symlink(outside, root / "outside-link.md")
    os.symlink(root / "keep.md", root / "again.md")
    os.symlink(root / "drafts", root / "folder-link")
    out = root / "report-out"
    assert main(["audit", str(root), "-o", str(out), "-q"]) == 0  # creates report-out inside the folder
    argv = [
        "audit",
        str(root),
        "-o",
        str(out),
        "-q",
        "--exclude",
        "drafts",
        "--include",
        "*.md",
        "--include",
        "*.png",
    ]
    assert main([*argv, "--fail-on", "skipped", "--max-skipped-share", "0"]) == 0, capsys.readouterr().err
    inputs = json.loads((out / "audit.json").read_text(encoding="utf-8"))["summary"]["inputs"]
    counted, failed = unread_inputs(inputs)
    assert (counted, failed) == (1, {})
    # Every way of leaving an input out was met (so a change of its wording fails here).
    kinds = list(inputs["skip_reasons"])
    assert len(kinds) == 9, kinds
    assert all(kind.startswith(LEFT_OUT_ON_PURPOSE) for kind in kinds)


def test_inputs_not_read_win_over_clusters_found_and_show_in_json(write_corpus, tmp_path, capsys):
    root = write_corpus({"a.txt": text("orchards"), "b.txt": text("orchards"), "c.txt": BINARY})
    out = tmp_path / "out"
    assert main(["audit", str(root), "-o", str(out), "--fail-on", "any", "-q"]) == 1
    argv = ["audit", str(root), "-o", str(out), "--fail-on", "any", "--fail-on", "skipped", "--json"]
    assert main(argv) == 4
    captured = capsys.readouterr()
    printed = json.loads(captured.out)  # stdout holds the JSON only; the reasons are on stderr
    assert printed["exit_code"] == 4 and printed["summary"]["clusters"] == 1
    assert "--fail-on skipped" in captured.err and "binary data: 1" in captured.err


def test_recall_is_stated_only_when_texts_were_compared(write_corpus, tmp_path, capsys):
    alone = write_corpus(
        {"one/a.txt": text("lanterns"), "copies/a.txt": text("ferries"), "copies/b.txt": text("ferries")}
    )
    for folder in ("one", "copies"):  # one text; two copies of one text
        assert main(["audit", str(alone / folder), "-o", str(tmp_path / folder)]) == 0
        printed = capsys.readouterr().out
        assert "expected recall" not in printed and "candidates: none (1 distinct texts" in printed
    two = write_corpus({"two/a.txt": text("quarries"), "two/b.txt": text("beehives")})
    assert main(["audit", str(two / "two"), "-o", str(tmp_path / "two")]) == 0
    assert "expected recall" in capsys.readouterr().out


def test_index_build_and_update_exit_4_without_documents(write_corpus, tmp_path, capsys):
    root = write_corpus({"a.txt": BINARY, "b.txt": BINARY})
    index = tmp_path / "x.index"
    assert main(["index", "build", str(root), "--index", str(index), "-q"]) == 4
    assert index.is_file() and "no document was read" in capsys.readouterr().err
    (root / "c.txt").write_text(text("glaciers"), encoding="utf-8")
    assert main(["index", "update", "--index", str(index), "-q"]) == 4  # 2 of 3 not read
    assert main(["index", "update", "--index", str(index), "-q", "--max-skipped-share", "1"]) == 0
    assert main(["index", "update", "--index", str(index), "-q", "--fail-on", "skipped"]) == 4
    assert "2 of 3 inputs could not be read" in capsys.readouterr().err


def test_check_exits_4_when_no_reference_was_read(tmp_path, capsys):
    subs, refs = tmp_path / "subs", tmp_path / "refs"
    subs.mkdir()
    refs.mkdir()
    for i, topic in enumerate(TOPICS[:3]):
        (subs / f"s{i}.txt").write_text(text(topic), encoding="utf-8")
    (refs / "r.txt").write_bytes(BINARY)
    out = tmp_path / "out"
    assert main(["check", str(subs), "--against", str(refs), "-o", str(out), "-q"]) == 4
    err = capsys.readouterr().err
    assert (
        "no reference was read" in err and (out / "check.json").is_file() and (out / "ledger.csv").is_file()
    )
    (subs / "broken.txt").write_bytes(BINARY)
    assert main(["check", str(subs), "-o", str(out), "-q"]) == 0  # 1 of 4 not read
    assert main(["check", str(subs), "-o", str(out), "-q", "--fail-on", "skipped"]) == 4
    assert "1 of 4 inputs could not be read" in capsys.readouterr().err


def test_input_problems_count_failures_only():
    base = {"entries": 10, "read": 4, "truncated": 0, "empty": 0, "skipped": 6, "refused": 0}
    purposeful = {
        **base,
        "skip_reasons": {"hidden file": 3, "unsupported file type .png": 2, "binary data": 1},
    }
    assert unread_inputs(purposeful) == (5, {"binary data": 1})
    assert input_problems(purposeful, 0.5, False) == []
    assert "1 of 5" in input_problems(purposeful, 0.5, True)[0]
    assert "1 of 5" in input_problems(purposeful, 0.1, False)[0]
    failing = {**base, "skip_reasons": {"binary data": 4, "file too large": 2}}
    (problem,) = input_problems(failing, 0.5, False)
    assert "6 of 10" in problem and "binary data: 4, file too large: 2" in problem
    refused = {
        **base,
        "read": 1,
        "skipped": 0,
        "refused": 1,
        "entries": 2,
        "skip_reasons": {"archive limit": 1},
    }
    assert input_problems(refused, 0.5, False) == []  # 1 of 2 is not above a half
    assert input_problems(refused, 0.49, False) != []
