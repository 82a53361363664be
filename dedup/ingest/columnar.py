"""Parquet files (pyarrow, from the ``dedup[docs]`` extra): one document per row.

Rows are read a batch at a time, so a file of millions of rows never sits in memory
whole; a Parquet file on disk is read through its file handle, not loaded first.
"""

from __future__ import annotations

from collections.abc import Iterator
from typing import BinaryIO

from .document import Item, Outcome
from .optional import load
from .options import ReadOptions
from .records import Triple, record_outcomes

__all__ = ["read_parquet"]

_BATCH_ROWS = 1024


def read_parquet(source: BinaryIO, item: Item, opts: ReadOptions) -> Iterator[Outcome]:
    """Documents from the rows of a Parquet file; rows are labelled ``row N`` from 1."""
    parquet = load("pyarrow.parquet", ".parquet")
    table = parquet.ParquetFile(source)
    columns = table.schema_arrow.names
    if all(f not in columns for f in opts.text_fields):
        shown = ", ".join(columns[:12]) + (" …" if len(columns) > 12 else "")
        wanted = ", ".join(repr(f) for f in opts.text_fields)
        yield None, item.entry("skipped", f"no column {wanted} (columns: {shown}); choose with --text-field")
        return

    def rows() -> Iterator[Triple]:
        number = 0
        for batch in table.iter_batches(batch_size=_BATCH_ROWS):
            for record in batch.to_pylist():
                number += 1
                yield f"row {number}", record, ""

    yield from record_outcomes(rows(), item, opts)
