"""Where an audit spills its intermediate data, and its removal at the end."""

from __future__ import annotations

import os
import shutil
import tempfile

import numpy as np

from .store import ByteStore

__all__ = ["WorkFolder"]


class WorkFolder:
    """A folder for one audit's spilled data.

    Parameters
    ----------
    path : str or None
        Folder to use (created if missing, must be empty of our files); None makes a
        fresh temporary folder.
    keep : bool
        Leave the folder and its files in place at the end (for inspection).
    """

    def __init__(self, path: str | None = None, keep: bool = False) -> None:
        if path is None:
            self.path = tempfile.mkdtemp(prefix="dedup-work-")
            self._created = True
        else:
            self._created = not os.path.isdir(path)
            os.makedirs(path, exist_ok=True)
            self.path = path
        self.keep = keep
        self._stores: list[ByteStore] = []
        self._files: list[str] = []

    def store(self, name: str) -> ByteStore:
        """A new byte store ``<name>.bin`` in the folder."""
        store = ByteStore(os.path.join(self.path, f"{name}.bin"))
        self._stores.append(store)
        return store

    def file(self, name: str) -> str:
        """Path of a file in the folder (removed with the folder)."""
        path = os.path.join(self.path, name)
        self._files.append(path)
        return path

    def close(self) -> None:
        """Close every store; remove the files (and the folder if we made it) unless kept."""
        for store in self._stores:
            store.close()
        if self.keep:
            # Where each stored text starts, so the kept stores can be read back.
            for store in self._stores:
                np.save(store.path[: -len(".bin")] + ".offsets.npy", store.offsets())
            return
        if self._created:
            shutil.rmtree(self.path, ignore_errors=True)
        else:
            for store in self._stores:
                store.remove()
            for path in self._files:
                if os.path.exists(path):
                    os.remove(path)

    def __enter__(self) -> WorkFolder:
        return self

    def __exit__(self, *exc) -> None:
        self.close()
