"""Arrow columns ↔ the packed arrays the kernels take: one buffer and its offsets.

The kernels work on texts (and shingle sets, TF-IDF rows) laid end to end in one array
with ``n + 1`` offsets. Spark hands a map step Arrow record batches whose binary
columns are exactly that (a data buffer and its offsets), so a column becomes a packed
array with one copy (into a writable array the kernels may take), and a packed array
becomes a column without any per-row Python object.

Unsigned 64-bit values (hashes, band keys) travel as signed ``long`` of the same bits:
Spark has no unsigned type, and equality, grouping and joins only need the bits.
"""

from __future__ import annotations

import numpy as np
import pyarrow as pa

__all__ = [
    "packed",
    "packed_values",
    "binary_column",
    "values_column",
    "long_lists",
    "big_endian_rows",
    "numbers",
    "ddl",
]


def _offset_width(kind: pa.DataType) -> type:
    if pa.types.is_large_binary(kind) or pa.types.is_large_string(kind):
        return np.int64
    if pa.types.is_binary(kind) or pa.types.is_string(kind):
        return np.int32
    raise TypeError(f"expected a binary or string column, got {kind}")


def packed(column: pa.Array | pa.ChunkedArray) -> tuple[np.ndarray, np.ndarray]:
    """A binary or string column as ``(buf, offsets)``: uint8 bytes (a writable copy) and
    int64 offsets from 0. A null is an empty value. O(bytes)."""
    if isinstance(column, pa.ChunkedArray):
        column = column.combine_chunks() if column.num_chunks != 1 else column.chunk(0)
    n = len(column)
    buffers = column.buffers()
    if n == 0 or buffers[1] is None:
        return np.zeros(0, np.uint8), np.zeros(n + 1, np.int64)
    width = _offset_width(column.type)
    offsets = np.frombuffer(buffers[1], dtype=width)[column.offset : column.offset + n + 1].astype(np.int64)
    if column.null_count:
        lengths = np.diff(offsets)
        lengths[np.asarray(column.is_null())] = 0
        starts = offsets[:-1]
        data = np.frombuffer(buffers[2], np.uint8) if buffers[2] is not None else np.zeros(0, np.uint8)
        out_offsets = np.zeros(n + 1, np.int64)
        np.cumsum(lengths, out=out_offsets[1:])
        picks = np.repeat(starts - out_offsets[:-1], lengths) + np.arange(out_offsets[-1])
        return data[picks].copy(), out_offsets
    data = np.frombuffer(buffers[2], np.uint8) if buffers[2] is not None else np.zeros(0, np.uint8)
    buf = data[offsets[0] : offsets[-1]].copy()
    return buf, offsets - offsets[0]


def packed_values(column: pa.Array | pa.ChunkedArray, dtype) -> tuple[np.ndarray, np.ndarray]:
    """A binary column of fixed-width values (written by `values_column`) as ``(values,
    offsets)`` counted in values."""
    buf, offsets = packed(column)
    size = np.dtype(dtype).itemsize
    return buf.view(dtype), offsets // size


def binary_column(buf: np.ndarray, offsets: np.ndarray) -> pa.Array:
    """Packed bytes as a ``binary`` column (32-bit offsets, as Spark's binary type is
    handed over): the callers keep batches well below 2 GiB."""
    offsets = np.asarray(offsets, dtype=np.int64)
    if offsets[-1] - offsets[0] >= 2**31:
        raise ValueError("a batch of more than 2 GiB cannot be one binary column")
    body = np.ascontiguousarray(buf[offsets[0] : offsets[-1]]).view(np.uint8)
    rebased = (offsets - offsets[0]).astype(np.int32)
    return pa.Array.from_buffers(
        pa.binary(), rebased.shape[0] - 1, [None, pa.py_buffer(rebased), pa.py_buffer(body)]
    )


def values_column(values: np.ndarray, offsets: np.ndarray) -> pa.Array:
    """Segments ``values[offsets[k]:offsets[k + 1]]`` of a fixed-width array, one binary
    value per row (native byte order: read back by `packed_values` on any machine of the
    same byte order, which is every machine Spark runs on)."""
    values = np.ascontiguousarray(values)
    size = values.dtype.itemsize
    return binary_column(values.view(np.uint8), np.asarray(offsets, np.int64) * size)


def long_lists(rows: np.ndarray) -> pa.Array:
    """A 2-d array of 64-bit values as a list<long> column (one list per row; unsigned
    values keep their bits)."""
    rows = np.ascontiguousarray(rows)
    n, width = rows.shape
    flat = pa.array(rows.view(np.int64).reshape(-1), type=pa.int64())
    offsets = pa.array(np.arange(n + 1, dtype=np.int32) * width, type=pa.int32())
    return pa.ListArray.from_arrays(offsets, flat)


def big_endian_rows(rows: np.ndarray) -> pa.Array:
    """Rows of uint32 values as binary values whose byte order sorts like the rows
    (Spark compares binary values byte by byte, unsigned): each row's values big-endian."""
    rows = np.ascontiguousarray(rows, dtype=">u4")
    n, width = rows.shape
    return binary_column(rows.reshape(-1).view(np.uint8), np.arange(n + 1, dtype=np.int64) * width * 4)


def numbers(column: pa.Array | pa.ChunkedArray, dtype=np.int64) -> np.ndarray:
    """A numeric column (without nulls) as a numpy array."""
    return np.asarray(column.to_numpy(zero_copy_only=False), dtype=dtype)


_DDL = {
    pa.int64(): "long",
    pa.int32(): "int",
    pa.string(): "string",
    pa.binary(): "binary",
    pa.float64(): "double",
    pa.bool_(): "boolean",
    pa.list_(pa.int64()): "array<long>",
}


def ddl(schema: pa.Schema) -> str:
    """The Spark DDL of an Arrow schema made of the types the map steps use."""
    return ", ".join(f"`{field.name}` {_DDL[field.type]}" for field in schema)
