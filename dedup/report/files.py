"""Machine-readable outputs: audit.json, pairs.csv, clusters.csv, actions.csv, ledger.csv.

All are byte-identical for the same inputs and settings: fixed key and row order,
``\\n`` line ends, UTF-8, floats written by Python's shortest round-trip repr (JSON)
or with six decimals (CSV). Timings and the date go to run.json, which is the one
file that changes from run to run.
"""

from __future__ import annotations

import csv
import io
import json
import os
from collections.abc import Collection, Iterable

__all__ = [
    "write_json",
    "write_csv",
    "csv_text",
    "PAIR_COLUMNS",
    "CLUSTER_COLUMNS",
    "ACTION_COLUMNS",
    "LEDGER_COLUMNS",
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
]
ACTION_COLUMNS = ["document_id", "action", "in_favour_of", "cluster_id", "reason"]
LEDGER_COLUMNS = ["input", "record", "status", "reason", "format", "size", "encoding", "document_id"]


def _cell(value) -> str:
    if value is None:
        return ""
    if isinstance(value, float):
        return f"{value:.6f}"
    return str(value)


def _write_rows(handle, rows: Iterable[dict], columns: list[str]) -> None:
    writer = csv.writer(handle, lineterminator="\n")
    writer.writerow(columns)
    writer.writerows([_cell(row.get(c)) for c in columns] for row in rows)


def csv_text(rows: Iterable[dict], columns: list[str]) -> str:
    """CSV with a header row, ``\\n`` line ends and minimal quoting."""
    buffer = io.StringIO()
    _write_rows(buffer, rows, columns)
    return buffer.getvalue()


def write_csv(path: str, rows: Iterable[dict], columns: list[str]) -> None:
    """`csv_text` written row by row (rows may be a generator: nothing is held whole)."""
    with open(path, "w", encoding="utf-8", newline="") as handle:
        _write_rows(handle, rows, columns)


def write_json(path: str, data: dict, record_lists: Collection[str] = ()) -> None:
    """JSON with one-space indents; the lists named in ``record_lists`` (top-level keys)
    are written one record per line, streamed from any iterable.

    A record per line keeps a file of a million documents readable with line tools and
    lets it be written by the compiled encoder, record by record, without the whole
    text in memory.
    """
    with open(path, "w", encoding="utf-8", newline="\n") as handle:
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
                }
            )
    return rows


def ensure_folder(path: str) -> None:
    os.makedirs(path, exist_ok=True)
