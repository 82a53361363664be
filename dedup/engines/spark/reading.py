"""The read step for local paths: our own readers on the driver, the documents staged.

Files and folders on this machine are read exactly as the local engine reads them
(`dedup.ingest.iter_documents`: the same walk, readers, limits and ledger), on the
driver, one document at a time. Each document leaves with its read position and what
its record keeps, in Arrow batches that are staged as Parquet files in the work folder
(bounded memory: one batch at a time), which Spark then reads as a DataFrame. Where the
executors cannot see the driver's disk (a cluster master), the batches are handed over
through the driver instead (``createDataFrame``), so the corpus must fit its memory:
give such a cluster URIs it can read itself (`dedup.engines.spark.remote`).
"""

from __future__ import annotations

import os
from collections.abc import Iterator, Sequence

import pyarrow as pa

from ...ingest import LedgerEntry, RawDocument, Records, documents_of
from ...ingest.dates import date_value
from ...plan import reading_keywords
from ..reading import _date_getter
from .columns import ddl
from .normalizing import DOCUMENTS

__all__ = ["read_documents", "document_batches", "stage_batches"]

# Documents (or characters of text) per staged batch, and bytes per staged file.
BATCH_DOCUMENTS = 2048
BATCH_CHARACTERS = 16 * 2**20
FILE_BYTES = 64 * 2**20


def _batch(rows: list[tuple]) -> pa.RecordBatch:
    columns = list(zip(*rows))
    return pa.RecordBatch.from_arrays(
        [pa.array(column, type=field.type) for column, field in zip(columns, DOCUMENTS)], schema=DOCUMENTS
    )


def document_batches(documents: Iterator[RawDocument], settings) -> Iterator[pa.RecordBatch]:
    """`DOCUMENTS` batches of the documents in read order (``file_no`` counts documents).

    The date is taken only when the keeper policy needs one, as on one machine.
    """
    date_of = _date_getter(settings)
    rows: list[tuple] = []
    characters = 0
    for number, doc in enumerate(documents):
        date = date_value(date_of(doc)) if date_of is not None else None
        rows.append((number, 0, doc.id, doc.text, doc.source, doc.format, doc.title, date))
        characters += len(doc.text)
        if len(rows) >= BATCH_DOCUMENTS or characters >= BATCH_CHARACTERS:
            yield _batch(rows)
            rows, characters = [], 0
    if rows:
        yield _batch(rows)


def stage_batches(batches: Iterator[pa.RecordBatch], folder: str) -> int:
    """Write the batches as Parquet files of about `FILE_BYTES` into ``folder`` (at least
    one file, so an empty corpus is an empty table); returns the number of documents."""
    import pyarrow.parquet as pq

    os.makedirs(folder, exist_ok=True)
    count = part = written = 0
    writer = None
    try:
        for batch in batches:
            if writer is None:
                writer = pq.ParquetWriter(os.path.join(folder, f"part-{part:05d}.parquet"), DOCUMENTS)
            writer.write_batch(batch)
            count += batch.num_rows
            written += batch.nbytes
            if written >= FILE_BYTES:
                writer.close()
                writer, part, written = None, part + 1, 0
        if writer is None and part == 0:
            pq.write_table(DOCUMENTS.empty_table(), os.path.join(folder, "part-00000.parquet"))
    finally:
        if writer is not None:
            writer.close()
    return count


def read_documents(
    spark,
    paths: Sequence[str] | Records,
    settings,
    ledger: list[LedgerEntry],
    *,
    staging: str | None,
    workers: int = 1,
):
    """The documents of local ``paths`` as a DataFrame of `DOCUMENTS`; ``ledger`` receives
    an entry for every input, in read order.

    With ``staging`` (a folder the executors can read) the documents are staged there as
    Parquet; without, they go through the driver's memory. Cost: one pass over the inputs
    on the driver (``workers`` processes read and decode files in parallel).
    """
    s = settings
    documents = documents_of(paths, ledger=ledger, workers=workers, **reading_keywords(s))
    batches = document_batches(documents, settings)
    if staging is not None:
        stage_batches(batches, staging)
        return spark.read.schema(ddl(DOCUMENTS)).parquet("file://" + os.path.abspath(staging))
    table = pa.Table.from_batches(list(batches), schema=DOCUMENTS)
    return spark.createDataFrame(table, schema=ddl(DOCUMENTS)) if table.num_rows else _empty(spark)


def _empty(spark):
    return spark.createDataFrame([], schema=ddl(DOCUMENTS))
