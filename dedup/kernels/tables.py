"""Character tables kept on disk between runs.

The kernels look characters up in tables over the Unicode code points (letters and
digits, case folds, NFKC replacements). Building one walks up to 1.1 million code points
in Python, a few hundred milliseconds that every fresh process would pay again before
reading a byte. A table is built once per Python Unicode database version and table
version, and kept as a ``.npy`` file in the cache folder: ``$DEDUP_CACHE_DIR``, else
``$XDG_CACHE_HOME/dedup``, else ``~/.cache/dedup``. A folder that cannot be written only
means the table is built again next time.
"""

from __future__ import annotations

import os
import tempfile
import unicodedata
from collections.abc import Callable

import numpy as np

__all__ = ["stored_table", "cache_folder"]


def cache_folder() -> str:
    """Where tables are kept (see the module notes)."""
    if os.environ.get("DEDUP_CACHE_DIR"):
        return os.environ["DEDUP_CACHE_DIR"]
    base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    return os.path.join(base, "dedup")


def stored_table(name: str, version: int, build: Callable[[], np.ndarray]) -> np.ndarray:
    """The table ``name`` as ``build()`` makes it, read from the cache folder when it was
    kept there for this Unicode database and ``version`` (raise ``version`` when ``build``
    changes). Cost: one read of the file (about a millisecond), or ``build()`` once."""
    path = os.path.join(cache_folder(), f"{name}-v{version}-unicode{unicodedata.unidata_version}.npy")
    try:
        return np.load(path, allow_pickle=False)
    except (OSError, ValueError):
        pass
    table = build()
    _keep(path, table)
    return table


def _keep(path: str, table: np.ndarray) -> None:
    # Written under a temporary name and renamed, so a reader never sees half a table.
    try:
        os.makedirs(os.path.dirname(path), exist_ok=True)
        handle, temporary = tempfile.mkstemp(dir=os.path.dirname(path), suffix=".tmp")
        with os.fdopen(handle, "wb") as out:
            np.save(out, table, allow_pickle=False)
        os.replace(temporary, path)
    except OSError:
        return
