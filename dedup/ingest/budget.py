"""How much an input may cost: archive expansion (zip bombs) and readers' work.

An archive, or a single compressed file (``.gz``, ``.bz2``, ``.xz``, ``.zst``), gets an
allowance of uncompressed bytes: ``max_archive_ratio`` times its own size (at least
`ARCHIVE_RATIO_FLOOR`, so that a tiny archive of repetitive text still opens), and
never more than ``max_archive_bytes``. An archive nested inside another
draws from both its own allowance and its parent's, so nesting cannot multiply the
total. Every byte that comes out of a decompressor is counted, not the sizes an
archive declares, because a hostile archive declares whatever it likes.

A reader that walks a text in Python steps (the HTML tokenizer) counts its steps
against a `WorkBudget` proportional to the text's length, so that no single file can
hold an audit up: past the budget the file is skipped "too costly to read", and the
run goes on. The readers are written to be linear; the budget is the safety net that
turns a mistake into one skipped file instead of a stalled run.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

if TYPE_CHECKING:  # options.py takes its default work budget from here
    from .options import ReadOptions

__all__ = [
    "ExpansionBudget",
    "ExpansionExceeded",
    "MemberTally",
    "ARCHIVE_RATIO_FLOOR",
    "WorkBudget",
    "TooCostly",
    "WORK_PER_CHAR",
    "WORK_FLOOR",
]

ARCHIVE_RATIO_FLOOR = 1_000_000
# Steps a reader may take per character of its text, and at least. The HTML tokenizer
# takes about 1-3 steps per character on real pages (every character it examines, plus
# one per token); 64 leaves ample room and still stops anything quadratic early.
WORK_PER_CHAR = 64
WORK_FLOOR = 100_000


class ExpansionExceeded(Exception):
    """Reading on would expand the archive beyond its allowance; the message says which limit."""


class MemberTally:
    """Archive members taken in by a whole run, all archives together (``max_run_members``)."""

    __slots__ = ("limit", "count")

    def __init__(self, limit: int) -> None:
        self.limit, self.count = limit, 0


class ExpansionBudget:
    """Uncompressed bytes an archive (and the archives inside it) or a compressed file may
    still produce, and the members it may still hold (its own ``max_archive_members``,
    and the run's tally)."""

    def __init__(
        self,
        compressed_size: int,
        opts: ReadOptions,
        parent: ExpansionBudget | None = None,
        tally: MemberTally | None = None,
        bomb: str = "a zip bomb?",
    ):
        self.opts = opts
        self.bomb = bomb  # what an input that expands beyond its ratio may be, in the reason
        self.parent = parent
        self.members = 0
        if tally is None:
            tally = parent.tally if parent is not None else MemberTally(opts.max_run_members)
        self.tally = tally
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
                f"({self.allowed:,} bytes; {self.bomb}) (raise --max-archive-ratio)"
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
        """The budget of an archive nested in this one (members counted on its own, and
        in the run's tally)."""
        return ExpansionBudget(compressed_size, self.opts, self)

    def admit_member(self) -> str:
        """Count one more member of this archive; ``""``, or why it and the rest of the
        archive are not taken in (the archive's limit or the run's, with the option)."""
        if self.members >= self.opts.max_archive_members:
            return self.too_many_members()
        if self.tally.count >= self.tally.limit:
            return (
                f"the run has taken in {self.tally.limit:,} archive members, its limit "
                "(raise --max-run-members)"
            )
        self.members += 1
        self.tally.count += 1
        return ""

    def too_many_members(self) -> str:
        """Reason for an archive found to hold more members than ``max_archive_members``."""
        return (
            f"it holds more than {self.opts.max_archive_members:,} members, the limit "
            "(a member bomb?) (raise --max-archive-members)"
        )


class TooCostly(Exception):
    """A reader would take more steps on one input than its `WorkBudget` allows."""


class WorkBudget:
    """Steps a reader may take on one text: ``per_char`` per character, at least ``floor``.

    Readers call `spend` as they go (a step is a character examined or a token made);
    past the limit it raises `TooCostly`, whose message is the ledger reason. Cost: one
    addition and one comparison per call.
    """

    __slots__ = ("limit", "spent", "what", "chars")

    def __init__(self, chars: int, what: str, per_char: int = WORK_PER_CHAR, floor: int = WORK_FLOOR):
        self.chars, self.what = chars, what
        self.limit = max(per_char * chars, floor)
        self.spent = 0

    def spend(self, steps: int) -> None:
        """Count ``steps``; raise `TooCostly` past the limit."""
        self.spent += steps
        if self.spent > self.limit:
            raise TooCostly(
                f"too costly to read ({self.what} took more than {self.limit:,} steps "
                f"for {self.chars:,} characters)"
            )
