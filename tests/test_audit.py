"""End-to-end audits through the Python API and the command line."""

from __future__ import annotations

import json
import subprocess
import sys

import pytest

import dedup
from dedup import AuditSettings
from dedup.cli import main

BASE = (
    "Customers who receive an estimated bill can submit their own meter reading through the portal. "
    "The billing team checks every submitted reading against the previous actual reading and the usual "
    "consumption for the property before a corrected bill is issued. Readings that look wrong are sent to "
    "the field team, who visit the property within ten working days and confirm the reading in person."
)


def edit(text: str, replacements: dict[str, str]) -> str:
    for old, new in replacements.items():
        assert old in text
        text = text.replace(old, new, 1)
    return text


def test_exact_near_and_unrelated(write_corpus):
    near = edit(BASE, {"ten working days": "ten business days"})
    root = write_corpus(
        {
            "a.md": BASE,
            "copy/a.md": "  " + BASE.upper() + "\n",  # same text after normalization
            "b.md": near,
            "c.md": "The annual leave year runs from April to March and unused days do not carry over.",
        }
    )
    result = dedup.audit([str(root)])
    assert result.exact_groups == [
        {"content_hash": result.exact_groups[0]["content_hash"], "size": 2, "members": ["a.md", "copy/a.md"]}
    ]
    assert len(result.clusters) == 1
    cluster = result.clusters[0]
    assert sorted(m["document_id"] for m in cluster["members"]) == ["a.md", "b.md", "copy/a.md"]
    actions = {a["document_id"]: a for a in result.actions}
    assert actions["c.md"]["action"] == "keep" and actions["c.md"]["cluster_id"] is None
    retired = [d for d, a in actions.items() if a["action"] == "retire"]
    assert len(retired) == 2 and all(actions[d]["in_favour_of"] == cluster["keeper"] for d in retired)
    near_pair = next(p for p in result.pairs if p["kind"] == "near")
    assert 0.8 <= near_pair["jaccard"] < 1.0


def test_chaining_is_marked_linked_through(write_corpus):
    sentences = [
        f"Sentence number {i} explains step {i} of the procedure in plain words for staff." for i in range(20)
    ]
    a = " ".join(sentences)
    b_sentences = sentences.copy()
    for i in (5,):
        b_sentences[i] = f"Rewritten line {i} now tells a different story about something else entirely here."
    c_sentences = b_sentences.copy()
    for i in (14,):
        c_sentences[i] = f"Another rewrite {i} changes this part with brand new wording for the readers."
    root = write_corpus(
        {
            "a.txt": a,
            "b.txt": " ".join(b_sentences) + " Extra closing words for length.",
            "c.txt": " ".join(c_sentences),
        }
    )
    result = dedup.audit([str(root)], AuditSettings(threshold=0.8))
    cluster = result.clusters[0]
    roles = {m["document_id"]: m for m in cluster["members"]}
    assert cluster["keeper"] == "b.txt"  # longest
    scores = {p["left"] + p["right"]: p["jaccard"] for p in result.pairs}
    assert "a.txtc.txt" not in scores  # A and C are not alike enough on their own
    result2 = dedup.audit([str(root)], AuditSettings(threshold=0.8, prefer=("a.txt",)))
    roles = {m["document_id"]: m for m in result2.clusters[0]["members"]}
    assert roles["a.txt"]["role"] == "keeper"
    assert roles["b.txt"]["role"] == "duplicate"
    assert roles["c.txt"]["role"] == "linked-through"
    assert roles["c.txt"]["linked_through"] == "b.txt"
    assert roles["c.txt"]["action"] == "review"
    assert roles["c.txt"]["similarity_to_keeper"]["jaccard"] < 0.8


def test_contained_article_is_found_with_containment(write_corpus):
    other = "Payment plans spread the cost of a large bill over six or twelve monthly instalments agreed with the customer."
    root = write_corpus(
        {"part.md": BASE, "merged.md": "Introduction to the merged page. " + BASE + " " + other * 3}
    )
    assert dedup.audit([str(root)]).clusters == []  # Jaccard is low
    result = dedup.audit([str(root)], AuditSettings(measure="containment"))
    assert result.clusters[0]["keeper"] == "merged.md"
    member = next(m for m in result.clusters[0]["members"] if m["document_id"] == "part.md")
    assert member["action"] == "retire" and member["similarity_to_keeper"]["containment_in_keeper"] == 1.0


def test_keeper_containment_low_sends_the_member_to_review(write_corpus):
    extra = " It also covers the appeals process, the refunds timetable and the complaint form in detail." * 3
    root = write_corpus({"short.md": BASE, "long.md": BASE + extra})
    result = dedup.audit([str(root)], AuditSettings(measure="containment", prefer=("short.md",)))
    member = next(m for m in result.clusters[0]["members"] if m["document_id"] == "long.md")
    assert member["action"] == "review" and "merge what is missing" in member["reason"]


def test_lsh_and_exhaustive_agree_on_a_small_corpus(write_corpus):
    files = {f"d{i}.txt": BASE.replace("ten", f"{i + 10}") + f" Note {i}." for i in range(6)}
    files["far.txt"] = "Nothing in common with the rest of these documents at all, not one shared phrase."
    root = write_corpus(files)
    ex = dedup.audit([str(root)], AuditSettings(candidates="exhaustive"))
    lsh = dedup.audit([str(root)], AuditSettings(candidates="lsh"))
    assert ex.candidates["method"] == "exhaustive" and lsh.candidates["method"] == "lsh"
    assert [(p["left"], p["right"]) for p in ex.pairs] == [(p["left"], p["right"]) for p in lsh.pairs]


def test_outputs_are_byte_identical_between_runs_and_processes(write_corpus, tmp_path):
    root = write_corpus({"a.md": BASE, "b.md": edit(BASE, {"portal": "website"}), "c.md": BASE})
    outs = []
    for n, seed in enumerate(("0", "123")):
        out = tmp_path / f"out{n}"
        code = f"import sys; from dedup.cli import main; sys.exit(main(['audit', {str(root)!r}, '--out', {str(out)!r}, '--quiet']))"
        subprocess.run([sys.executable, "-c", code], check=True, env={"PYTHONHASHSEED": seed, "PATH": ""})
        outs.append(out)
    for name in ("audit.json", "pairs.csv", "clusters.csv", "actions.csv", "ledger.csv"):
        assert (outs[0] / name).read_bytes() == (outs[1] / name).read_bytes(), name


def test_sources_are_never_modified(write_corpus, tmp_path, snapshot):
    root = write_corpus({"a.md": BASE, "b.md": BASE, "c.txt": b"\xff\xfe broken"})
    before = snapshot(root)
    assert main(["audit", str(root), "--out", str(tmp_path / "out"), "--quiet"]) == 0
    assert snapshot(root) == before


def test_cli_outputs_and_exit_codes(write_corpus, tmp_path, capsys):
    root = write_corpus({"a.md": BASE, "b.md": BASE, "c.md": "unrelated words entirely different here"})
    out = tmp_path / "out"
    assert main(["audit", str(root), "--out", str(out)]) == 0
    printed = capsys.readouterr().out
    assert "exact-copy groups: 1" in printed and "expected recall" in printed
    for name in (
        "audit.json",
        "pairs.csv",
        "clusters.csv",
        "actions.csv",
        "ledger.csv",
        "report.html",
        "run.json",
    ):
        assert (out / name).is_file(), name
    data = json.loads((out / "audit.json").read_text())
    assert data["schema_version"] == "1.0" and data["tool"]["version"] == dedup.__version__
    assert data["settings"]["threshold"] == 0.8 and "expected_recall" in data["candidates"]
    assert main(["audit", str(root), "--out", str(out), "--fail-on", "any", "--quiet"]) == 1
    alone = write_corpus({"x/one.md": "just one document"})
    assert main(["audit", str(alone / "x"), "--out", str(out), "--fail-on", "any", "--quiet"]) == 0


@pytest.mark.parametrize(
    "argv,message",
    [
        (["audit", "/no/such/path", "--out", "OUT"], "no such file or folder: /no/such/path"),
        (["audit", "ROOT", "--out", "OUT", "--threshold", "1.5"], "threshold must be above 0 and at most 1"),
        (["audit", "ROOT", "--out", "OUT", "--bands", "4"], "bands and rows go together"),
        (["audit", "ROOT", "--out", "OUT", "--bands", "20", "--rows", "20"], "exceeds num_perm"),
        (["audit", "ROOT", "--out", "OUT", "--measure", "nope"], "invalid choice"),
        (["audit", "ROOT", "--out", "ROOT/a.md"], "exists and is not a folder"),
    ],
)
def test_usage_errors_are_one_line_and_exit_2(write_corpus, tmp_path, capsys, argv, message):
    root = write_corpus({"a.md": BASE})
    argv = [a.replace("ROOT", str(root)).replace("OUT", str(tmp_path / "out")) for a in argv]
    with pytest.raises(SystemExit) if "invalid choice" in message else _nothing():
        code = main(argv)
        assert code == 2
    err = capsys.readouterr().err
    assert message in err and "Traceback" not in err


class _nothing:
    def __enter__(self):
        return self

    def __exit__(self, *exc):
        return False


def test_empty_folder_and_only_bad_files(write_corpus, tmp_path, capsys):
    empty = tmp_path / "empty"
    empty.mkdir()
    assert main(["audit", str(empty), "--out", str(tmp_path / "o1")]) == 4  # nothing read
    assert "inputs: 0" in capsys.readouterr().out
    bad = write_corpus({"x.txt": b"\x00\x00", "y.bin": b"abc", "z.md": "   \n\t"})
    assert main(["audit", str(bad), "--out", str(tmp_path / "o2"), "--quiet"]) == 4
    data = json.loads((tmp_path / "o2" / "audit.json").read_text())
    counts = data["summary"]["inputs"]
    assert (counts["entries"], counts["skipped"], counts["empty"], counts["read"]) == (3, 2, 1, 0)
    assert counts["entries"] == counts["read"] + counts["skipped"] + counts["empty"]


def test_report_escapes_hostile_names_and_text(write_corpus, tmp_path):
    hostile = '<script>alert(1)</script><img src=x onerror="alert(2)">'
    root = write_corpus({"<b>bold</b>.md": hostile + " " + BASE, "two.md": hostile + " " + BASE})
    result = dedup.audit([str(root)])
    paths = result.write(str(tmp_path / "out"))
    with open(paths["report.html"], encoding="utf-8") as handle:
        html = handle.read()
    assert "<script>alert" not in html and "<b>bold</b>" not in html
    # Names reach the page script only inside the JSON block, with < and > escaped.
    assert "\\u003cb\\u003ebold\\u003c/b\\u003e.md" in html
    assert "Content-Security-Policy" in html and "default-src 'none'" in html
    assert "https://" not in html
    # The only URL is the SVG namespace name, which is never fetched.
    assert html.count("http://") == html.count("http://www.w3.org/2000/svg")
