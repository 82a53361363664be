"""Blob encodings of the index: exact round trips, narrowest widths, damaged blobs refused."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from dedup.index.blobs import (
    BlobError,
    pack_array,
    pack_sorted,
    pack_uints,
    unpack_array,
    unpack_sorted,
    unpack_uints,
)
from dedup.index.postings import _decode_rows, _df_and_norms, _joined


@pytest.mark.parametrize(
    ("top", "width"),
    [(0, 1), (255, 1), (256, 2), (65535, 2), (65536, 4), (2**32 - 1, 4), (2**32, 8), (2**63 - 1, 8)],
)
def test_uints_take_the_narrowest_width_that_holds_the_largest_value(top, width):
    values = np.array([0, 1, top], dtype=np.int64)
    blob = pack_uints(values)
    assert blob[0] == width and len(blob) == 1 + 3 * width
    assert unpack_uints(blob).tolist() == [0, 1, top]


@settings(max_examples=200, deadline=None)
@given(st.lists(st.integers(min_value=0, max_value=2**40), max_size=300))
def test_sorted_round_trip(values):
    """Reference: the input itself (sorted and de-duplicated by Python)."""
    expected = sorted(set(values))
    assert unpack_sorted(pack_sorted(np.array(expected, dtype=np.int64))).tolist() == expected


def test_sorted_refuses_unsorted_input():
    with pytest.raises(ValueError):
        pack_sorted(np.array([3, 1]))


@pytest.mark.parametrize("blob", [b"", b"\x03abc", b"\x02abc"])
def test_damaged_integer_blobs_raise_blob_error(blob):
    with pytest.raises(BlobError):
        unpack_uints(blob)


def test_arrays_are_little_endian_and_length_checked():
    blob = pack_array(np.array([1, 2], dtype=np.uint32), "<u4")
    assert blob == b"\x01\x00\x00\x00\x02\x00\x00\x00"
    assert unpack_array(blob, "<u4", 2).tolist() == [1, 2]
    with pytest.raises(BlobError):
        unpack_array(blob, "<u4", 3)
    with pytest.raises(BlobError):
        unpack_array(blob[:-1], "<u4")


@settings(max_examples=60, deadline=None)
@given(
    st.lists(
        st.lists(st.integers(min_value=0, max_value=70000), min_size=1, max_size=40), min_size=1, max_size=12
    )
)
def test_compiled_decoding_equals_one_blob_at_a_time(lists):
    """Reference: `unpack_sorted` / `unpack_uints` on each blob (numpy), against the compiled bulk decoder."""
    sorted_lists = [sorted(set(v)) for v in lists]
    id_blobs = [pack_sorted(np.array(v, dtype=np.int64)) for v in sorted_lists]
    count_blobs = [pack_uints(np.array(v, dtype=np.int64)) for v in lists]
    ids, starts = _decode_rows(id_blobs, cumulative=True)
    counts, _ = _decode_rows(count_blobs, cumulative=False)
    assert ids.tolist() == [x for v in sorted_lists for x in v]
    assert counts.tolist() == [x for v in lists for x in v]
    assert np.diff(starts).tolist() == [len(v) for v in sorted_lists]


def test_statistics_kernel_equals_numpy_sums():
    """Reference: df, squared norms (raw tf) and squared search norms (sublinear tf, some columns left out)
    summed with numpy from the decoded lists."""
    rng = np.random.default_rng(3)
    n_texts, n_columns = 40, 15
    position = np.full(50, -1, dtype=np.int64)
    live = np.sort(rng.choice(50, size=n_texts, replace=False))
    position[live] = np.arange(n_texts)
    lists, counts, groups = [], [], []
    for column in range(n_columns):
        for _segment in range(2):
            ids = np.sort(rng.choice(50, size=int(rng.integers(1, 20)), replace=False))
            lists.append(ids)
            counts.append(rng.integers(1, 300, size=ids.shape[0]))
            groups.append(column)
    id_buf, id_offsets = _joined([pack_sorted(v) for v in lists])
    count_buf, count_offsets = _joined([pack_uints(c) for c in counts])
    stop = np.arange(n_columns) % 4 == 0  # the search's norms leave these columns out
    df, norm2, search2, entries, ok = _df_and_norms(
        id_buf,
        id_offsets,
        count_buf,
        count_offsets,
        np.array(groups),
        position,
        n_columns,
        n_texts,
        False,
        stop,
    )
    assert ok and entries == sum(v.shape[0] for v in lists)
    expected_df = np.zeros(n_columns, np.int64)
    for ids, g in zip(lists, groups):
        expected_df[g] += int(np.sum(position[ids] >= 0))
    idf = np.log((1 + n_texts) / (1 + expected_df)) + 1
    expected_norm2 = np.zeros(n_texts)
    expected_search2 = np.zeros(n_texts)
    for ids, c, g in zip(lists, counts, groups):
        keep = position[ids] >= 0
        np.add.at(expected_norm2, position[ids][keep], (c[keep] * idf[g]) ** 2)
        if not stop[g]:
            np.add.at(expected_search2, position[ids][keep], ((1 + np.log(c[keep])) * idf[g]) ** 2)
    assert df.tolist() == expected_df.tolist()
    np.testing.assert_allclose(norm2, expected_norm2, rtol=1e-12)
    np.testing.assert_allclose(search2, expected_search2, rtol=1e-12)
