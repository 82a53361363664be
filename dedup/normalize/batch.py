"""Normalize a batch of documents: the normalize stage as one function over a batch.

Each document leaves with ``doc.prepared`` = (original UTF-8 bytes, canonical form,
characters of the canonical text, content hash). The canonical form is the canonical
lines joined by LF when templates are found by line, else the canonical text (joined by
spaces); the content hash is always taken over the canonical text. The batch runs where
the documents are read (in worker processes when there are workers), so the text
crosses between processes once.

Cost: O(bytes of the batch), in one compiled pass (`CanonicalJob`) plus the few texts
only Python can normalize.
"""

from __future__ import annotations

import numpy as np

from .canonical_bytes import CanonicalJob
from .exact import content_hash

__all__ = ["prepare_documents", "PreparedBatch"]


def prepare_documents(documents: list, parallel: bool = False, lines: bool = True) -> None:
    """Normalize ``documents`` in place (see the module notes); ``doc.text`` is emptied
    (the bytes carry it)."""
    PreparedBatch(documents, lines).finish(parallel=parallel)


class PreparedBatch:
    """`prepare_documents` in two steps: `compiled` (the kernel's pass, which needs no
    interpreter lock, so it may run in another thread while the caller reads on) and
    `finish` (the few texts only Python can normalize, the content hashes, then each
    document's ``prepared``)."""

    def __init__(self, documents: list, lines: bool) -> None:
        self.documents, self.lines = documents, lines
        self.originals = [
            doc.text.encode("utf-8", "surrogatepass") if doc.utf8 is None else doc.utf8 for doc in documents
        ]
        self.job = CanonicalJob([doc.text for doc in documents], self.originals, b"\n" if lines else b" ")

    def compiled(self, parallel: bool = True, spare: np.ndarray | None = None) -> tuple:
        """The kernel's pass over the batch (see `CanonicalJob.run`)."""
        return self.job.run(parallel, spare)

    def finish(self, ran: tuple | None = None, parallel: bool = True) -> None:
        """Fill in ``doc.prepared`` from what `compiled` returned (run here when not given)."""
        lines = self.lines
        out, starts, lengths, chars_of, fixed = self.job.finish(
            ran if ran is not None else self.compiled(parallel), parallel
        )
        ends = (starts + lengths).tolist()
        for k, (doc, original, a, b, characters) in enumerate(
            zip(self.documents, self.originals, starts.tolist(), ends, chars_of)
        ):
            stored = fixed[k] if k in fixed else out[a:b].tobytes()
            # The content hash is taken over the canonical text: the lines joined by spaces.
            doc.prepared = (
                original,
                stored,
                characters,
                content_hash(stored.replace(b"\n", b" ") if lines else stored),
            )
            doc.text, doc.utf8 = "", None
