"""Writing the outputs: formulas neutralised in every CSV, atomic replacement, no writing
through links, and no output folder that would replace what dedup did not write."""

from __future__ import annotations

import csv
import io
import json
import os
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from dedup.report import write_outputs
from dedup.report.files import (
    ACTION_COLUMNS,
    LEDGER_COLUMNS,
    OutputFolderError,
    StagedFiles,
    check_out_folder,
    csv_text,
    safe_cell,
    write_csv,
    write_json,
    written_by_dedup,
)

FORMULAS = ['=HYPERLINK("http://x.example","x").txt', "+1+2", "-2+3", "@SUM(A1)", "\tlead", "\rlead"]


@pytest.mark.parametrize("text", FORMULAS)
def test_a_cell_a_spreadsheet_would_run_gets_a_quote(text):
    assert safe_cell(text) == "'" + text
    row = csv_text([{"input": text, "size": 3}], LEDGER_COLUMNS).split("\n", 1)[1]
    assert next(csv.reader(io.StringIO(row)))[0] == "'" + text


def test_ordinary_cells_and_numbers_stay_as_they_are():
    assert [safe_cell(t) for t in ("notes.txt", "a=b", "", "'quoted")] == ["notes.txt", "a=b", "", "'quoted"]
    text = csv_text([{"input": "a.txt", "size": -3, "record": -0.25}], LEDGER_COLUMNS)
    cells = next(csv.DictReader(io.StringIO(text)))
    assert (cells["input"], cells["size"], cells["record"]) == ("a.txt", "-3", "-0.250000")
    # A carriage return inside a name is quoted, so the row stays one row.
    rows = list(csv.reader(io.StringIO(csv_text([{"input": "a\rb.txt"}, {"input": "c"}], LEDGER_COLUMNS))))
    assert [r[0] for r in rows] == ["input", "a\rb.txt", "c"]


def test_every_csv_the_audit_writes_is_neutralised(tmp_path, demo_result):
    name = '=HYPERLINK("http://x.example","x").txt'
    demo_result.ledger[0].input = name
    demo_result.actions[0]["document_id"] = name
    demo_result.pairs[0]["left"] = "-" + demo_result.pairs[0]["left"]
    paths = write_outputs(demo_result, str(tmp_path / "out"), report=False)
    for output in ("ledger.csv", "actions.csv", "pairs.csv", "clusters.csv", "passages.csv"):
        with open(paths[output], encoding="utf-8", newline="") as handle:
            for row in csv.reader(handle):
                assert not any(cell.startswith(("=", "+", "-", "@", "\t", "\r")) for cell in row), output
    assert "'=HYPERLINK" in Path(paths["ledger.csv"]).read_text(encoding="utf-8")
    # audit.json keeps the name as it is.
    assert json.loads(Path(paths["audit.json"]).read_text(encoding="utf-8"))["ledger"][0]["input"] == name


def test_a_link_in_the_output_folder_is_replaced_not_followed(tmp_path):
    precious = tmp_path / "src" / "precious.txt"
    precious.parent.mkdir()
    precious.write_text("the user's own file")
    out = tmp_path / "out"
    out.mkdir()
    (out / "ledger.csv").symlink_to(precious)
    write_csv(str(out / "ledger.csv"), [{"input": "a.txt"}], LEDGER_COLUMNS)
    assert precious.read_text() == "the user's own file"
    assert not (out / "ledger.csv").is_symlink()
    assert (out / "ledger.csv").read_text().startswith("input,record,status")


def test_a_failed_write_leaves_the_previous_outputs_whole(tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    write_json(str(out / "audit.json"), {"old": 1})
    write_csv(str(out / "actions.csv"), [{"document_id": "old"}], ACTION_COLUMNS)
    before = {p.name: p.read_bytes() for p in out.iterdir()}

    def rows():
        yield {"document_id": "new"}
        raise RuntimeError("the disk filled up")

    with pytest.raises(RuntimeError), StagedFiles() as staged:
        write_json(str(out / "audit.json"), {"new": 1}, staged=staged)
        write_csv(str(out / "actions.csv"), rows(), ACTION_COLUMNS, staged)
    assert {p.name: p.read_bytes() for p in out.iterdir()} == before  # no temporary file left either


def test_new_outputs_replace_old_ones_with_the_folder_s_own_permissions(tmp_path):
    path = tmp_path / "run.json"
    write_json(str(path), {"n": 1})
    write_json(str(path), {"n": 2})
    assert json.loads(path.read_text()) == {"n": 2}
    umask = os.umask(0)
    os.umask(umask)
    assert path.stat().st_mode & 0o777 == 0o666 & ~umask
    assert os.listdir(tmp_path) == ["run.json"]


# -- the output folder --------------------------------------------------------------------------
def _our_outputs(folder, demo_result) -> None:
    write_outputs(demo_result, str(folder), report=False)


def test_a_folder_with_an_output_name_dedup_did_not_write_is_refused(tmp_path, demo_result):
    out = tmp_path / "mine"
    out.mkdir()
    (out / "report.html").write_text("my own report")
    with pytest.raises(OutputFolderError, match="holds report.html, which dedup did not write"):
        check_out_folder(str(out))
    with pytest.raises(OutputFolderError):
        write_outputs(demo_result, str(out))
    assert (out / "report.html").read_text() == "my own report"
    assert sorted(os.listdir(out)) == ["report.html"]


def test_our_own_outputs_are_recognised_and_replaced(tmp_path, demo_result):
    out = tmp_path / "out"
    _our_outputs(out, demo_result)
    assert written_by_dedup(str(out))
    check_out_folder(str(out))
    _our_outputs(out, demo_result)  # again, over the first
    # An audit.json that only claims to be ours through a link is not ours.
    (tmp_path / "fake.json").write_bytes((out / "audit.json").read_bytes())
    os.remove(out / "audit.json")
    os.symlink(tmp_path / "fake.json", out / "audit.json")
    assert not written_by_dedup(str(out))


def test_an_output_folder_inside_an_input_folder_must_hold_only_our_outputs(tmp_path, demo_result):
    src = tmp_path / "src"
    (src / "out").mkdir(parents=True)
    (src / "doc.txt").write_text("a document")
    check_out_folder(str(src / "out"), [str(src)])  # empty: fine
    _our_outputs(src / "out", demo_result)
    check_out_folder(str(src / "out"), [str(src)])  # only our outputs: fine
    (src / "out" / "notes.txt").write_text("the user's notes")
    with pytest.raises(OutputFolderError, match="is inside the input folder .* holds notes.txt"):
        check_out_folder(str(src / "out"), [str(src)])
    with pytest.raises(OutputFolderError, match="is the input folder .* holds doc.txt"):
        check_out_folder(str(src), [str(src)])
    check_out_folder(str(tmp_path / "elsewhere"), [str(src)])  # not there yet: fine


def test_every_file_the_audit_writes_counts_as_ours(tmp_path, demo_result):
    from dedup.report.files import OUTPUT_NAMES
    from dedup.report.migration import MIGRATION_FILES

    assert set(MIGRATION_FILES) <= set(OUTPUT_NAMES)
    out = tmp_path / "out"
    write_outputs(demo_result, str(out))
    assert sorted(os.listdir(out)) == sorted(OUTPUT_NAMES)


def test_a_lone_surrogate_in_a_text_cell_is_written_as_a_replacement_character(tmp_path):
    """Texts decoded with surrogatepass keep lone surrogates; UTF-8 CSV files cannot hold them."""
    from dedup.report.files import write_csv

    path = tmp_path / "t.csv"
    write_csv(str(path), [{"a": "x\ud800y", "b": 1}], ["a", "b"])
    assert path.read_text(encoding="utf-8").splitlines() == ["a,b", "x\ufffdy,1"]


# -- every row written by the rule, cell by cell -------------------------------------------

_CELL_VALUES = st.one_of(
    st.none(),
    st.booleans(),
    st.integers(-(10**6), 10**6),
    st.floats(allow_nan=False, allow_infinity=False, width=32),
    st.text(alphabet=st.sampled_from(list("ab,=+-@\t\r\n\"' ") + ["\ud800", "é"]), max_size=6),
)


def _reference_csv(rows: list[dict], columns: list[str]) -> str:
    """The CSV rule written out one cell at a time with the csv module: None empty, floats
    with six decimals, a text a spreadsheet would run prefixed with ', lone surrogates as
    U+FFFD, and a row holding a carriage return quoted in full."""

    def cell(value) -> str:
        if value is None:
            return ""
        if isinstance(value, float):
            return f"{value:.6f}"
        if isinstance(value, str):
            value = "".join("\ufffd" if "\ud800" <= ch <= "\udfff" else ch for ch in value)
            return "'" + value if value[:1] in ("=", "+", "-", "@", "\t", "\r") else value
        return str(value)

    out = io.StringIO()
    csv.writer(out, lineterminator="\n").writerow(columns)
    for row in rows:
        cells = [cell(row.get(c)) for c in columns]
        quoting = csv.QUOTE_ALL if any("\r" in c for c in cells) else csv.QUOTE_MINIMAL
        csv.writer(out, lineterminator="\n", quoting=quoting).writerow(cells)
    return out.getvalue()


@settings(max_examples=200, deadline=None)
@given(st.lists(st.fixed_dictionaries({}, optional={c: _CELL_VALUES for c in "xyz"}), max_size=12))
def test_csv_rows_equal_the_rule_applied_cell_by_cell(rows):
    assert csv_text(rows, ["x", "y", "z"]) == _reference_csv(rows, ["x", "y", "z"])
