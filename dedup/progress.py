"""Progress of long stages, for people watching a terminal.

The library only calls a `Progress` object; it never prints. `Progress.silent()` does
nothing; `StderrProgress` draws one line per stage on stderr, only when stderr is a
terminal (so logs and pipelines stay clean).
"""

from __future__ import annotations

import sys
import time
from typing import TextIO

__all__ = ["Progress", "StderrProgress"]


class Progress:
    """Receives stage starts, advances and ends; the base class ignores them."""

    def start(self, stage: str, total: int | None = None) -> None:  # noqa: B027 - intentionally empty
        pass

    def advance(self, n: int = 1) -> None:  # noqa: B027
        pass

    def done(self, note: str = "") -> None:  # noqa: B027
        pass

    @staticmethod
    def silent() -> Progress:
        return Progress()


class StderrProgress(Progress):
    """One updating line per stage on a terminal: ``reading  1,204/5,000``."""

    def __init__(self, stream: TextIO | None = None, min_interval: float = 0.1) -> None:
        self.stream = stream or sys.stderr
        self.enabled = bool(getattr(self.stream, "isatty", lambda: False)())
        self.min_interval = min_interval
        self._stage = ""
        self._total: int | None = None
        self._count = 0
        self._last = 0.0
        self._started = 0.0

    def _draw(self, final: bool = False, note: str = "") -> None:
        if not self.enabled:
            return
        count = (
            f"{self._count:,}" + (f"/{self._total:,}" if self._total else "")
            if self._count or self._total
            else ""
        )
        elapsed = time.monotonic() - self._started
        line = f"\r{self._stage:<12} {count:>20}  {elapsed:6.1f}s {note}"
        self.stream.write(line + ("\n" if final else ""))
        self.stream.flush()

    def start(self, stage: str, total: int | None = None) -> None:
        self._stage, self._total, self._count = stage, total, 0
        self._started = self._last = time.monotonic()
        self._draw()

    def advance(self, n: int = 1) -> None:
        self._count += n
        now = time.monotonic()
        if now - self._last >= self.min_interval:
            self._last = now
            self._draw()

    def done(self, note: str = "") -> None:
        if self._total is not None:
            self._count = max(self._count, self._total)
        self._draw(final=True, note=note)
