"""Parquet outputs: pairs, clusters, actions and ledger, for any size.

`write_parquet` writes the same rows as ``pairs.csv``, ``clusters.csv``, ``actions.csv``
and ``ledger.csv`` (the same columns, in the same order) as Parquet files, from an
`AuditResult` (streamed in row groups by pyarrow: memory holds one group) or from
DataFrames (written by Spark, each a folder of part files, whatever their size). Types
are fixed per column (scores ``double``, counts ``long``, the rest ``string``), so two
audits' files read alike.
"""

from __future__ import annotations

import os
from collections.abc import Iterable, Iterator, Mapping

import pyarrow as pa

from ...report.files import ACTION_COLUMNS, CLUSTER_COLUMNS, LEDGER_COLUMNS, PAIR_COLUMNS, cluster_rows

__all__ = ["write_parquet", "OUTPUTS", "schema_of"]

# Output name → its columns (those of the CSV export of the same name).
OUTPUTS = {
    "pairs": PAIR_COLUMNS,
    "clusters": CLUSTER_COLUMNS,
    "actions": ACTION_COLUMNS,
    "ledger": LEDGER_COLUMNS,
}
_DOUBLES = {
    "deciding_score",
    "jaccard",
    "containment_left_in_right",
    "containment_right_in_left",
    "cosine",
    "left_covered",
    "right_covered",
    "whole_text_jaccard",
    "jaccard_to_keeper",
    "containment_in_keeper",
    "keeper_containment",
    "cosine_to_keeper",
}
_LONGS = {"shared_shingles", "cluster_size", "size"}
# Rows per row group written from an AuditResult.
GROUP_ROWS = 65536


def schema_of(columns: list[str]) -> pa.Schema:
    """The Arrow schema of an output's columns."""
    return pa.schema(
        [(c, pa.float64() if c in _DOUBLES else pa.int64() if c in _LONGS else pa.string()) for c in columns]
    )


def _rows_of(result, name: str) -> Iterable[dict]:
    if name == "pairs":
        return result.pairs
    if name == "clusters":
        return cluster_rows(result.clusters)
    if name == "actions":
        return result.actions
    return (entry.to_dict() for entry in result.ledger)


def _groups(rows: Iterable[dict], schema: pa.Schema) -> Iterator[pa.RecordBatch]:
    group: list[dict] = []
    for row in rows:
        group.append(row)
        if len(group) >= GROUP_ROWS:
            yield pa.RecordBatch.from_pylist(group, schema=schema)
            group = []
    if group:
        yield pa.RecordBatch.from_pylist(group, schema=schema)


def _write_result(result, out_dir: str) -> dict[str, str]:
    import pyarrow.parquet as pq

    written = {}
    for name, columns in OUTPUTS.items():
        schema = schema_of(columns)
        path = os.path.join(out_dir, f"{name}.parquet")
        with pq.ParquetWriter(path, schema) as writer:
            for batch in _groups(_rows_of(result, name), schema):
                writer.write_batch(batch)
        written[name] = path
    return written


def write_parquet(result_or_frames, out_dir: str) -> dict[str, str]:
    """Write pairs, clusters, actions and ledger as Parquet into ``out_dir`` (created).

    Parameters
    ----------
    result_or_frames : AuditResult or mapping
        An audit's result (files ``pairs.parquet`` … written by pyarrow, one row group
        of `GROUP_ROWS` rows at a time), or a mapping of output name (``pairs``,
        ``clusters``, ``actions``, ``ledger``) to a Spark DataFrame or a pyarrow Table
        with those columns (a DataFrame is written by Spark as a folder ``pairs.parquet/``
        of part files, any size).

    Returns
    -------
    dict
        Output name → path written.
    """
    os.makedirs(out_dir, exist_ok=True)
    if not isinstance(result_or_frames, Mapping):
        return _write_result(result_or_frames, out_dir)
    import pyarrow.parquet as pq

    written = {}
    for name, frame in result_or_frames.items():
        if name not in OUTPUTS:
            raise ValueError(f"unknown output {name!r}: expected one of {', '.join(OUTPUTS)}")
        path = os.path.join(out_dir, f"{name}.parquet")
        if isinstance(frame, pa.Table):
            pq.write_table(frame.select(OUTPUTS[name]).cast(schema_of(OUTPUTS[name])), path)
        else:
            frame.select(*OUTPUTS[name]).write.mode("overwrite").parquet(path)
        written[name] = path
    return written
