"""The audit's allocation settings apply inside and are undone after, and change no result."""

from __future__ import annotations

import json

import numpy as np
import pytest

import dedup
from dedup.engines import tuning as heap


def _numpy_advice() -> bool:
    setter = heap._numpy_advice_setter()
    if setter is None:
        pytest.skip("this numpy has no huge-page switch")
    previous = setter(True)
    setter(previous)
    return previous


def test_numpy_huge_page_advice_is_off_inside_and_restored_after():
    before = _numpy_advice()
    with heap.lean_allocation():
        assert _numpy_advice() is False
        with heap.lean_allocation():  # nested: still off
            assert _numpy_advice() is False
        assert _numpy_advice() is False  # the inner exit does not restore
    assert _numpy_advice() is before


def test_restored_when_the_body_raises():
    before = _numpy_advice()
    with pytest.raises(RuntimeError), heap.lean_allocation():
        raise RuntimeError("stop")
    assert _numpy_advice() is before
    assert heap._state["depth"] == 0


def test_arrays_allocated_inside_are_usable_after():
    with heap.lean_allocation():
        kept = np.arange(4_000_000, dtype=np.int64)  # 32 MB: above glibc's default threshold
    assert int(kept.sum()) == 4_000_000 * 3_999_999 // 2


def test_audit_outputs_do_not_depend_on_it(tmp_path):
    folder = tmp_path / "docs"
    folder.mkdir()
    base = " ".join(f"word{i}" for i in range(300))
    for i in range(12):
        (folder / f"d{i}.txt").write_text(base + f" tail{i % 4} end{i}")

    def run(tune: bool) -> str:
        result = dedup.audit([str(folder)], dedup.AuditSettings(candidates="lsh"), tune_process=tune)
        return json.dumps([result.pairs, result.clusters], sort_keys=True)

    assert run(True) == run(False)


def test_the_library_leaves_the_process_alone_by_default(tmp_path, monkeypatch):
    """No tuning unless asked for: the collector and the C library's settings are untouched."""
    import gc

    calls = []
    monkeypatch.setattr(heap, "_glibc", lambda: calls.append("glibc"))
    (tmp_path / "a.txt").write_text("one two three four five six seven")
    assert gc.isenabled()
    dedup.audit([str(tmp_path)])
    assert calls == [] and gc.isenabled() and heap._state["depth"] == 0


@pytest.mark.parametrize("enabled_before", [True, False])
def test_cycle_collection_rests_inside_and_comes_back_as_it_was(enabled_before):
    import gc

    was = gc.isenabled()
    try:
        (gc.enable if enabled_before else gc.disable)()
        with heap.lean_allocation():
            assert not gc.isenabled()
            with heap.lean_allocation():
                assert not gc.isenabled()
            assert not gc.isenabled()  # the inner exit does not restore
        assert gc.isenabled() is enabled_before
        with pytest.raises(RuntimeError), heap.lean_allocation():
            raise RuntimeError("stop")
        assert gc.isenabled() is enabled_before
    finally:
        (gc.enable if was else gc.disable)()


class _FakeLibc:
    """Records what `lean_allocation` asks of the C library; reports ``free`` bytes free."""

    def __init__(self, free: int | None) -> None:
        self.trims = 0
        if free is not None:
            self.mallinfo2 = lambda: heap._MallInfo2(fordblks=free)

    def mallopt(self, *args) -> int:
        return 1

    def malloc_trim(self, pad) -> int:
        self.trims += 1
        return 1


@pytest.mark.parametrize(
    ("free", "trims"),
    [(10 * 2**20, 0), (heap.TRIM_FREE_BYTES + 1, 1), (None, 1)],
    ids=["little-free", "much-free", "cannot-tell"],
)
def test_free_memory_is_returned_only_when_there_is_much_of_it(monkeypatch, free, trims):
    fake = _FakeLibc(free)
    monkeypatch.setattr(heap, "_glibc", lambda: fake)
    with heap.lean_allocation():
        with heap.lean_allocation():
            pass
        assert fake.trims == 0  # only the outermost exit
    assert fake.trims == trims


def test_free_heap_bytes_sees_a_freed_block():
    """Reference: glibc's own count (mallinfo2); a block freed inside stays in the heap."""
    lib = heap._glibc()
    if lib is None or not hasattr(lib, "mallinfo2"):
        pytest.skip("glibc 2.33 or later needed (mallinfo2)")
    with heap.lean_allocation():
        block = bytearray(64 * 2**20)
        before = heap._free_heap_bytes(lib)
        del block
        after = heap._free_heap_bytes(lib)
    assert after - before >= 60 * 2**20


def test_the_work_array_is_freed_before_the_heap_defaults_come_back(write_corpus, monkeypatch):
    # Freed after, its pages would go back to the system at once (and be faulted in by
    # the next audit); freed inside, the heap keeps them.
    from dedup.features import tokenize

    root = write_corpus({"a.txt": "one two three four five six", "b.txt": "one two three four five six"})
    depths = []
    real = tokenize.release_scratch

    def recording():
        depths.append(heap._state["depth"])
        real()

    monkeypatch.setattr(tokenize, "release_scratch", recording)
    dedup.audit([str(root)], tune_process=True)
    assert depths == [1]
    assert getattr(tokenize._SCRATCH, "array", None) is None
