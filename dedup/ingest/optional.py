"""Parsers of the ``dedup[docs]`` extra, imported only when a file needs them.

Without the extra the run goes on: each file that needs a missing parser is skipped
with the reason "install dedup[docs] to read .docx", and the run never pays for
importing parsers it does not use.
"""

from __future__ import annotations

import importlib
from types import ModuleType

__all__ = ["MissingParser", "load", "EXTRA"]

EXTRA = "dedup[docs]"


class MissingParser(Exception):
    """A file needs a parser that is not installed; the message says what to install."""


def load(module: str, extension: str) -> ModuleType:
    """Import ``module`` or raise `MissingParser` naming the extra and the file type.

    >>> load("no_such_parser_module", ".docx")
    Traceback (most recent call last):
    ...
    dedup.ingest.optional.MissingParser: install dedup[docs] to read .docx
    """
    try:
        return importlib.import_module(module)
    except ImportError:
        raise MissingParser(f"install {EXTRA} to read {extension}") from None
