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


def csv_text(rows: list[dict], columns: list[str]) -> str:
    """CSV with a header row, ``\\n`` line ends and minimal quoting."""
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(columns)
    for row in rows:
        writer.writerow([_cell(row.get(c)) for c in columns])
    return buffer.getvalue()


def write_csv(path: str, rows: list[dict], columns: list[str]) -> None:
    with open(path, "w", encoding="utf-8", newline="") as handle:
        handle.write(csv_text(rows, columns))


def write_json(path: str, data: dict) -> None:
    with open(path, "w", encoding="utf-8", newline="\n") as handle:
        json.dump(data, handle, ensure_ascii=False, indent=1, allow_nan=False)
        handle.write("\n")


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
