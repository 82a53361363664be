"""``dedup check`` on the command line: outputs, columns, exit codes, the caution in the help."""

from __future__ import annotations

import csv
import json

import pytest

from dedup.check import CAUTION
from dedup.cli import main
from dedup.cli_check import HELP_CAUTION

MATCH_COLUMNS = [
    "submission", "source", "source_kind", "submission_start", "submission_end",
    "source_start", "source_end", "words", "similarity",
]  # fmt: skip


def test_the_command_writes_every_output(small_class, tmp_path, capsys):
    subs, refs, texts = small_class
    out = tmp_path / "out"
    assert main(["check", str(subs), "--against", str(refs), "--out", str(out), "--min-words", "12"]) == 0
    assert sorted(p.name for p in out.iterdir()) == [
        "check.html", "check.json", "ledger.csv", "matches.csv", "submissions.csv",
    ]  # fmt: skip
    with open(out / "matches.csv", encoding="utf-8") as handle:
        rows = list(csv.DictReader(handle))
    assert set(MATCH_COLUMNS) <= set(rows[0])
    for row in rows:  # offsets are characters of the text as read
        text = texts[row["submission"]]
        assert 0 <= int(row["submission_start"]) < int(row["submission_end"]) <= len(text)
    with open(out / "submissions.csv", encoding="utf-8") as handle:
        subs_rows = list(csv.DictReader(handle))
    assert len(subs_rows) == len(texts) and {"share_matched", "top_source", "passages"} <= set(subs_rows[0])
    data = json.loads((out / "check.json").read_text(encoding="utf-8"))
    assert data["caution"] == list(CAUTION)
    printed = capsys.readouterr().out
    assert "not proof of misconduct" in printed and "check.html" in printed


def test_the_help_carries_the_caution(capsys):
    with pytest.raises(SystemExit):
        main(["check", "--help"])
    helped = " ".join(capsys.readouterr().out.split())
    assert "Matching text is not proof of misconduct" in helped
    assert "academic-integrity procedure" in helped and "protect it" in helped
    # The help's words say what the notice says.
    for phrase in ("not proof of misconduct", "academic-integrity procedure", "students' work"):
        assert phrase in HELP_CAUTION and any(phrase in line for line in CAUTION)


@pytest.mark.parametrize(
    "argv, message",
    [
        (["check", "/no/such/dir", "--out", "{out}"], "no such file or folder"),
        (["check", "{subs}", "--template", "/no/such/file", "--out", "{out}"], "no such file or folder"),
        (["check", "{subs}", "--min-words", "0", "--out", "{out}"], "must be at least 1"),
        (["check", "{subs}", "--common-share", "2", "--out", "{out}"], "at most 1"),
        (["check", "{empty}", "--out", "{out}"], "no submission"),
        (["check", "{subs}", "--out", "{file}"], "not a folder"),
    ],
)
def test_bad_input_exits_2_with_one_clear_line(small_class, tmp_path, capsys, argv, message):
    subs, _, _ = small_class
    empty = tmp_path / "empty"
    empty.mkdir()
    (empty / "blank.txt").write_text("  \n", encoding="utf-8")
    a_file = tmp_path / "a-file"
    a_file.write_text("x", encoding="utf-8")
    places = {"out": str(tmp_path / "o"), "subs": str(subs), "empty": str(empty), "file": str(a_file)}
    code = None
    try:
        code = main([a.format(**places) for a in argv])
    except SystemExit as exit_:
        code = exit_.code
    err = capsys.readouterr().err
    assert code == 2 and message in err and "Traceback" not in err
