"""References kept in an index: the check finds in them what it finds in the same files."""

from __future__ import annotations

import json

import pytest

from dedup.check import CheckSettings, check
from dedup.index import IndexFileError, build

SETTINGS = CheckSettings(min_words=12, short_words=8)


def _by_submission(result) -> dict:
    """Submission → (share matched, top source, counted passages' submission offsets)."""
    out = {}
    for record in result.submissions:
        name = record["submission"]
        spans = sorted(
            (m["source"], m["submission_start"], m["submission_end"])
            for m in result.matches
            if m["submission"] == name and m["status"] == "counted"
        )
        out[name] = (record["share_matched"], record["top_source"], spans)
    return out


def test_an_indexed_reference_set_gives_the_same_matches_as_its_files(small_class, tmp_path):
    subs, refs, _ = small_class
    build([str(refs)], str(tmp_path / "refs.index"))
    from_files = check([str(subs)], against=[str(refs)], settings=SETTINGS)
    from_index = check([str(subs)], settings=SETTINGS, against_index=str(tmp_path / "refs.index"))
    expected = _by_submission(from_files)
    assert any(top == "brisk.txt" for _, top, _ in expected.values())  # something to compare
    assert _by_submission(from_index) == expected
    formats = {e["format"] for e in from_index.ledger if e["role"] == "reference"}
    assert formats == {"index"}


def test_index_references_add_to_given_ones_and_copies_are_compared_once(small_class, tmp_path):
    subs, refs, texts = small_class
    (refs / "copy-of-brisk.txt").write_text(
        (refs / "brisk.txt").read_text(encoding="utf-8"), encoding="utf-8"
    )
    build([str(refs)], str(tmp_path / "refs.index"))
    extra = tmp_path / "extra"
    extra.mkdir()
    (extra / "essay-bank.txt").write_text(texts["clean.txt"], encoding="utf-8")
    result = check(
        [str(subs)], against=[str(extra)], settings=SETTINGS, against_index=str(tmp_path / "refs.index")
    )
    entries = {e["input"]: e for e in result.ledger if e["role"] == "reference"}
    assert entries["essay-bank.txt"]["format"] != "index"
    assert entries["copy-of-brisk.txt"]["document_id"] == "brisk.txt"
    assert "same text as brisk.txt" in entries["copy-of-brisk.txt"]["reason"]
    clean = next(r for r in result.submissions if r["submission"] == "clean.txt")
    assert clean["top_source"] == "essay-bank.txt"


def test_a_file_that_is_not_an_index_is_a_clear_error(small_class, tmp_path):
    subs, _, _ = small_class
    fake = tmp_path / "notes.index"
    fake.write_text("not an index", encoding="utf-8")
    with pytest.raises(IndexFileError):
        check([str(subs)], settings=SETTINGS, against_index=str(fake))


def test_tables_give_the_same_check_as_files(small_class):
    pd = pytest.importorskip("pandas")
    subs, refs, texts = small_class
    from_files = check([str(subs)], against=[str(refs)], settings=SETTINGS)
    frame = pd.DataFrame({"id": list(texts), "text": list(texts.values())})
    references = pd.DataFrame(
        {
            "id": [p.name for p in sorted(refs.iterdir())],
            "text": [p.read_text() for p in sorted(refs.iterdir())],
        }
    )
    from_tables = check(frame, against=references, settings=SETTINGS)
    assert _by_submission(from_tables) == _by_submission(from_files)
    assert {e["format"] for e in from_tables.ledger} == {"record"}


def test_the_command_line_takes_an_index_of_references(small_class, tmp_path, capsys):
    from dedup.cli import main

    subs, refs, _ = small_class
    build([str(refs)], str(tmp_path / "refs.index"))
    out = tmp_path / "out"
    assert (
        main(["check", str(subs), "--against-index", str(tmp_path / "refs.index"), "-o", str(out), "-q"]) == 0
    )
    data = json.loads((out / "check.json").read_text(encoding="utf-8"))
    copier = next(r for r in data["submissions"] if r["submission"] == "copier.txt")
    assert copier["top_source"] == "brisk.txt"
    (tmp_path / "broken.index").write_bytes(b"SQLite format 3\x00" + b"\x01" * 200)
    assert (
        main(["check", str(subs), "--against-index", str(tmp_path / "broken.index"), "-o", str(out), "-q"])
        == 2
    )
    assert "dedup: error:" in capsys.readouterr().err


def test_a_markdown_block_quote_is_excluded_as_quoted(small_class, tmp_path):
    from check_texts import SOURCE

    import dedup

    subs, refs, _ = small_class
    (subs / "md-quoter.md").write_text(
        "# My essay\n\nI lean on one account of the canal.\n\n> " + SOURCE + "\n\n— Hale (2011), p. 4.\n",
        encoding="utf-8",
    )
    result = check([str(subs)], against=[str(refs)], settings=SETTINGS)
    rows = [m for m in result.matches if m["submission"] == "md-quoter.md" and m["source"] == "brisk.txt"]
    assert rows and all(m["status"] == "excluded" and m["reason"] == "quoted" for m in rows)
    counted = check([str(subs)], against=[str(refs)], settings=SETTINGS.replace(exclude_quotes=False))
    assert any(
        m["status"] == "counted" for m in counted.matches if m["submission"] == "md-quoter.md"
    )  # the same text counts when quotations are counted
    # An audit reads Markdown without its quote marks, as before: the same essay without them is an exact copy.
    essay = (subs / "md-quoter.md").read_text(encoding="utf-8")
    (tmp_path / "audit").mkdir()
    (tmp_path / "audit" / "quoted.md").write_text(essay, encoding="utf-8")
    (tmp_path / "audit" / "plain.md").write_text(essay.replace("> ", ""), encoding="utf-8")
    audited = dedup.audit([str(tmp_path / "audit")])
    assert [sorted(g["members"]) for g in audited.exact_groups] == [["plain.md", "quoted.md"]]
