"""How far an archive may expand: the defence against zip bombs.

An archive gets an allowance of uncompressed bytes: ``max_archive_ratio`` times its own
size (at least `ARCHIVE_RATIO_FLOOR`, so that a tiny archive of repetitive text still
opens), and never more than ``max_archive_bytes``. An archive nested inside another
draws from both its own allowance and its parent's, so nesting cannot multiply the
total. Every byte that comes out of a decompressor is counted, not the sizes an
archive declares, because a hostile archive declares whatever it likes.
"""

from __future__ import annotations

from .options import ReadOptions

__all__ = ["ExpansionBudget", "ExpansionExceeded", "ARCHIVE_RATIO_FLOOR"]

ARCHIVE_RATIO_FLOOR = 1_000_000


class ExpansionExceeded(Exception):
    """Reading on would expand the archive beyond its allowance; the message says which limit."""


class ExpansionBudget:
    """Uncompressed bytes an archive (and the archives inside it) may still produce."""

    def __init__(self, compressed_size: int, opts: ReadOptions, parent: ExpansionBudget | None = None):
        self.opts = opts
        self.parent = parent
        by_ratio = max(int(opts.max_archive_ratio * max(compressed_size, 0)), ARCHIVE_RATIO_FLOOR)
        self.allowed = min(by_ratio, opts.max_archive_bytes)
        self._by_ratio = by_ratio < opts.max_archive_bytes
        self.used = 0

    def remaining(self) -> int:
        """Bytes that may still be expanded here (and in every enclosing archive)."""
        own = self.allowed - self.used
        return own if self.parent is None else min(own, self.parent.remaining())

    def why(self) -> str:
        """The limit that binds, in words, with the option that raises it."""
        if self.parent is not None and self.parent.remaining() < self.allowed - self.used:
            return self.parent.why()
        if self._by_ratio:
            return (
                f"it would expand beyond {self.opts.max_archive_ratio:g} times its size "
                f"({self.allowed:,} bytes; a zip bomb?) (raise --max-archive-ratio)"
            )
        return f"it would expand beyond {self.allowed:,} bytes (raise --max-archive-bytes)"

    def take(self, count: int) -> None:
        """Count ``count`` expanded bytes; raise `ExpansionExceeded` past the allowance."""
        self.used += count
        if self.parent is not None:
            self.parent.take(count)
        if self.used > self.allowed:
            raise ExpansionExceeded(self.why())

    def child(self, compressed_size: int) -> ExpansionBudget:
        """The budget of an archive nested in this one."""
        return ExpansionBudget(compressed_size, self.opts, self)
