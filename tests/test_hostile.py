"""Hostile inputs and outputs, end to end through the command line: each test is a probe that
once broke a promise users rely on (no stalled run, no source file changed, no crash, no
formula run by a spreadsheet, no terminal taken over), and a fuzz test over file names and
record values."""

from __future__ import annotations

import csv
import hashlib
import io
import json
import os
import tempfile
import zipfile
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from dedup.cli import main
from dedup.ingest.filters import clean_name

WORDS = (
    "the committee reviewed the annual leave policy for staff of the cooperative and agreed "
    "that requests must reach the office two weeks before the first day of leave"
)


def _audit(src, out, *options: str) -> int:
    return main(["audit", str(src), "--out", str(out), "--quiet", *options])


def _ledger(out) -> list[dict]:
    return json.loads((Path(out) / "audit.json").read_text(encoding="utf-8"))["ledger"]


def _tree_digest(folder) -> dict[str, str]:
    """Every file under ``folder`` (links as their target text) with a hash of its bytes."""
    digest = {}
    for dirpath, _, names in os.walk(folder):
        for name in names:
            path = os.path.join(dirpath, name)
            if os.path.islink(path):
                digest[path] = "link to " + os.readlink(path)
            else:
                with open(path, "rb") as handle:
                    digest[path] = hashlib.sha256(handle.read()).hexdigest()
    return digest


# -- 1. a page of unclosed tags ----------------------------------------------------------------------
def test_a_page_of_unclosed_tags_does_not_stall_the_audit(write_corpus, tmp_path):
    src = write_corpus({"probe.html": "<a " * 33334, "a.txt": WORDS, "b.txt": WORDS})
    assert _audit(src, tmp_path / "out") == 0  # the linear time itself: tests/ingest/test_hostile_inputs.py
    status = {e["input"]: e["status"] for e in _ledger(tmp_path / "out")}
    assert status == {"a.txt": "read", "b.txt": "read", "probe.html": "empty"}


# -- 2. --out and the user's own files ----------------------------------------------------------------
def test_an_input_folder_with_the_user_s_files_is_refused_as_out(write_corpus, capsys):
    src = write_corpus(
        {"report.html": "<p>my report</p>", "audit.json": "{}", "ledger.csv": "a,b\n", "n.txt": WORDS}
    )
    before = _tree_digest(src)
    assert _audit(src, src) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "dedup did not write" in err
    assert _tree_digest(src) == before


def test_out_inside_an_input_folder_holds_only_our_outputs_and_is_not_read(write_corpus, capsys):
    src = write_corpus({"a.txt": WORDS, "b.txt": WORDS + " and more"})
    out = src / "out"
    for _ in range(2):  # the second run finds the first one's outputs inside the input folder
        assert _audit(src, out, "--include-hidden") == 0
    ledger = _ledger(out)
    assert [(e["input"], e["status"], e["reason"]) for e in ledger if e["input"].startswith("out")] == [
        ("out", "skipped", "output folder of this audit (--out): not read")
    ]
    (out / "mine.txt").write_text("the user's own notes")
    assert _audit(src, out) == 2
    assert "is inside the input folder" in capsys.readouterr().err


def test_a_work_folder_inside_the_inputs_is_not_read(write_corpus, tmp_path):
    src = write_corpus({"a.txt": WORDS})
    assert _audit(src, tmp_path / "out", "--work-dir", str(src / "work"), "--keep-work") == 0
    assert _audit(src, tmp_path / "out", "--work-dir", str(src / "work")) == 0
    reasons = {e["input"]: e["reason"] for e in _ledger(tmp_path / "out")}
    assert reasons["work"] == "work folder of this audit: not read"


def test_a_link_already_inside_out_is_replaced_not_followed(write_corpus, tmp_path):
    src = write_corpus({"a.txt": WORDS, "precious.txt": "the user's own file, not to be overwritten"})
    out = tmp_path / "out"
    assert _audit(src, out) == 0
    for name in ("report.html", "ledger.csv"):
        os.remove(out / name)
        os.symlink(src / "precious.txt", out / name)  # out/report.html -> ../src/precious.txt
    before = _tree_digest(src)
    assert _audit(src, out) == 0
    assert _tree_digest(src) == before
    assert not any(os.path.islink(out / name) for name in ("report.html", "ledger.csv"))
    # An audit.json that is a link is no proof that dedup wrote the folder: refused, nothing written.
    (tmp_path / "copy.json").write_bytes((out / "audit.json").read_bytes())
    os.remove(out / "audit.json")
    os.symlink(tmp_path / "copy.json", out / "audit.json")
    assert _audit(src, out) == 2
    assert os.path.islink(out / "audit.json")


# -- 3. links out of the tree ------------------------------------------------------------------------
def _tree_with_an_outside_link(tmp_path) -> Path:
    outside = tmp_path / "system.txt"
    outside.write_text("a file outside the audited folder " + WORDS)
    src = tmp_path / "src"
    src.mkdir()
    (src / "a.txt").write_text(WORDS)
    (src / "link.txt").symlink_to(outside)
    return src


def test_a_link_out_of_the_audited_folder_is_recorded_not_read(tmp_path):
    src = _tree_with_an_outside_link(tmp_path)
    assert _audit(src, tmp_path / "out") == 0
    entry = next(e for e in _ledger(tmp_path / "out") if e["input"] == "link.txt")
    assert (entry["status"], entry["reason"]) == (
        "skipped",
        "link to a file outside the audited folders (read it with --follow-links)",
    )


def test_follow_links_reads_it(tmp_path):
    # Needs the engine to pass `follow_links` on to `iter_documents` (see the report).
    src = _tree_with_an_outside_link(tmp_path)
    assert _audit(src, tmp_path / "out", "--follow-links") == 0
    assert {e["input"]: e["status"] for e in _ledger(tmp_path / "out")}["link.txt"] == "read"


def test_index_build_follows_links_when_asked(tmp_path, capsys):
    src = _tree_with_an_outside_link(tmp_path)
    index = str(tmp_path / "x.index")
    assert main(["index", "build", str(src), "--index", index, "--quiet"]) == 0
    assert main(["index", "build", str(src), "--index", index + "2", "--quiet", "--follow-links"]) == 0
    counts = []
    for path in (index, index + "2"):
        assert main(["index", "info", "--index", path, "--json"]) == 0
        counts.append(json.loads(capsys.readouterr().out)["documents"]["present"])
    assert counts == [1, 2]


# -- 4. content that crashed the run -----------------------------------------------------------------
def test_a_date_that_is_nan_is_an_invalid_record_not_a_crash(write_corpus, tmp_path):
    lines = [
        {"id": "a", "text": WORDS, "updated": "2024-01-02"},
        {"id": "b", "text": WORDS + " again", "updated": float("nan")},
        {"id": "c", "text": WORDS + " once more", "updated": float("inf")},
    ]
    src = write_corpus({"r.jsonl": "\n".join(json.dumps(line) for line in lines) + "\n"})
    code = _audit(src, tmp_path / "out", "--id-field", "id", "--date-field", "updated", "--keeper", "newest")
    assert code == 4  # 2 of 3 records not read: more than --max-skipped-share; outputs written all the same

    def strict(name):
        raise ValueError(f"{name} in audit.json")

    data = json.loads((tmp_path / "out" / "audit.json").read_text(), parse_constant=strict)
    reasons = {e["record"]: e["reason"] for e in data["ledger"]}
    assert reasons["line 2"] == "line 2: not valid JSON (NaN is not a JSON number)"
    assert reasons["line 3"] == "line 3: not valid JSON (Infinity is not a JSON number)"


@pytest.mark.parametrize("mark", ["\u0000audit-data\u0000", "<dedup-audit-data/>", "<dedup-audit-blobs/>"])
def test_a_text_holding_the_report_s_data_mark_gives_a_whole_report(write_corpus, tmp_path, mark):
    # A line shared by many texts is boilerplate, shown in report.html: here the marks that
    # html.py splits its page on (the first one made report.html 0 bytes and exited 3).
    lines = [
        json.dumps({"id": f"d{i}", "text": f"{WORDS} number {i} " + "x" * i + f"\n{mark}\nend {i}"})
        for i in range(8)
    ]
    src = write_corpus({"r.jsonl": "\n".join(lines) + "\n"})
    assert _audit(src, tmp_path / "out", "--id-field", "id") == 0
    page = (tmp_path / "out" / "report.html").read_text(encoding="utf-8")
    assert page.rstrip().endswith("</html>") and 'id="audit-data"' in page


# -- 5. formulas in CSV cells ------------------------------------------------------------------------
def test_a_file_named_like_a_formula_is_text_in_every_csv(write_corpus, tmp_path):
    name = '=HYPERLINK("http:\\\\x.example","x").txt'
    src = write_corpus({"k.txt": WORDS, name: WORDS})
    assert _audit(src, tmp_path / "out", "--keeper", "shortest-path") == 0
    for output in ("ledger.csv", "actions.csv"):
        with open(tmp_path / "out" / output, encoding="utf-8", newline="") as handle:
            cells = [cell for row in csv.reader(handle) for cell in row]
        assert "'" + clean_name(name) in cells, output
        assert not any(cell.startswith(("=", "+", "-", "@")) for cell in cells), output


# -- 6. terminal escapes -----------------------------------------------------------------------------
def test_paths_printed_by_the_audit_are_escaped(write_corpus, tmp_path, capsys):
    src = write_corpus({"a.txt": WORDS, "b.txt": WORDS})
    out = tmp_path / "out\x1b]0;owned\x07\x9b2J"
    assert main(["audit", str(src), "--out", str(out)]) == 0
    printed = capsys.readouterr().out
    assert "\x1b" not in printed and "\x07" not in printed and "\x9b" not in printed
    assert "out\\x1b]0;owned\\x07\\x9b2J" in printed


def test_ids_and_titles_printed_by_similar_are_escaped(tmp_path, capsys):
    src = tmp_path / "src"
    src.mkdir()
    (src / "evil\x1b]0;owned\x07.md").write_text("# Title \x1b[2J\u202eexe.txt\n\n" + WORDS)
    (src / "b.txt").write_text("something else entirely about gardens and rain")
    index = str(tmp_path / "x.index")
    assert main(["index", "build", str(src), "--index", index, "--quiet"]) == 0
    capsys.readouterr()
    for json_output in ((), ("--json",)):
        assert main(["similar", WORDS, "--index", index, *json_output]) == 0
        printed = capsys.readouterr().out
        assert not any(c in printed for c in "\x1b\x07\u202e"), json_output
    assert "evil\\u001b]0;owned\\u0007.md" in printed  # JSON: still valid, escaped by the encoder


# -- 7. archives -------------------------------------------------------------------------------------
def test_an_archive_of_too_many_empty_members_is_refused_by_default(write_corpus, tmp_path):
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w") as archive:
        for i in range(100_001):
            archive.writestr(f"{i}.txt", b"")
    src = write_corpus({"bomb.zip": buffer.getvalue(), "a.txt": WORDS})
    assert _audit(src, tmp_path / "out") == 0
    ledger = _ledger(tmp_path / "out")
    assert [(e["input"], e["status"]) for e in ledger] == [("a.txt", "read"), ("bomb.zip", "refused")]
    assert "it holds more than 100,000 members" in ledger[1]["reason"]


def test_max_archive_members_is_taken_from_the_command_line(write_corpus, tmp_path):
    # Needs the engine to pass `max_archive_members` on to `iter_documents` (see the report).
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w") as archive:
        for i in range(11):
            archive.writestr(f"{i}.txt", WORDS + str(i))
    src = write_corpus({"many.zip": buffer.getvalue()})
    assert _audit(src, tmp_path / "out", "--max-archive-members", "10") == 4  # nothing read
    assert [e["status"] for e in _ledger(tmp_path / "out")] == ["refused"]


# -- 8. fuzz: file names and record values ------------------------------------------------------------
_TEXT_NAME = st.text(
    alphabet=st.characters(blacklist_categories=("Cs",), blacklist_characters="/\x00"),
    min_size=1,
    max_size=30,
).map(os.fsencode)
_BYTE_NAME = st.binary(min_size=1, max_size=30).filter(lambda b: b"/" not in b and b"\x00" not in b)
_NAME = st.one_of(_TEXT_NAME, _BYTE_NAME).filter(lambda b: b not in (b".", b"..") and len(b) <= 200)
_SUFFIX = st.sampled_from([b".txt", b".md", b".html", b".jsonl", b".json", b".csv", b""])
_SCALAR = st.one_of(
    st.none(),
    st.booleans(),
    st.integers(min_value=-(10**30), max_value=10**30),
    st.floats(allow_nan=True, allow_infinity=True),
    st.text(max_size=40),
)
_VALUE = st.recursive(
    _SCALAR,
    lambda inner: st.lists(inner, max_size=3) | st.dictionaries(st.text(max_size=5), inner, max_size=3),
    max_leaves=6,
)
_RECORD = st.fixed_dictionaries(
    {"text": st.one_of(st.text(max_size=80), _VALUE), "date": _VALUE, "id": _VALUE}
)
_LINE = st.one_of(_RECORD.map(lambda r: json.dumps(r, allow_nan=True)), st.text(max_size=40))


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    files=st.lists(st.tuples(_NAME, _SUFFIX), min_size=1, max_size=5, unique_by=lambda f: f[0] + f[1]),
    lines=st.lists(_LINE, max_size=6),
)
def test_any_names_and_record_values_are_audited_without_a_crash_or_a_change(files, lines):
    with tempfile.TemporaryDirectory() as tmp:
        src = os.path.join(os.fsencode(tmp), b"src")
        os.mkdir(src)
        expected = set()
        for n, (name, suffix) in enumerate(files):
            path = os.path.join(src, name + suffix)
            if suffix in (b".jsonl", b".json", b".csv"):
                content = "\n".join(lines).encode("utf-8", "surrogatepass")
            else:
                content = f"{WORDS} {n} {lines[:1]}".encode("utf-8", "surrogatepass")
            with open(path, "wb") as handle:
                handle.write(content)
            expected.add(clean_name(os.fsdecode(name + suffix)))
        before = _tree_digest(src)
        out = os.path.join(tmp, "out")
        code = main(
            [
                "audit",
                os.fsdecode(src),
                "--out",
                out,
                "--quiet",
                "--id-field",
                "id",
                "--date-field",
                "date",
                "--keeper",
                "newest",
            ]
        )
        assert code in (0, 4)  # 4: nothing, or too little, could be read
        assert _tree_digest(src) == before
        assert expected <= {e["input"] for e in _ledger(out)}
