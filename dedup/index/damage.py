"""Recognising a damaged index before it is used: its settings row, and its pages before a write.

Two checks, both cheap next to the work they guard:

`stored_settings`
    The ``meta`` row ``settings`` must be a JSON object whose values have the types the
    settings declare and pass `AuditSettings.validate`, with every sketch setting
    present: a row that does not is damage, not a reason to fall back to defaults
    (sketches made with other settings would be mixed with the stored ones). Run when
    an index is opened and whenever its settings are read.
`page_problems`
    SQLite's ``PRAGMA integrity_check`` over the whole file, run inside every write
    transaction before anything is written (`dedup.index.store.Index.writing`): a write
    into a file whose b-tree pages are damaged can spread the damage to pages that were
    sound. It is the check ``dedup index info --check`` runs, so no write goes into a
    file that command calls damaged. Its cost grows with the file: measured on a
    20,000-document index (133 MB, the ``benchmarks.index_speed`` corpus) it takes 0.09
    to 0.17 s with the file in the page cache and 0.67 s from disk. ``PRAGMA
    quick_check`` (which does not compare indexes with their tables) takes 0.06 to
    0.12 s and the same 0.6 s from disk: both read every page, and no check that reads
    less can find damage anywhere a write may reach (a write may take any free page).
    On that index an update with nothing changed goes from 0.37 to 0.53 s and a
    decisions import from 0.02 to 0.14 s; the audit that ``dedup audit --index`` runs
    first takes far longer. Worth it to keep a damaged file from getting worse.

Both raise or return in words; `dedup.index.store.Index.guard` turns `StoredValueError`
(and SQLite's own errors) into the one-line `IndexFileError` the command line reports.
"""

from __future__ import annotations

import dataclasses
import functools
import json
import sqlite3
import types
import typing
from collections.abc import Iterable
from typing import Any

from ..settings import AuditSettings, SettingsError

__all__ = ["StoredValueError", "stored_settings", "page_problems"]

# How many problems the integrity check reports before it stops (all are named in one line).
MAX_PROBLEMS = 3


class StoredValueError(ValueError):
    """A value stored in the index does not read back as what was written: the file is damaged."""


@functools.lru_cache(maxsize=1)
def _setting_types() -> dict[str, Any]:
    """Each setting's declared type (``int | None``, ``tuple[str, ...]`` …), evaluated once."""
    return typing.get_type_hints(AuditSettings)


def _fits(value: object, hint: Any) -> bool:
    """Whether a JSON value has the declared type: a bool is not a number, a list stands for a tuple."""
    origin, args = typing.get_origin(hint), typing.get_args(hint)
    if origin in (typing.Union, types.UnionType):
        return any(_fits(value, arg) for arg in args)
    if origin is tuple:
        return isinstance(value, list) and all(_fits(item, args[0]) for item in value)
    if hint is type(None):
        return value is None
    if hint is float:
        return isinstance(value, (int, float)) and not isinstance(value, bool)
    if hint is int:
        return isinstance(value, int) and not isinstance(value, bool)
    return isinstance(value, hint) if isinstance(hint, type) else True


def stored_settings(text: str | None, required: Iterable[str]) -> AuditSettings:
    """The settings an index records (others at their defaults), checked.

    Parameters
    ----------
    text : str or None
        The ``meta`` row ``settings`` (None: the row is missing).
    required : iterable of str
        Settings the row must hold (the sketch settings: they say what the stored
        sketches are, so a default must never stand in for them).

    Raises
    ------
    StoredValueError
        The row is missing, not JSON, not an object, lacks a required setting, or holds
        a value of the wrong type or one the settings refuse. Keys that are not settings
        (of an older dedup) are left out.

    Notes
    -----
    Cost: parsing a JSON object of about forty keys.
    """
    if text is None:
        raise StoredValueError("it has no settings row")
    try:
        stored = json.loads(text)
    except (ValueError, RecursionError):
        raise StoredValueError("its settings row is not JSON") from None
    if not isinstance(stored, dict):
        raise StoredValueError("its settings row is not a JSON object")
    missing = [key for key in required if key not in stored]
    if missing:
        raise StoredValueError(f"its settings row lacks {', '.join(missing)}")
    if "tfidf_features" in stored and stored["tfidf_features"] is None:
        # Left unset, the setting is the engine's choice: an index records the number it chose.
        raise StoredValueError("its settings row holds tfidf_features = null, not a number of columns")
    hints = _setting_types()
    known = {f.name for f in dataclasses.fields(AuditSettings)}
    values = {}
    for key in sorted(known & stored.keys()):
        if not _fits(stored[key], hints[key]):
            raise StoredValueError(
                f"its settings row holds {key} = {_shown(stored[key])}, which is not {_type_name(hints[key])}"
            )
        values[key] = tuple(stored[key]) if isinstance(stored[key], list) else stored[key]
    try:
        return AuditSettings().replace(**values).validate()
    except SettingsError as err:
        raise StoredValueError(f"its settings row holds a setting dedup refuses: {err}") from None


def _type_name(hint: Any) -> str:
    return hint.__name__ if isinstance(hint, type) else str(hint)


def _shown(value: object, limit: int = 40) -> str:
    """A short JSON form of a value for a message."""
    text = json.dumps(value, ensure_ascii=True)
    return text if len(text) <= limit else text[: limit - 1] + "…"


def page_problems(connection: sqlite3.Connection) -> list[str]:
    """What SQLite's integrity check finds wrong with the file's pages (empty: nothing).

    At most `MAX_PROBLEMS` are named. A file too damaged for the check to run raises
    ``sqlite3.DatabaseError`` instead. Cost: one read of every page (see the module notes).
    """
    rows = connection.execute(f"PRAGMA integrity_check({MAX_PROBLEMS})").fetchall()
    if [row[0] for row in rows] == ["ok"]:
        return []
    # A row may hold several lines, headed by the database's name ("*** in database main ***").
    lines = [line.strip() for row in rows for line in str(row[0]).splitlines()]
    found = [line for line in lines if line and not line.startswith("***")]
    return found[:MAX_PROBLEMS] if found else ["SQLite's integrity check fails"]
