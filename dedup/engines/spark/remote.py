"""The read step for URIs: files listed by Spark, read by our own readers in a map step.

For inputs given as URIs Spark can read (``hdfs://``, ``s3a://``, ``gs://``, ``file://`` …):

1. Hadoop's file system lists the files (recursively, without reading them; Spark's own
   file sources would leave out every name starting with ``_`` or ``.``);
2. the driver puts them in the order the local engine walks a folder (a folder's files
   by name, then its subfolders by name), numbers them, and applies the same rules as
   on one machine: hidden names, ``--include``/``--exclude``, unsupported types and the
   size limit become ledger entries made here;
3. the files to read are loaded by the ``binaryFile`` source (those whose name starts
   with ``_`` or ``.``, which it refuses to load, and empty files are read on the driver)
   and each partition reads its files with our readers (`dedup.ingest.readers.read_bytes`: the same formats,
   records, limits and ledger entries) and normalizes the documents at once (the
   normalize map), leaving documents and ledger entries with their read position.

Differences from reading local paths: links are the file system's business, and every
file is read whole (at most 2 GiB: a larger Parquet file or archive is skipped with a
reason). Document ids are paths relative to the folder given, as on one machine.
"""

from __future__ import annotations

import io
import posixpath
import re
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass, field

import pyarrow as pa

from ...ingest import InputError, LedgerEntry, ReadOptions
from ...ingest.compressed import unsupported_compressed
from ...ingest.dates import date_value
from ...ingest.document import Item
from ...ingest.filters import file_reason, folder_reason
from ...ingest.options import file_too_large
from ...ingest.readers import (
    ARCHIVE_FORMATS,
    LARGE_FILE_FORMATS,
    STREAMED_FORMATS,
    format_and_compression,
    read_bytes,
    read_stream,
)
from ..reading import _date_getter
from .columns import ddl, numbers
from .normalizing import DOCUMENTS, NORMALIZED, ledger_batch, normalized_batch
from .session import is_uri

__all__ = ["is_uri", "read_uris", "RemoteInputs", "walk_key"]

# The binaryFile source reads a file into one value: at most 2 GiB.
SPARK_FILE_LIMIT = 2**31 - 1
_GLOB = re.compile(r"([\\{}\[\]*?])")


def walk_key(rel: str) -> tuple:
    """The order of the local walk as a sort key: in each folder its files by name, then
    its subfolders by name (a passed-over folder sorts among the files, where its entry is)."""
    parts = rel.split("/")
    return (*((1, p) for p in parts[:-1]), (0, parts[-1]))


def read_options(settings) -> ReadOptions:
    """The readers' options of the audit settings (as `iter_documents` makes them)."""
    s = settings
    return ReadOptions(
        id_field=s.id_field,
        text_fields=tuple(s.text_fields),
        max_file_bytes=s.max_file_bytes,
        max_text_chars=s.max_text_chars,
        max_archive_ratio=s.max_archive_ratio,
        max_archive_bytes=s.max_archive_bytes,
        html_keep_all=s.html_keep_all,
        include=tuple(s.include),
        exclude=tuple(s.exclude),
        include_hidden=s.include_hidden,
        include_vcs=s.include_vcs,
    )


@dataclass
class _Listed:
    """A file listed under a root: where it is, its id, its size, the name to load it by
    (Hadoop's spelling), when it was changed, and whether the driver reads it (an empty
    file, or a name the ``binaryFile`` source refuses)."""

    root: int
    where: tuple[str, str, str]
    rel: str
    size: int
    load: str
    walked: bool
    mtime: float | None = None
    on_driver: bool = False


_DECODED = re.compile(r"^([A-Za-z][A-Za-z0-9+.-]*):(?://([^/]*))?(.*)$")


def _decoded_location(path: str) -> tuple[str, str, str]:
    """``(scheme, authority, path)`` of a path as Hadoop prints it (not percent-encoded)."""
    found = _DECODED.match(path)
    if found is None:
        return "", "", path
    return found.group(1).lower(), found.group(2) or "", found.group(3) or "/"


def _hadoop(spark):
    """The JVM and the Hadoop configuration of the session (Py4J: not on Spark Connect)."""
    context = spark.sparkContext
    return context._jvm, context._jsc.hadoopConfiguration()


def _list_root(spark, root: str) -> list[tuple[tuple[str, str, str], int, str, float]]:
    """Every file under ``root`` (a glob is expanded first): its location, size, the name
    to load it by and its modification time, sorted by location. Hadoop's listing, unlike
    Spark's file sources, keeps names starting with ``_`` or ``.`` (the walk's rules then
    decide, as on one machine). Cost: one listing call per folder, no content read."""
    jvm, conf = _hadoop(spark)
    path = jvm.org.apache.hadoop.fs.Path(root)
    system = path.getFileSystem(conf)
    matches = system.globStatus(path)
    if not matches:
        raise InputError(f"no such file or folder: {root}")
    listed = []
    for match in matches:
        files = system.listFiles(match.getPath(), True)
        while files.hasNext():
            status = files.next()
            name = status.getPath().toString()
            listed.append(
                (_decoded_location(name), int(status.getLen()), name, status.getModificationTime() / 1e3)
            )
    return sorted(listed)


def _refused_by_spark(where: tuple[str, str, str]) -> bool:
    """Whether the ``binaryFile`` source refuses to load this file, even when named."""
    return posixpath.basename(where[2]).startswith(("_", "."))


def read_on_driver(spark, name: str) -> bytes:
    """The bytes of one file, read through Hadoop's file system on the driver."""
    jvm, conf = _hadoop(spark)
    path = jvm.org.apache.hadoop.fs.Path(name)
    stream = path.getFileSystem(conf).open(path)
    try:
        return bytes(jvm.org.apache.commons.io.IOUtils.toByteArray(stream))
    finally:
        stream.close()


def _listed(spark, roots: Sequence[str]) -> list[_Listed]:
    """Every file under the roots, its id relative to the folder that holds all roots."""
    found = []
    bases = []
    for number, root in enumerate(roots):
        scheme, authority, root_path = _decoded_location(root)
        root_path = root_path.rstrip("/") or "/"
        files = _list_root(spark, root)
        single = len(files) == 1 and files[0][0][2] == root_path
        bases.append(posixpath.dirname(root_path) if single else root_path)
        found.extend((number, *file, not single) for file in files)
    places = {_decoded_location(r)[:2] for r in roots}
    base = posixpath.commonpath(bases) if len(places) == 1 else ""
    return [
        _Listed(
            number,
            where,
            _relative(where, base),
            size,
            load,
            walked,
            mtime,
            on_driver=size == 0 or _refused_by_spark(where),
        )
        for number, where, size, load, mtime, walked in found
    ]


def _relative(where: tuple[str, str, str], base: str) -> str:
    """A file's id: its path relative to ``base``, or its whole URI (roots in several places)."""
    scheme, authority, path = where
    return posixpath.relpath(path, base) if base else f"{scheme}://{authority}{path}"


def _passed_folder(rel: str, opts: ReadOptions) -> str | None:
    """The id of the outermost folder of ``rel`` that the walk would pass over, if any."""
    parts = rel.split("/")
    for depth in range(len(parts) - 1):
        folder = "/".join(parts[: depth + 1])
        if folder_reason(folder, parts[depth], opts):
            return folder
    return None


def _screened(item: _Listed, opts: ReadOptions) -> LedgerEntry | None:
    """The entry of a file that is not read (as the local engine makes it), or None."""
    name = item.rel.rsplit("/", 1)[-1]
    fmt, compression = format_and_compression(item.rel)
    reason = file_reason(item.rel, name, opts, found=item.walked, container=fmt in ARCHIVE_FORMATS)
    if reason:
        return LedgerEntry(item.rel, "skipped", reason, fmt or "")
    if fmt is None:
        ext = posixpath.splitext(name)[1] or "(no extension)"
        return LedgerEntry(
            item.rel, "skipped", unsupported_compressed(name) or f"unsupported file type {ext}"
        )
    # Archives, compressed files and record files are read as streams (limits per record or
    # on the expansion), as on one machine.
    streamed = fmt in STREAMED_FORMATS or fmt in LARGE_FILE_FORMATS or compression
    if not streamed and item.size > opts.max_file_bytes:
        return LedgerEntry(
            item.rel, "skipped", file_too_large(item.size, opts.max_file_bytes), fmt, item.size
        )
    if item.size > SPARK_FILE_LIMIT:
        reason = f"file too large for Spark to read whole: {item.size} bytes, limit {SPARK_FILE_LIMIT}"
        return LedgerEntry(item.rel, "skipped", reason, fmt, item.size)
    return None


@dataclass
class RemoteInputs:
    """The files under the URIs in read order: the entries made on the driver, the files
    to read (URI → read position, id, format), and the documents whose id repeats."""

    driver_entries: list[tuple[tuple[int, int], LedgerEntry]] = field(default_factory=list)
    to_read: dict[str, tuple[int, str, str]] = field(default_factory=dict)
    on_driver: list[tuple[str, tuple[int, str, str], float | None, int]] = field(default_factory=list)
    repeated: set[tuple[int, int]] = field(default_factory=set)

    def entries(self, rows: pa.Table) -> list[LedgerEntry]:
        """Every ledger entry in read order: the driver's and the readers' (``kind`` 1 rows of
        collected `NORMALIZED` columns); a document whose id repeats an earlier one is
        skipped, as `iter_documents` skips it."""
        read = rows.filter(pa.compute.equal(rows.column("kind"), 1))
        files, entries_no = numbers(read.column("file_no")), numbers(read.column("entry_no"))
        columns = {name: read.column(name).to_pylist() for name in _ENTRY_COLUMNS}
        made = [
            ((int(f), int(e)), LedgerEntry(*(columns[name][i] for name in _ENTRY_COLUMNS)))
            for i, (f, e) in enumerate(zip(files.tolist(), entries_no.tolist()))
        ]
        ordered = sorted(self.driver_entries + made, key=lambda pair: pair[0])
        seen: set[str] = set()
        for position, entry in ordered:
            if not entry.document_id:
                continue
            if entry.document_id in seen:
                entry.status, entry.reason = (
                    "skipped",
                    f"id {entry.document_id!r} repeats an earlier document",
                )
                entry.document_id = ""
                self.repeated.add(position)
            else:
                seen.add(entry.document_id)
        return [entry for _, entry in ordered]

    def kept_documents(self, documents: pa.Table) -> pa.Table:
        """The documents without those whose id repeats an earlier one."""
        if not self.repeated:
            return documents
        files, entries_no = numbers(documents.column("file_no")), numbers(documents.column("entry_no"))
        keep = [(f, e) not in self.repeated for f, e in zip(files.tolist(), entries_no.tolist())]
        return documents.filter(pa.array(keep))


_ENTRY_COLUMNS = ("input", "status", "reason", "entry_format", "size", "encoding", "record", "document_id")


def plan_reading(listed: list[_Listed], opts: ReadOptions) -> RemoteInputs:
    """Number the files in walk order (roots in the order given) and screen them."""
    inputs = RemoteInputs()
    events: dict[tuple, tuple[str, object]] = {}
    seen: dict[tuple[str, str, str], str] = {}
    for item in listed:
        folder = _passed_folder(item.rel, opts)
        if folder is not None:
            reason = folder_reason(folder, folder.rsplit("/", 1)[-1], opts)
            events.setdefault(
                (item.root, walk_key(folder)), ("entry", LedgerEntry(folder, "skipped", reason))
            )
            continue
        key = (item.root, walk_key(item.rel))
        if item.where in seen:
            events[key] = (
                "entry",
                LedgerEntry(item.rel, "skipped", f"same file as {seen[item.where]}, read once"),
            )
            continue
        seen[item.where] = item.rel
        entry = _screened(item, opts)
        events[key] = ("entry", entry) if entry is not None else ("file", item)
    for file_no, key in enumerate(sorted(events)):
        what, value = events[key]
        if what == "entry":
            inputs.driver_entries.append(((file_no, 0), value))
        elif value.on_driver:
            found = (file_no, value.rel, format_and_compression(value.rel)[0])
            inputs.on_driver.append((value.load, found, value.mtime, value.size))
        else:
            inputs.to_read[value.load] = (file_no, value.rel, format_and_compression(value.rel)[0])
    return inputs


def _read_file(data: bytes, found: tuple[int, str, str], mtime: float, opts, date_of):
    """Documents (`DOCUMENTS` rows) and positioned entries of one file, read by our readers."""
    file_no, rel, fmt = found
    rows, positions, entries = [], [], []
    for k, (doc, entry) in enumerate(_outcomes(data, Item(rel, rel, fmt, len(data), mtime), opts)):
        positions.append((file_no, k))
        entries.append(entry)
        if doc is not None:
            date = date_value(date_of(doc)) if date_of is not None else None
            rows.append((file_no, k, doc.id, doc.text, doc.source, doc.format, doc.title, date))
    return rows, positions, entries


def _outcomes(data: bytes, item: Item, opts: ReadOptions):
    """A file's outcomes as the local walk reads it: compressed and large record files as
    streams, the rest from its bytes."""
    _, compression = format_and_compression(item.id)
    if compression or (item.format in LARGE_FILE_FORMATS and len(data) > opts.max_file_bytes):
        return read_stream(io.BytesIO(data), item, opts, compression=compression)
    return read_bytes(data, item, opts)


def read_partition(settings, to_read) -> Callable[[Iterator[pa.RecordBatch]], Iterator[pa.RecordBatch]]:
    """The read-and-normalize map over ``binaryFile`` rows (``path``, ``modificationTime``,
    ``content``): `NORMALIZED` documents and ledger entries. ``to_read`` is a broadcast
    dict URI → (read position, id, format)."""

    def run(batches: Iterator[pa.RecordBatch]) -> Iterator[pa.RecordBatch]:
        opts, date_of, chosen = read_options(settings), _date_getter(settings), to_read.value
        for batch in batches:
            micros = pa.compute.cast(batch.column("modificationTime"), pa.int64()).to_numpy(
                zero_copy_only=False
            )
            files = zip(batch.column("path").to_pylist(), batch.column("content").to_pylist(), micros)
            read = [(data, chosen[uri], float(when) / 1e6) for uri, data, when in files if uri in chosen]
            yield from _outcome_batches(read, settings, opts, date_of)

    return run


def _outcome_batches(files, settings, opts, date_of) -> Iterator[pa.RecordBatch]:
    """`NORMALIZED` batches of the documents and ledger entries of ``(bytes, (read position,
    id, format), mtime)`` files."""
    rows, positions, entries = [], [], []
    for data, found, mtime in files:
        made = _read_file(data, found, mtime, opts, date_of)
        rows += made[0]
        positions += made[1]
        entries += made[2]
    if rows:
        columns = list(zip(*rows))
        arrays = [pa.array(c, type=f.type) for c, f in zip(columns, DOCUMENTS)]
        yield normalized_batch(pa.RecordBatch.from_arrays(arrays, schema=DOCUMENTS), settings.boilerplate)
    if entries:
        yield ledger_batch(positions, entries)


def read_uris(spark, roots: Sequence[str], settings, share):
    """The normalized documents and ledger entries of the files under URIs (DataFrame of
    `NORMALIZED`), and the `RemoteInputs` that orders the ledger. ``share`` broadcasts."""
    opts = read_options(settings)
    inputs = plan_reading(_listed(spark, roots), opts)
    # Empty files and names the binaryFile source refuses are read here.
    here_files = [
        (read_on_driver(spark, name) if size else b"", found, mtime)
        for name, found, mtime, size in inputs.on_driver
    ]
    here = pa.Table.from_batches(
        list(_outcome_batches(here_files, settings, opts, _date_getter(settings))), schema=NORMALIZED
    )
    normalized = spark.createDataFrame(here, schema=ddl(NORMALIZED))
    if inputs.to_read:
        chosen = [_GLOB.sub(r"\\\1", uri) for uri in sorted(inputs.to_read)]
        files = spark.read.format("binaryFile").load(chosen).select("path", "modificationTime", "content")
        run = read_partition(settings, share(inputs.to_read))
        normalized = normalized.unionByName(files.mapInArrow(run, ddl(NORMALIZED)))
    return normalized, inputs
