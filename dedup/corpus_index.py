"""`dedup.Index`: the persistent index as one object, for notebooks and scripts.

The index file (`dedup.index`) is what scheduled audits compare against and what
search reads. This facade gives it the four verbs a user has: build it over a corpus,
update it, search it for texts like a given one, and audit the corpus against it (the
audit then says what is new, grown or changed since the baseline). Each verb is the
function of `dedup.index` that the command line runs, so both give the same answers.
"""

from __future__ import annotations

import os
from collections.abc import Sequence

from .progress import Progress
from .settings import AuditSettings

__all__ = ["Index"]


def _paths(inputs) -> list[str]:
    """Paths only: the index records where its documents are read from."""
    if isinstance(inputs, (str, os.PathLike)):
        return [os.fspath(inputs)]
    items = list(inputs)
    if not all(isinstance(p, (str, os.PathLike)) for p in items):
        raise TypeError(
            "an index reads files and folders: give paths (rows in memory can be audited, not indexed)"
        )
    return [os.fspath(p) for p in items]


class Index:
    """An index file at ``path`` (created by `build`, or by the first `audit`).

    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (d / "leave.txt").write_text("how to request annual leave from your manager")
    >>> _ = (d / "vpn.txt").write_text("reset the vpn password from the self service page")
    >>> index = Index.build([d], d / "corpus.index")
    >>> [hit["document_id"] for hit in index.similar("request leave from my manager", k=1)]
    ['leave.txt']
    """

    def __init__(self, path: str | os.PathLike) -> None:
        self.path = os.fspath(path)

    def __repr__(self) -> str:
        return f"Index({self.path!r})"

    @classmethod
    def build(
        cls,
        inputs,
        path: str | os.PathLike,
        settings: AuditSettings | None = None,
        *,
        progress: Progress | None = None,
    ) -> Index:
        """A new index of the files and folders ``inputs`` at ``path`` (which must not hold
        one yet). Cost: reading and sketching every document once."""
        from .index import build

        index = cls(path)
        build(_paths(inputs), index.path, settings, progress=progress)
        return index

    def update(self, inputs=None, settings: AuditSettings | None = None, *, progress: Progress | None = None):
        """Bring the index up to date with ``inputs`` (default: the paths of its last run);
        a document no longer there is marked removed. Returns what the run did
        (`dedup.index.RunSummary`). Cost: reading the files changed since the last run."""
        from .index import update

        return update(_paths(inputs) if inputs is not None else None, self.path, settings, progress=progress)

    def similar(self, text: str, k: int = 10, **options) -> list[dict]:
        """The ``k`` indexed texts most like ``text``, best first (see `dedup.index.similar`
        for the fields and the ``options``: ``terms``, ``ranking``, ``snippets``)."""
        from .index import open_index, similar

        with open_index(self.path) as index:
            return similar(index, text, k, **options)

    def audit(
        self,
        inputs=None,
        settings: AuditSettings | None = None,
        *,
        accept: bool = False,
        **audit_options,
    ):
        """Audit ``inputs`` (default: the index's paths) and compare with the index.

        The result carries ``delta`` (clusters new, grown, changed or gone since the
        baseline, else the last audit) and the stored review decisions; the audit is
        recorded in the index (``accept``: as the new baseline). Other keywords go to
        `dedup.audit`. Returns the `dedup.AuditResult`.
        """
        from .api import audit
        from .index import track_audit

        paths = _paths(inputs) if inputs is not None else self._recorded_paths()
        result = audit(paths, settings, **audit_options)
        result.delta, _ = track_audit(self.path, result, accept=accept)
        return result

    def _recorded_paths(self) -> Sequence[str]:
        from .index import open_index
        from .index.indexing import index_paths

        if not os.path.exists(self.path):
            raise FileNotFoundError(f"no index at {self.path}: give the paths to audit")
        with open_index(self.path) as index:
            paths = index_paths(index)
        if not paths:
            raise ValueError(f"the index {self.path} records no paths: give the paths to audit")
        return paths
