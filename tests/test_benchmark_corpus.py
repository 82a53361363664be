"""Tests for the benchmark corpus generator in ``benchmarks/corpus.py``."""

from __future__ import annotations

import json
import re
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

import pytest  # noqa: E402

from benchmarks.corpus import (  # noqa: E402
    available_manpages,
    iter_manpages,
    main,
    make_planted_corpus,
    manpage_to_text,
    synthetic_documents,
)

MAN_SNIPPET = r""".\" A comment line that must vanish.
'\" t
.TH FROB 1 "2024-01-01" "frob 1.0" "User Commands"
.de XX
.B macro body text
..
.ds Pr \fBfrobber\fR
.SH NAME
frob \- frobnicate the \fIwidget\fP files
.SH SYNOPSIS
.B frob
.RB [ \-v ]
.IR file ...
.SH DESCRIPTION
The \*(Pr reads each \f(CWfile\fR and writes \(lqresults\(rq \(em quickly.\" trailing comment
It keeps\ unbreakable spaces, a literal backslash \e here and \%nohyphen words.
.PP
Size changes like \s-1SMALL\s0 and \s+2BIG\s0 leave only the words.
.TP
.B \-v
Be verbose\c
ly.
.IP \(bu 4
First bullet item.
.nf
line one
   line two
.fi
.if t .B typesetter only
.if n plain terminal text
.ie n .ds Qx terminal
.el .ds Qx printer
Output goes to the \*(Qx.
\&.dotted text line
.XX
.sp 2
Quotes: \(aqsingle\(aq and \*(lqdouble\*(rq.
"""

MDOC_SNIPPET = r""".Dd January 1, 2024
.Dt BAR 1
.Os
.Sh NAME
.Nm bar
.Nd do useful things
.Sh SYNOPSIS
.Nm
.Op Fl v
.Op Fl o Ar file
.Ar input ...
.Sh DESCRIPTION
The
.Nm
utility reads
.Ar input
and writes
.Pa /tmp/out .
See
.Xr foo 1 .
.Bl -tag -width Ds
.It Fl v
Print more.
.El
"""

# Pages documenting roff itself legitimately show request lines as text.
ROFF_DOC_PAGE = re.compile(
    r"^(?:g?[nt]roff|groff\w*|eqn|neqn|pic|tbl|grog|lexgrog|man|mandoc|soelim|refer|"
    r"preconv|grotty|grops|chem|pdfroff|gdiffmk|mmroff|roff2\w*)\."
)
MACRO_LINE = re.compile(r"^\.[A-Z]{2}", re.M)
FONT_ESCAPE = re.compile(r"\\f(?:[A-Z0-9]|\(..|\[)")


def read_tree(root: Path) -> dict[str, bytes]:
    return {p.relative_to(root).as_posix(): p.read_bytes() for p in sorted(root.rglob("*")) if p.is_file()}


def test_man_snippet_keeps_words_and_drops_markup() -> None:
    text = manpage_to_text(MAN_SNIPPET)
    expected = [
        "NAME",
        "frob - frobnicate the widget files",
        "SYNOPSIS",
        "frob [-v] file...",
        'The frobber reads each file and writes "results" \u2014 quickly.',
        "It keeps unbreakable spaces, a literal backslash \\ here and nohyphen words.",
        "Size changes like SMALL and BIG leave only the words.",
        "-v\nBe verbosely.",
        "\u2022 First bullet item.",
        "line one\n   line two",
        "plain terminal text",
        "Output goes to the terminal.",
        ".dotted text line",
        "Quotes: 'single' and \"double\".",
    ]
    for fragment in expected:
        assert fragment in text, fragment
    for absent in ("comment", "FROB", "2024-01-01", "macro body", "typesetter", "printer", "Pr", "XX"):
        assert absent not in text, absent
    # The one backslash left is the literal one written as \e.
    assert text.count("\\") == 1
    assert not re.search(r"[\x00-\x08\x0b-\x1f]", text)
    for line in text.splitlines():
        assert not re.match(r"\.[A-Za-z]{1,3}\b", line) or line == ".dotted text line"
    assert "\n\n\n" not in text and text.endswith("\n")


def test_mdoc_snippet() -> None:
    text = manpage_to_text(MDOC_SNIPPET)
    for fragment in (
        "bar - do useful things",
        "bar [-v] [-o file] input ...",
        "The bar utility reads input and writes /tmp/out. See foo(1).",
        "-v\nPrint more.",
    ):
        assert fragment in text, fragment
    assert not re.search(r"\b(?:Nm|Nd|Fl|Ar|Op|Xr|Pa|Bl|It|El|Dd|Sh)\b", text)


def test_so_redirect_and_empty_pages() -> None:
    assert manpage_to_text('.\\" redirect\n.so man1/other.1\n') == ""
    assert manpage_to_text(".so man1/other.1") == ""
    assert manpage_to_text("") == ""
    # An include inside a real page is dropped, the page itself is kept.
    assert manpage_to_text(".SH NAME\n.so man1/part.1\nstill here\n") == "NAME\nstill here\n"


@pytest.mark.skipif(not available_manpages(200), reason="needs at least 200 man pages under /usr/share/man")
def test_real_manpages_convert_cleanly() -> None:
    pages = list(iter_manpages(limit=200))
    assert len(pages) == 200
    assert [name for name, _ in pages] == sorted(name for name, _ in pages)
    for name, text in pages:
        assert len(text.split()) >= 50, name
        if not ROFF_DOC_PAGE.match(name):
            assert not MACRO_LINE.search(text), name
        assert not FONT_ESCAPE.search(text), name
        assert not re.search(r"[\x00-\x08\x0b-\x1f]", text), name


def test_available_manpages_with_missing_root(tmp_path: Path) -> None:
    assert available_manpages(0, root=tmp_path)
    assert not available_manpages(1, root=tmp_path)
    assert list(iter_manpages(root=tmp_path)) == []


def check_truth(out: Path, truth: dict, rates: list[float]) -> None:
    on_disk = {p.relative_to(out).as_posix() for p in out.rglob("*") if p.is_file()}
    assert on_disk - {"truth.json"} == set(truth["files"])
    assert json.loads((out / "truth.json").read_text(encoding="utf-8")) == truth
    n_base = truth["n_base"]
    bases = [k for k, v in truth["files"].items() if v["kind"] == "base"]
    copies = [k for k, v in truth["files"].items() if v["kind"] == "copy"]
    assert len(bases) == n_base
    assert len(copies) == truth["n_families"] * len(rates)
    for rel in bases:
        entry = truth["files"][rel]
        assert rel == f"base/{entry['family']:05d}-" + rel.split("-", 1)[1]
        assert entry["operations"] == []
    for rel in copies:
        entry = truth["files"][rel]
        assert rel.startswith(f"copies/{entry['family']:05d}-e")
        assert entry["base"] in truth["files"] and truth["files"][entry["base"]]["family"] == entry["family"]
        ops = [op["op"] for op in entry["operations"]]
        assert "word_edits" in ops
        assert (out / rel).read_bytes() != (out / entry["base"]).read_bytes()
        for op in entry["operations"]:
            if op["op"] == "word_edits":
                changed = op["substituted"] + op["deleted"] + op["inserted"]
                assert changed == round(op["rate"] * op["words"])
            if op["op"] == "add_paragraph":
                assert op["source"] != entry["family"] and 0 <= op["source"] < n_base
    for family, members in truth["families"].items():
        assert all(truth["files"][m]["family"] == int(family) for m in members)


@pytest.mark.parametrize("source", ["synthetic", "manpages"])
def test_planted_corpus_is_deterministic(tmp_path: Path, source: str) -> None:
    if source == "manpages" and not available_manpages(400):
        pytest.skip("needs at least 400 man pages under /usr/share/man")
    rates = [0.02, 0.05, 0.1, 0.2]
    kwargs = {"edit_rates": rates, "source": source, "structural_prob": 0.6}
    first = make_planted_corpus(tmp_path / "a", 40, 8, 11, **kwargs)
    second = make_planted_corpus(tmp_path / "b", 40, 8, 11, **kwargs)
    assert first == second
    tree_a, tree_b = read_tree(tmp_path / "a"), read_tree(tmp_path / "b")
    assert tree_a == tree_b
    check_truth(tmp_path / "a", first, rates)
    other = make_planted_corpus(tmp_path / "c", 40, 8, 12, **kwargs)
    assert read_tree(tmp_path / "c") != tree_a
    assert other["seed"] == 12


def test_every_operation_is_exercised(tmp_path: Path) -> None:
    truth = make_planted_corpus(tmp_path, 30, 6, 3, source="synthetic", structural_prob=1.0)
    seen = {op["op"] for entry in truth["files"].values() for op in entry["operations"]}
    assert seen == {
        "reorder_sentences",
        "remove_paragraph",
        "add_paragraph",
        "whitespace_case",
        "wrap_template",
        "word_edits",
    }
    with pytest.raises(FileExistsError):
        make_planted_corpus(tmp_path, 30, 6, 3, source="synthetic")
    again = make_planted_corpus(tmp_path, 30, 6, 3, source="synthetic", structural_prob=1.0, overwrite=True)
    assert again == truth


def test_synthetic_documents_have_requested_size() -> None:
    for target in (2048, 8192):
        sizes = [len(text.encode("utf-8")) for _, text in synthetic_documents(300, seed=5, doc_bytes=target)]
        assert len(sizes) == 300
        assert abs(sum(sizes) / len(sizes) - target) < 0.1 * target
        assert min(sizes) > 0.6 * target and max(sizes) < 1.4 * target
    docs = list(synthetic_documents(300, seed=5))
    assert list(synthetic_documents(10, seed=5)) == docs[:10]
    assert len({text for _, text in docs}) == 300
    words = " ".join(text for _, text in docs).split()
    assert len(set(words)) > 2000


def test_cli_prints_summary(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    out = tmp_path / "corpus"
    status = main(
        ["--out", str(out), "--base", "12", "--families", "3", "--seed", "4", "--source", "synthetic"]
    )
    assert status == 0
    line = capsys.readouterr().out.strip()
    assert "\n" not in line and line.startswith("wrote 24 files (12 base, 12 copies in 3 families")
    assert len(list((out / "copies").iterdir())) == 12
