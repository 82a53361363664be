"""An audit's tables as data frames: the rows and columns of its CSV files.

Notebooks and pipelines want tables, not lists of dicts. Each frame has the columns of
the CSV file of the same name (pairs.csv, clusters.csv, actions.csv, ledger.csv,
passages.csv), with numbers as numbers and missing values as nulls, so a script written
against the files works on the frames. The documents and actions frames also carry the
metadata columns of rows given in memory (a DataFrame's other columns).

A pandas DataFrame when pandas is installed, else a pyarrow Table; ``kind`` chooses.
Cost: one pass over the records; nothing is computed again.
"""

from __future__ import annotations

import importlib.util
from collections.abc import Iterable

from .report.files import ACTION_COLUMNS, CLUSTER_COLUMNS, LEDGER_COLUMNS, PAIR_COLUMNS, cluster_rows
from .report.records import PASSAGE_COLUMNS

__all__ = ["frame_of", "FRAMES", "DOCUMENT_COLUMNS"]

DOCUMENT_COLUMNS = ["id", "source", "format", "title", "bytes", "characters", "content_hash", "status"]
KINDS = ("pandas", "arrow")


def _default_kind() -> str:
    if importlib.util.find_spec("pandas") is not None:
        return "pandas"
    if importlib.util.find_spec("pyarrow") is not None:
        return "arrow"
    raise ImportError("frames need pandas or pyarrow: pip install pandas (or pyarrow)")


def frame_of(rows: Iterable[dict], columns: list[str], kind: str | None = None):
    """A table of ``rows`` with these ``columns`` (a missing key is a null)."""
    kind = kind or _default_kind()
    if kind not in KINDS:
        raise ValueError(f"kind must be one of {', '.join(KINDS)}, got {kind!r}")
    data = {c: [] for c in columns}
    for row in rows:
        for c in columns:
            data[c].append(row.get(c))
    if kind == "pandas":
        import pandas as pd

        return pd.DataFrame(data, columns=columns)
    import pyarrow as pa

    return pa.table(data) if columns else pa.table({})


def _with_metadata(rows: list[dict], key: str, metadata: dict[str, dict]) -> tuple[list[dict], list[str]]:
    """Rows with the metadata of their document (by ``key``) added; the metadata columns,
    in first-seen order, none of them shadowing a column of the rows."""
    if not metadata:
        return rows, []
    taken = set(rows[0]) if rows else set()
    extra: dict[str, None] = {}
    for values in metadata.values():
        extra.update((k, None) for k in values if k not in taken)
    out = [{**row, **{k: metadata.get(row[key], {}).get(k) for k in extra}} for row in rows]
    return out, list(extra)


def _documents(result) -> tuple[list[dict], list[str]]:
    rows, extra = _with_metadata(result.documents, "id", result.metadata)
    dated = ["date"] if any("date" in d for d in result.documents) else []
    return rows, DOCUMENT_COLUMNS + dated + extra


def _actions(result) -> tuple[list[dict], list[str]]:
    rows, extra = _with_metadata(result.actions, "document_id", result.metadata)
    return rows, ACTION_COLUMNS + extra


# name → the rows and columns of that frame, from an AuditResult.
FRAMES = {
    "pairs": lambda r: (r.pairs, PAIR_COLUMNS),
    "clusters": lambda r: (cluster_rows(r.clusters), CLUSTER_COLUMNS),
    "actions": _actions,
    "documents": _documents,
    "ledger": lambda r: ((e.to_dict() for e in r.ledger), LEDGER_COLUMNS),
    "passages": lambda r: (r.passages, PASSAGE_COLUMNS),
}
