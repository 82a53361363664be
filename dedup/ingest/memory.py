"""Documents given in memory: ``(id, text)`` pairs, dicts, or the rows of a table.

A notebook or a data pipeline has its texts already: a list, a pandas DataFrame, a
pyarrow Table. `Records` carries them to the engines in place of paths; they are read as
the records of a record file are (`dedup.ingest.records`): one ledger entry per row, a
row that cannot be a document skipped with its reason, the other columns kept as the
document's metadata (for ``--date-field`` and the frames of the result), and the same
text limits and cleaning as any file.
"""

from __future__ import annotations

import itertools
import math
import os
from collections.abc import Callable, Iterable, Iterator, Mapping, Sequence
from typing import Any

from .document import Item, RawDocument
from .ledger import LedgerEntry
from .options import ReadOptions
from .readers import _finish
from .records import _metadata
from .walk import InputError, iter_documents

__all__ = ["Records", "as_inputs", "documents_of", "input_names", "is_table", "RECORD_FORMAT"]

# The format name of a document given in memory (ledger and documents).
RECORD_FORMAT = "record"
# Documents prepared (normalized) together.
_BATCH = 1024


class Records:
    """Rows given in memory, each a mapping with an id and a text (other keys: metadata).

    Parameters
    ----------
    rows : iterable of mapping
        Read once, lazily, when the audit reads its inputs.
    label : str
        What the rows are, for ``inputs`` in ``audit.json`` (e.g. ``"DataFrame: 3 rows"``).
    id_col, text_col : str
        The keys of the id and of the text in each row.
    columns : sequence of str, optional
        The table's columns, when known (the frames of the result carry them).
    """

    def __init__(
        self,
        rows: Iterable[Mapping],
        label: str,
        id_col: str = "id",
        text_col: str = "text",
        columns: Sequence[str] | None = None,
    ) -> None:
        self.rows, self.label = rows, label
        self.id_col, self.text_col = id_col, text_col
        self.columns = list(columns) if columns is not None else None
        # Document id → its metadata, filled as the rows are read.
        self.metadata: dict[str, dict] = {}

    def __repr__(self) -> str:
        return f"Records({self.label!r})"

    def documents(
        self, ledger: list[LedgerEntry], opts: ReadOptions, prepare: Callable | None = None
    ) -> Iterator[RawDocument]:
        """The documents of the rows, one ledger entry appended per row (before its document
        is yielded); ``prepare`` runs on each batch of documents as files' documents do.
        Cost: one pass over the rows."""
        seen: set[str] = set()
        rows = (self._outcome(number, row, opts, seen) for number, row in enumerate(self.rows, 1))
        any_row = False
        while batch := list(itertools.islice(rows, _BATCH)):
            any_row = True
            docs = [doc for doc, _ in batch if doc is not None]
            if prepare is not None and docs:
                prepare(docs)
            for doc, entry in batch:
                ledger.append(entry)
                if doc is not None:
                    if doc.metadata:
                        self.metadata[doc.id] = dict(doc.metadata)
                    yield doc
        if not any_row:
            ledger.append(LedgerEntry(self.label, "empty", "no rows", RECORD_FORMAT))

    def _outcome(
        self, number: int, row: Any, opts: ReadOptions, seen: set[str]
    ) -> tuple[RawDocument | None, LedgerEntry]:
        """One row as a document and its entry, or None and the entry saying why not."""
        label = f"row {number}"
        if not isinstance(row, Mapping):
            reason = f"{label}: not an (id, text) pair or a mapping but {_kind(row)}"
            return None, LedgerEntry(label, "skipped", reason, RECORD_FORMAT, record=label)
        doc_id, problem = _id_of(row.get(self.id_col), self.id_col)
        text, text_problem = _text_of(row.get(self.text_col), self.text_col)
        problem = problem or text_problem
        if not problem and doc_id in seen:
            problem = f"id {doc_id!r} repeats an earlier row"
        if problem:
            return None, LedgerEntry(
                doc_id or label, "skipped", f"{label}: {problem}", RECORD_FORMAT, record=label
            )
        seen.add(doc_id)
        item = Item(doc_id, doc_id, RECORD_FORMAT, len(text.encode("utf-8", "surrogatepass")))
        title = row.get("title")
        doc, entry = item.document(
            text,
            title=title if isinstance(title, str) else "",
            record=label,
            metadata=_metadata(dict(row), (self.id_col, self.text_col)),
        )
        return _finish(doc, entry, opts)


def _kind(value: object) -> str:
    return type(value).__name__


def _missing(value: object) -> bool:
    return value is None or (isinstance(value, float) and math.isnan(value))


def _id_of(value: object, column: str) -> tuple[str, str]:
    """``(id, problem)``: a row's id as text (numbers as their plain spelling)."""
    if _missing(value):
        return "", f"no value in id column {column!r}"
    if isinstance(value, bool) or not isinstance(value, (str, int, float)):
        return "", f"id in column {column!r} is {_kind(value)}, not text or a number"
    text = value if isinstance(value, str) else (str(int(value)) if float(value).is_integer() else str(value))
    return (text, "") if text.strip() else ("", f"empty id in column {column!r}")


def _text_of(value: object, column: str) -> tuple[str, str]:
    """``(text, problem)``: a row's text (bytes as UTF-8, replaced where invalid)."""
    if _missing(value):
        return "", f"no value in text column {column!r}"
    if isinstance(value, (bytes, bytearray)):
        return bytes(value).decode("utf-8", "replace"), ""
    if not isinstance(value, str):
        return "", f"text in column {column!r} is {_kind(value)}, not text"
    return value, ""


# -- what the user gave ------------------------------------------------------------------
def is_table(data: object) -> bool:
    """Whether ``data`` is rows to read as a whole: a pandas DataFrame, a pyarrow Table or `Records`."""
    return isinstance(data, Records) or _is_pandas(data) or _is_arrow(data)


def _is_pandas(data: object) -> bool:
    return type(data).__module__.split(".")[0] == "pandas" and hasattr(data, "columns")


def _is_arrow(data: object) -> bool:
    return type(data).__module__.split(".")[0] == "pyarrow" and hasattr(data, "to_batches")


def _arrow_rows(table) -> Iterator[dict]:
    for batch in table.to_batches():
        yield from batch.to_pylist()


def _table_records(data, id_col: str, text_col: str) -> Records:
    """A pandas DataFrame or pyarrow Table; a DataFrame without ``id_col`` gives its index."""
    columns = [str(c) for c in data.columns] if _is_pandas(data) else list(data.column_names)
    if text_col not in columns:
        raise KeyError(f"no column {text_col!r} for the text; the columns are {columns} (give text_col=…)")
    kind = type(data).__name__
    if _is_pandas(data):
        frame = data if id_col in columns else data.rename_axis(id_col).reset_index()
        rows: Iterable[dict] = _frame_rows(frame)
        columns = [str(c) for c in frame.columns]
    else:
        if id_col not in columns:
            raise KeyError(f"no column {id_col!r} for the ids; the columns are {columns} (give id_col=…)")
        rows = _arrow_rows(data)
    return Records(rows, f"{kind}: {len(data):,} rows", id_col, text_col, columns)


def _frame_rows(frame) -> Iterator[dict]:
    names = [str(c) for c in frame.columns]
    for values in frame.itertuples(index=False, name=None):
        yield dict(zip(names, values))


def _pairs_or_dicts(data: Iterable, id_col: str, text_col: str) -> Records:
    """``(id, text)`` pairs or mappings, told apart by each item."""

    def rows() -> Iterator[object]:
        for item in data:
            if isinstance(item, tuple) and len(item) == 2:
                yield {id_col: item[0], text_col: item[1]}
            else:
                yield item

    return Records(rows(), "records given in Python", id_col, text_col)


def as_inputs(data: Any, *, id_col: str = "id", text_col: str = "text") -> list[str] | Records:
    """What `dedup.audit` was given, as paths or as `Records`.

    A str or path-like is one path; a sequence of them, paths; a pandas DataFrame or a
    pyarrow Table, its rows (``id_col`` / ``text_col``); any other iterable, its items:
    ``(id, text)`` pairs or mappings with ``id_col`` and ``text_col`` keys.

    >>> as_inputs("docs")
    ['docs']
    >>> as_inputs([("a", "some text")]).label
    'records given in Python'
    """
    if isinstance(data, (str, os.PathLike)):
        return [os.fspath(data)]
    if isinstance(data, Records):
        return data
    if _is_pandas(data) or _is_arrow(data):
        return _table_records(data, id_col, text_col)
    if isinstance(data, (bytes, bytearray, Mapping)):
        raise TypeError(f"cannot audit a {_kind(data)}: give paths, (id, text) pairs, dicts or a table")
    items = list(data) if isinstance(data, Sequence) else None
    if items is not None and all(isinstance(p, (str, os.PathLike)) for p in items):
        paths = [os.fspath(p) for p in items]
        _not_texts(paths)
        return paths
    return _pairs_or_dicts(items if items is not None else data, id_col, text_col)


def _not_texts(paths: list[str]) -> None:
    """A missing "path" with white space in it is most likely a text given without an id."""
    for path in paths:
        if any(c.isspace() for c in path) and "://" not in path and not os.path.exists(path):
            raise InputError(
                f"no such file or folder: {path[:80]!r}; to audit texts held in memory, "
                "give (id, text) pairs, dicts or a table"
            )


def documents_of(
    inputs: Sequence[str] | Records, *, ledger: list[LedgerEntry], **keywords
) -> Iterator[RawDocument]:
    """The documents of paths (`iter_documents`, with its keywords) or of `Records`."""
    if not isinstance(inputs, Records):
        return iter_documents(inputs, ledger=ledger, **keywords)
    prepare = keywords.pop("prepare", None)
    for name in ("workers", "stdin", "unchanged"):
        keywords.pop(name, None)
    return inputs.documents(ledger, _options(keywords), prepare)


def _options(keywords: dict) -> ReadOptions:
    """The reading options that apply to rows (the text limit); the others concern files."""
    if "max_text_chars" in keywords:
        return ReadOptions(max_text_chars=keywords["max_text_chars"])
    return ReadOptions()


def input_names(inputs: Sequence[str] | Records) -> list[str]:
    """The inputs as ``audit.json`` lists them: the paths as given, or what the rows are."""
    return [inputs.label] if isinstance(inputs, Records) else list(inputs)
