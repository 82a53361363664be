"""The work folder: stores read back what was written, and are removed unless kept."""

from __future__ import annotations

import os

import numpy as np

from dedup.workdir import ByteStore, WorkFolder


def test_store_reads_back_slots_in_any_order(tmp_path):
    store = ByteStore(str(tmp_path / "s.bin"))
    items = [b"", b"alpha", "é\u2028".encode(), b"x" * 100_000, b"omega"]
    for k, item in enumerate(items):
        assert store.append(item) == k
    order = [3, 0, 4, 1, 2, 1]
    buf, offsets = store.gather(order)
    assert [bytes(buf[offsets[i] : offsets[i + 1]]) for i in range(len(order))] == [items[k] for k in order]
    assert [store.get(k) for k in range(len(items))] == items
    assert store.sizes([1, 3]).tolist() == [5, 100_000]
    store.close()


def test_empty_store_gathers_nothing(tmp_path):
    store = ByteStore(str(tmp_path / "e.bin"))
    buf, offsets = store.gather(np.zeros(0, np.int64))
    assert buf.shape == (0,) and offsets.tolist() == [0]
    store.close()


def test_folder_is_removed_unless_kept(tmp_path):
    with WorkFolder(str(tmp_path / "w")) as work:
        work.store("texts").append(b"abc")
        open(work.file("extra.bin"), "wb").close()
    assert not (tmp_path / "w").exists()

    with WorkFolder(str(tmp_path / "k"), keep=True) as work:
        work.store("texts").append(b"abc")
    kept = sorted(os.listdir(tmp_path / "k"))
    assert kept == ["texts.bin", "texts.offsets.npy"]
    assert np.load(tmp_path / "k" / "texts.offsets.npy").tolist() == [0, 3]


def test_existing_folder_keeps_other_files(tmp_path):
    (tmp_path / "mine.txt").write_text("not ours")
    with WorkFolder(str(tmp_path)) as work:
        work.store("texts").append(b"abc")
    assert sorted(os.listdir(tmp_path)) == ["mine.txt"]


def test_packed_segments_read_back_as_the_bytes_appended_one_by_one(tmp_path):
    # Reference: the same segments stored with append, one at a time.
    values = np.arange(10, dtype=np.uint64) * np.uint64(2**40 + 3)
    offsets = np.array([2, 5, 5, 9], dtype=np.int64)
    packed, single = ByteStore(str(tmp_path / "p.bin")), ByteStore(str(tmp_path / "s.bin"))
    packed.append(b"head")
    single.append(b"head")
    assert packed.extend_packed(values, offsets) == 1
    for a, b in zip(offsets[:-1], offsets[1:]):
        single.append(values[a:b].tobytes())
    assert np.array_equal(packed.offsets(), single.offsets())
    buf, offs = packed.gather([3, 1])
    assert np.array_equal(buf.view(np.uint64), np.concatenate([values[5:9], values[2:5]]))
    assert offs.tolist() == [0, 32, 56]
    packed.close()
    single.close()
