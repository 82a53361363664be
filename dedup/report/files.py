"""Machine-readable outputs: audit.json, pairs.csv, clusters.csv, actions.csv, ledger.csv.

All are byte-identical for the same inputs and settings: fixed key and row order,
``\\n`` line ends, UTF-8, floats written by Python's shortest round-trip repr (JSON)
or with six decimals (CSV). Timings and the date go to run.json, which is the one
file that changes from run to run.

Writing is safe for what is already there:

- Each output is written to a new temporary file in the output folder (created without
  following links) and renamed over the old one (`os.replace`), so a link in the folder
  is replaced, never written through, and a failure leaves the previous output whole
  (`StagedFiles` renames all outputs only once all are written).
- A file named like one of our outputs is replaced only in a folder whose audit.json
  dedup wrote (`check_out_folder`); an output folder that is an input folder, or inside
  one, must hold nothing but our outputs.
- A CSV cell of text that starts with ``=``, ``+``, ``-``, ``@``, a tab or a carriage
  return gets a leading ``'``, so a spreadsheet shows it as text instead of running it as
  a formula (OWASP, CSV Injection: https://owasp.org/www-community/attacks/CSV_Injection).
  Numbers we write are never changed. audit.json holds every value as it is.
"""

from __future__ import annotations

import contextlib
import csv
import io
import json
import os
import re
import secrets
import stat
from collections.abc import Collection, Iterable, Iterator, Sequence
from typing import IO

__all__ = [
    "write_json",
    "write_csv",
    "csv_text",
    "PAIR_COLUMNS",
    "CLUSTER_COLUMNS",
    "ACTION_COLUMNS",
    "LEDGER_COLUMNS",
    "OUTPUT_NAMES",
    "OutputFolderError",
    "StagedFiles",
    "check_out_folder",
    "written_by_dedup",
    "safe_cell",
]

PAIR_COLUMNS = [
    "left",
    "right",
    "kind",
    "deciding_score",
    "jaccard",
    "containment_left_in_right",
    "containment_right_in_left",
    "cosine",
    "shared_shingles",
    "left_covered",
    "right_covered",
    "whole_text_jaccard",
    "templates_left_out",
]
CLUSTER_COLUMNS = [
    "cluster_id",
    "cluster_size",
    "document_id",
    "role",
    "keeper",
    "deciding_score",
    "jaccard_to_keeper",
    "containment_in_keeper",
    "keeper_containment",
    "cosine_to_keeper",
    "linked_through",
    "action",
    "stable_id",
]
ACTION_COLUMNS = ["document_id", "action", "in_favour_of", "cluster_id", "reason"]
LEDGER_COLUMNS = ["input", "record", "status", "reason", "format", "size", "encoding", "document_id"]


# Characters that make a spreadsheet read a cell as a formula (OWASP, CSV Injection).
_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def safe_cell(text: str) -> str:
    """``text`` with a ``'`` in front when a spreadsheet would take it for a formula.

    >>> safe_cell("=HYPERLINK(url).txt"), safe_cell("-1"), safe_cell("notes.txt")
    ("'=HYPERLINK(url).txt", "'-1", 'notes.txt')
    """
    return "'" + text if text.startswith(_FORMULA_START) else text


def _cell(value) -> str:
    # Numbers stay numbers (a negative one too): only text can smuggle in a formula.
    if value is None:
        return ""
    if isinstance(value, float):
        return f"{value:.6f}"
    if isinstance(value, str):
        return "'" + value if value.startswith(_FORMULA_START) else value
    return str(value)


# A lone surrogate (a text read from bytes that were not UTF-8 keeps them) cannot be
# written as UTF-8: it becomes U+FFFD in the CSV files (audit.json keeps it escaped).
_SURROGATE = re.compile("[\ud800-\udfff]")


def _write_rows(handle, rows: Iterable[dict], columns: list[str]) -> None:
    # With "\n" line ends the csv module leaves a field holding a carriage return
    # unquoted (before Python 3.13), and a reader would end the row there: such a row
    # (a file name may hold one) is written with every field quoted. Cost: one search
    # for "\r" per row.
    writer = csv.writer(handle, lineterminator="\n")
    quoted = csv.writer(handle, lineterminator="\n", quoting=csv.QUOTE_ALL)
    writer.writerow(columns)
    for row in rows:
        cells = [_cell(row.get(c)) for c in columns]
        joined = "".join(cells)
        if _SURROGATE.search(joined):
            cells = [_SURROGATE.sub("\ufffd", cell) for cell in cells]
        (quoted if "\r" in joined else writer).writerow(cells)


def csv_text(rows: Iterable[dict], columns: list[str]) -> str:
    """CSV with a header row, ``\\n`` line ends and minimal quoting."""
    buffer = io.StringIO()
    _write_rows(buffer, rows, columns)
    return buffer.getvalue()


def write_csv(path: str, rows: Iterable[dict], columns: list[str], staged: StagedFiles | None = None) -> None:
    """`csv_text` written row by row (rows may be a generator: nothing is held whole);
    atomically (see `StagedFiles`; with ``staged``, renamed into place when it commits)."""
    with _writing(path, "", staged) as handle:
        _write_rows(handle, rows, columns)


def write_json(
    path: str, data: dict, record_lists: Collection[str] = (), staged: StagedFiles | None = None
) -> None:
    """JSON with one-space indents; the lists named in ``record_lists`` (top-level keys)
    are written one record per line, streamed from any iterable.

    A record per line keeps a file of a million documents readable with line tools and
    lets it be written by the compiled encoder, record by record, without the whole
    text in memory. Written atomically, as `write_csv`.
    """
    with _writing(path, "\n", staged) as handle:
        handle.write("{")
        first = True
        for key, value in data.items():
            handle.write("\n " if first else ",\n ")
            first = False
            handle.write(json.dumps(key, ensure_ascii=False) + ": ")
            if key in record_lists:
                _write_records(handle, value)
            else:
                text = json.dumps(value, ensure_ascii=False, indent=1, allow_nan=False)
                handle.write(text.replace("\n", "\n "))
        handle.write("\n}\n" if not first else "}\n")


def _write_records(handle, records: Iterable) -> None:
    encode = json.JSONEncoder(ensure_ascii=False, allow_nan=False).encode
    empty = True
    for record in records:
        handle.write("[\n  " if empty else ",\n  ")
        empty = False
        handle.write(encode(record))
    handle.write("[]" if empty else "\n ]")


def cluster_rows(clusters: list[dict]) -> list[dict]:
    """One row per cluster member, for clusters.csv."""
    rows = []
    for cluster in clusters:
        for member in cluster["members"]:
            similarity = member["similarity_to_keeper"] or {}
            rows.append(
                {
                    "cluster_id": cluster["id"],
                    "cluster_size": cluster["size"],
                    "document_id": member["document_id"],
                    "role": member["role"],
                    "keeper": cluster["keeper"],
                    "deciding_score": member["deciding_score"],
                    "jaccard_to_keeper": similarity.get("jaccard"),
                    "containment_in_keeper": similarity.get("containment_in_keeper"),
                    "keeper_containment": similarity.get("keeper_containment"),
                    "cosine_to_keeper": similarity.get("cosine"),
                    "linked_through": member["linked_through"],
                    "action": member["action"],
                    "stable_id": cluster.get("stable_id"),
                }
            )
    return rows


def ensure_folder(path: str) -> None:
    os.makedirs(path, exist_ok=True)


# -- safe writing ---------------------------------------------------------------------------
# Every file an audit writes into its output folder (the last five are
# `dedup.report.migration.MIGRATION_FILES`, written out here to spare an import cycle; a
# test keeps them equal), and the work folder the command line puts there; a temporary
# file of ours is ".<name>.<random>.part".
OUTPUT_NAMES = (
    "audit.json",
    "pairs.csv",
    "clusters.csv",
    "actions.csv",
    "ledger.csv",
    "passages.csv",
    "run.json",
    "report.html",
    "redirects.csv",
    "redirects.json",
    "merge-worklist.csv",
    "keep.csv",
    "keep.txt",
)
WORK_FOLDER = ".dedup-work"
_PART = re.compile(r"^\.(?:" + "|".join(re.escape(n) for n in OUTPUT_NAMES) + r")\.[0-9a-f]{16}\.part$")
# The start of an audit.json we wrote (`dedup.result.AuditResult.to_dict`, written by `write_json`).
_OURS = re.compile(rb'^\{\s*"schema_version":\s*"[^"\\]{1,20}",\s*"tool":\s*\{\s*"name":\s*"dedup"')


class OutputFolderError(FileExistsError):
    """The output folder holds files dedup did not write, where it would write; the message says which."""


class StagedFiles:
    """Outputs written to temporary files beside their place, renamed into place together.

    `open` creates ``.<name>.<random>.part`` in the file's folder with ``O_EXCL`` and
    ``O_NOFOLLOW`` (never through a link, never over a file); `commit` flushes nothing
    more and renames each over its target with `os.replace`, which replaces a link
    itself rather than the file it points to; `discard` removes them. Use it as a context
    manager: it commits when the block ends normally and discards on an error, so a
    failed run leaves every previous output as it was. Cost: one rename per file.
    """

    def __init__(self) -> None:
        self._pending: list[tuple[str, str]] = []  # (temporary, target)

    @contextlib.contextmanager
    def open(self, path: str, newline: str) -> Iterator[IO[str]]:
        """A text file to write ``path``'s new content into (UTF-8)."""
        folder, name = os.path.split(path)
        temporary = os.path.join(folder, f".{name}.{secrets.token_hex(8)}.part")
        flags = (
            os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_NOFOLLOW", 0) | getattr(os, "O_CLOEXEC", 0)
        )
        fd = os.open(temporary, flags, 0o666)
        self._pending.append((temporary, path))
        with open(fd, "w", encoding="utf-8", newline=newline) as handle:
            yield handle
            handle.flush()
            os.fsync(handle.fileno())

    def commit(self) -> None:
        """Rename every file written into its place, in the order written."""
        while self._pending:
            temporary, target = self._pending.pop(0)
            os.replace(temporary, target)

    def discard(self) -> None:
        """Remove the files written and not committed."""
        for temporary, _ in self._pending:
            with contextlib.suppress(OSError):
                os.unlink(temporary)
        self._pending.clear()

    def __enter__(self) -> StagedFiles:
        return self

    def __exit__(self, kind, error, trace) -> None:
        if kind is None:
            self.commit()
        self.discard()


@contextlib.contextmanager
def _writing(path: str, newline: str, staged: StagedFiles | None) -> Iterator[IO[str]]:
    if staged is not None:
        with staged.open(path, newline) as handle:
            yield handle
        return
    with StagedFiles() as own, own.open(path, newline) as handle:
        yield handle


def written_by_dedup(folder: str) -> bool:
    """True when ``folder`` holds an audit.json that dedup wrote: a regular file (not a
    link) that starts with our ``schema_version`` and ``tool.name == "dedup"``.
    Cost: reads its first 512 bytes."""
    path = os.path.join(folder, "audit.json")
    try:
        fd = os.open(path, os.O_RDONLY | getattr(os, "O_NOFOLLOW", 0) | getattr(os, "O_NONBLOCK", 0))
    except OSError:
        return False
    with open(fd, "rb") as handle:
        return stat.S_ISREG(os.fstat(fd).st_mode) and _OURS.match(handle.read(512)) is not None


def _ours(name: str) -> bool:
    return name in OUTPUT_NAMES or name == WORK_FOLDER or _PART.match(name) is not None


def _within(path: str, folder: str) -> bool:
    return path == folder or path.startswith(folder if folder.endswith(os.sep) else folder + os.sep)


def check_out_folder(out: str, inputs: Sequence[str] = ()) -> None:
    """Raise `OutputFolderError` unless the outputs may be written into ``out``.

    Refused: an ``out`` that holds a file named like one of our outputs without an
    audit.json that dedup wrote (it would be replaced); and an ``out`` that is one of the
    ``inputs`` folders or inside one, unless it holds nothing but our outputs (the
    outputs are then left out of the reading, see `dedup.ingest.leaving_out`). A folder
    that does not exist yet is fine. Cost: one listing of ``out``.
    """
    try:
        names = sorted(os.listdir(out))
    except FileNotFoundError:
        return
    ours = written_by_dedup(out)
    clash = [n for n in names if n in OUTPUT_NAMES]
    if clash and not ours:
        raise OutputFolderError(
            f"--out {out} holds {clash[0]}, which dedup did not write (there is no audit.json of dedup "
            "beside it); choose another output folder: dedup never replaces a file it did not write"
        )
    real = os.path.realpath(out)
    for given in inputs:
        if given == "-" or not os.path.isdir(given) or not _within(real, os.path.realpath(given)):
            continue
        foreign = [n for n in names if not _ours(n)]
        if foreign:
            raise OutputFolderError(
                f"--out {out} is {'the' if real == os.path.realpath(given) else 'inside the'} input folder "
                f"{given} and holds {foreign[0]}, which is not an "
                "output of dedup; choose an output folder outside the inputs (or an empty one)"
            )
