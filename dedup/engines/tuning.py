"""Opt-in process tuning for the local engine: reuse freed memory, no huge pages, no cyclic GC.

Nothing here runs unless asked for: ``dedup.audit(..., tune_process=True)`` or the CLI
(which owns its process) turn it on for the duration of one audit and its writing, and
put every setting back as it was afterwards. A library host (a notebook, a web service,
a Spark executor) gets none of it by default.

The audit works chunk by chunk: each chunk allocates arrays of tens to hundreds of
megabytes (word hashes, shingles, room reserved for the most a text can hold), frees
them, and the next chunk allocates them again. Two defaults made that costly:

- glibc serves an allocation above its mapping threshold with fresh zeroed pages and
  unmaps it on free, so every chunk page-faulted its arrays in again;
- numpy asks for transparent huge pages on large arrays, so the first touch of each
  2 MB of an array, however little of it is used, zeroes all of it.

On the speed benchmark's corpus that was 0.3 to 1.5 s of system time in an audit of
1.5 to 3 s, most of it zeroing pages, and varying widely from run to run.

A third cost is Python's cyclic garbage collector: an audit keeps a record per document
and a ledger entry per input, and each full collection walks all of them again, though
the audit makes no reference cycles worth collecting (about 5% of an audit's time).

`lean_allocation` raises glibc's mapping and trim thresholds (``M_MMAP_THRESHOLD``,
``M_TRIM_THRESHOLD``) so freed arrays stay in the heap for the next chunk, and turns
numpy's huge-page advice off; on exit it puts back glibc's default values and numpy's
advice and returns the free memory to the system (``malloc_trim``) when there is more
of it than `TRIM_FREE_BYTES`. (Once set, glibc's
mapping threshold stays at its value instead of adapting upwards as it does in a new
process: a later large array is mapped afresh, as before the first adaptation.) Where
the C library is not glibc only the numpy part applies. It also pauses the cyclic
collector (``gc.disable``) and puts it back as it was on exit; reference counting still
frees everything else as usual.
"""

from __future__ import annotations

import contextlib
import ctypes
import ctypes.util
import functools
import gc
import threading
from collections.abc import Iterator

__all__ = ["lean_allocation"]

# mallopt parameters of glibc's <malloc.h>, and glibc's defaults for them.
_M_TRIM_THRESHOLD = -1
_M_MMAP_THRESHOLD = -3
_DEFAULT_THRESHOLD = 128 * 1024

# Whether the cyclic garbage collector rests while inside (see the module notes).
PAUSE_CYCLE_COLLECTION = True
# Free heap memory is returned to the system on exit only beyond this much: returning it
# costs time in proportion (15 to 30 ms for the 100 MB an audit of 8,500 files leaves),
# and below it the memory is as likely to serve the next audit of the process, which
# would otherwise fault all of it in again (an audit of 8,500 files leaves 300 to 380 MB;
# returned, the next audit spent about 0.06 s more in the system).
TRIM_FREE_BYTES = 512 * 2**20

_LOCK = threading.Lock()
_state = {"depth": 0, "numpy_advice": None}


@functools.cache
def _glibc():
    # Looked up once: find_library may run ldconfig or a compiler to find the library.
    try:
        name = ctypes.util.find_library("c")
        lib = ctypes.CDLL(name) if name else None
        # Only glibc has gnu_get_libc_version; the thresholds are glibc's.
        if lib is None or not all(
            hasattr(lib, f) for f in ("mallopt", "malloc_trim", "gnu_get_libc_version")
        ):
            return None
    except OSError:
        return None
    return lib


class _MallInfo2(ctypes.Structure):
    # glibc's struct mallinfo2 (glibc 2.33 and later): every field a size_t.
    _fields_ = [
        (name, ctypes.c_size_t)
        for name in (
            "arena",
            "ordblks",
            "smblks",
            "hblks",
            "hblkhd",
            "usmblks",
            "fsmblks",
            "uordblks",
            "fordblks",
            "keepcost",
        )
    ]


def _free_heap_bytes(lib) -> int:
    """Bytes free in the heap (glibc's ``mallinfo2().fordblks``); when the C library cannot
    tell, more than any threshold, so that the memory is returned."""
    query = getattr(lib, "mallinfo2", None)
    if query is None:
        return 1 << 62
    query.restype = _MallInfo2
    return int(query().fordblks)


def _numpy_advice_setter():
    try:
        from numpy._core import multiarray
    except ImportError:  # numpy < 2
        from numpy.core import multiarray
    return getattr(multiarray, "_set_madvise_hugepage", None)


@contextlib.contextmanager
def lean_allocation(largest_reused: int = 1 << 30) -> Iterator[None]:
    """Keep freed blocks of up to ``largest_reused`` bytes for reuse, no huge pages for
    numpy arrays and no cyclic garbage collection while inside. Nested and concurrent
    uses share one setting; the outermost exit restores the defaults and returns free
    memory to the system (when more than `TRIM_FREE_BYTES` is free)."""
    lib = _glibc()
    advise = _numpy_advice_setter()
    with _LOCK:
        _state["depth"] += 1
        if _state["depth"] == 1:
            if lib is not None:
                lib.mallopt(_M_MMAP_THRESHOLD, ctypes.c_int(largest_reused))
                lib.mallopt(_M_TRIM_THRESHOLD, ctypes.c_int(2 * largest_reused - 1))
            if advise is not None:
                _state["numpy_advice"] = advise(False)
            if PAUSE_CYCLE_COLLECTION:
                _state["collecting"] = gc.isenabled()
                gc.disable()
    try:
        yield
    finally:
        with _LOCK:
            _state["depth"] -= 1
            if _state["depth"] == 0:
                if _state.pop("collecting", False):
                    gc.enable()
                if advise is not None and _state["numpy_advice"] is not None:
                    advise(_state["numpy_advice"])
                if lib is not None:
                    lib.mallopt(_M_MMAP_THRESHOLD, ctypes.c_int(_DEFAULT_THRESHOLD))
                    lib.mallopt(_M_TRIM_THRESHOLD, ctypes.c_int(_DEFAULT_THRESHOLD))
                    if _free_heap_bytes(lib) > TRIM_FREE_BYTES:
                        lib.malloc_trim(ctypes.c_size_t(0))
