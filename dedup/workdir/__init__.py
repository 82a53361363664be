"""The work folder: bulky intermediate data spilled to disk so memory stays bounded.

An audit streams its documents once; what later stages need again (the canonical texts
to shingle, the original texts for the report's evidence, the MinHash signatures) is
appended to files here instead of being held in memory. The folder is removed when the
audit ends unless the caller keeps it (``--keep-work``) to inspect it.
"""

from .folder import WorkFolder
from .store import ByteStore

__all__ = ["WorkFolder", "ByteStore"]
