"""Opening an index file: recognising it, creating it, migrating it, and its transactions.

Reliability rests on SQLite: the file is in WAL mode, so readers (an audit, a search)
keep reading a consistent snapshot while one writer works, and every write of ours is
one transaction (``BEGIN IMMEDIATE`` … ``COMMIT``), so a process killed at any point
leaves the file as it was before that write or as it is after it, never in between.
``synchronous = FULL`` makes a commit survive a power cut too.

What is refused, with a one-line `IndexFileError` (the command line exits with code 2):
a path that is not an SQLite file, an SQLite file of another program, a file written by
a newer dedup (higher schema version), a damaged file, and settings that would mix
sketches built differently (`IndexSettingsError`). A damaged file is one whose pages
SQLite cannot read, whose settings row or schema version does not read back
(`dedup.index.damage.stored_settings`, checked when it is opened), or whose stored JSON
or blobs do not decode; every write transaction first runs SQLite's integrity check
(`dedup.index.damage.page_problems`) and writes nothing into a file that fails it.
Damage is never repaired in place: the message says to build a new index. A file of an
older version is migrated when opened (`dedup.index.schema.MIGRATIONS`); a search of an
index whose sketches a migration left to be made again names the command that makes them.
"""

from __future__ import annotations

import contextlib
import dataclasses
import inspect
import json
import os
import re
import sqlite3
import time
from collections.abc import Iterator
from typing import Any

from .. import __version__
from ..settings import INDEX_TFIDF_FEATURES, AuditSettings
from . import schema
from .blobs import BlobError
from .damage import StoredValueError, page_problems, stored_settings

__all__ = [
    "Index",
    "IndexFileError",
    "IndexSettingsError",
    "IndexBusyError",
    "index_choices",
    "open_index",
    "SKETCH_KEYS",
    "TEMPLATE_KEYS",
    "read_keys",
    "utc_now",
]

# Settings that decide what a stored sketch is; signatures or term columns made with
# other values cannot be compared with the stored ones.
SKETCH_KEYS = (
    "shingle_size",
    "char_ngrams",
    "hash_scheme",
    "num_perm",
    "seed",
    "tfidf_features",
    "sublinear_tf",
)
# Settings that decide which lines are template lines and how they are left out. They are
# recorded (an update keeps them) but may change: the texts they change are sketched again.
TEMPLATE_KEYS = (
    "boilerplate",
    "boilerplate_share",
    "boilerplate_min_texts",
    "boilerplate_max_text_share",
    "ignore_text_file",
)
# Larger pages make the long blobs (shingles, postings) cheaper to read and write.
PAGE_SIZE = 16384
# How long a writer waits for another writer to finish before giving up.
BUSY_SECONDS = 600.0
# What a message about a damaged index tells to do (the file is never repaired in place).
REBUILD = "move it aside and build a new index with 'dedup index build'"


class IndexFileError(Exception):
    """The index file cannot be used; the message says why in one line."""


class IndexSettingsError(IndexFileError):
    """Settings that differ from those the index was built with, where mixing is unsafe."""


class IndexBusyError(IndexFileError):
    """Another process holds the index for writing longer than we wait."""


def utc_now() -> str:
    """Current time as ISO 8601 UTC with seconds, e.g. ``2024-05-01T12:00:00Z``."""
    return time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime())


def read_keys() -> tuple[str, ...]:
    """Settings that say which documents are read: those `iter_documents` takes.

    Found by name, so an option added to both the settings and the reader is recorded
    and passed on without a change here.
    """
    from ..ingest import iter_documents

    names = set(inspect.signature(iter_documents).parameters) - {"roots", "ledger", "stdin"}
    return tuple(f.name for f in dataclasses.fields(AuditSettings) if f.name in names)


def index_choices(settings: AuditSettings, stored: AuditSettings | None = None) -> AuditSettings:
    """``settings`` with the index's choice for what they leave to the engine.

    A ``tfidf_features`` left unset (None) becomes the number ``stored`` (the index's own
    settings) records, or `dedup.settings.INDEX_TFIDF_FEATURES` (2**20 hashed columns)
    for a new index (``stored`` None): the index's term columns must stay those of its
    stored counts, whatever an audit's default is. A number given stays as it is (and
    `Index.check_settings` refuses one that differs from the stored one).

    >>> index_choices(AuditSettings()).tfidf_features == INDEX_TFIDF_FEATURES
    True
    >>> index_choices(AuditSettings(), AuditSettings(tfidf_features=4096)).tfidf_features
    4096
    >>> index_choices(AuditSettings(tfidf_features=0), AuditSettings(tfidf_features=4096)).tfidf_features
    0
    """
    if settings.tfidf_features is not None:
        return settings
    features = INDEX_TFIDF_FEATURES if stored is None else stored.tfidf_features
    return settings.replace(tfidf_features=features)


def _index_settings(settings: AuditSettings, stored: AuditSettings | None = None) -> dict[str, Any]:
    """The settings an index records (``stored``: its own, for what ``settings`` leave unset)."""
    data = index_choices(settings, stored).to_dict()
    return {key: data[key] for key in (*SKETCH_KEYS, *TEMPLATE_KEYS, *read_keys())}


class Index:
    """An open index file. Use `open_index` to get one; close it (or use ``with``).

    Attributes
    ----------
    path : str
    connection : sqlite3.Connection
        In autocommit mode: every transaction is opened explicitly by `writing` or
        `reading`.
    """

    def __init__(self, path: str, connection: sqlite3.Connection) -> None:
        self.path = path
        self.connection = connection

    # -- lifetime -----------------------------------------------------------------------
    def close(self) -> None:
        self.connection.close()

    def __enter__(self) -> Index:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    # -- transactions -------------------------------------------------------------------
    @contextlib.contextmanager
    def writing(self) -> Iterator[sqlite3.Connection]:
        """One write transaction: all of it is committed, or none of it.

        ``BEGIN IMMEDIATE`` takes the write lock at once (waiting up to `BUSY_SECONDS`
        for another writer), so two updates never interleave. Under the lock, SQLite's
        integrity check runs first (`dedup.index.damage.page_problems`: one read of the
        file, 0.1 to 0.7 s for 20,000 documents); a damaged file is refused with nothing
        written.
        """
        with self.guard():
            self.connection.execute("BEGIN IMMEDIATE")
            try:
                problems = page_problems(self.connection)
                if problems:
                    raise IndexFileError(self.damaged("; ".join(problems) + "; nothing was written to it"))
                yield self.connection
            except BaseException:
                self.connection.execute("ROLLBACK")
                raise
            self.connection.execute("COMMIT")

    @contextlib.contextmanager
    def reading(self) -> Iterator[sqlite3.Connection]:
        """One read transaction: every query inside it sees the same committed state."""
        with self.guard():
            self.connection.execute("BEGIN")
            try:
                yield self.connection
            finally:
                self.connection.execute("COMMIT")

    @contextlib.contextmanager
    def guard(self) -> Iterator[None]:
        """Turn SQLite's errors, and stored values that do not decode (blobs, JSON, the settings
        row), into one-line `IndexFileError` messages."""
        try:
            yield
        except sqlite3.OperationalError as err:
            text = str(err)
            if "locked" in text or "busy" in text:
                raise IndexBusyError(
                    f"the index {self.path} is being written by another process; try again when it is done"
                ) from err
            if text.startswith("Could not decode"):  # the text would follow: it is not UTF-8
                raise IndexFileError(self.damaged("a stored text is not UTF-8")) from err
            raise IndexFileError(f"cannot use the index {self.path}: {_one_line(text)}") from err
        except (sqlite3.DatabaseError, BlobError, StoredValueError) as err:
            raise IndexFileError(self.damaged(_one_line(str(err)))) from err
        except json.JSONDecodeError as err:
            raise IndexFileError(self.damaged(f"a stored JSON value does not parse ({err})")) from err

    def damaged(self, detail: str) -> str:
        """The message for a damaged index: what is wrong and what to do."""
        return f"the index {self.path} is damaged: {detail}; {REBUILD}"

    # -- what the index is --------------------------------------------------------------
    def meta(self, key: str) -> str | None:
        row = self.connection.execute("SELECT value FROM meta WHERE key = ?", (key,)).fetchone()
        return None if row is None else row[0]

    @property
    def settings(self) -> AuditSettings:
        """The settings the index was built with (others at their defaults).

        Raises
        ------
        IndexFileError
            The settings row is missing or does not read back (`dedup.index.damage.stored_settings`).
        """
        with self.guard():
            return stored_settings(self.meta("settings"), SKETCH_KEYS)

    def check_settings(self, settings: AuditSettings, stored: AuditSettings | None = None) -> None:
        """Refuse settings whose sketches could not be compared with the stored ones
        (``stored``: the index's settings, when already read). A setting left to the engine
        (``tfidf_features`` None) takes the stored value (`index_choices`), so it never differs.

        Raises
        ------
        IndexSettingsError
            Naming every setting that differs, with both values.
        """
        stored = stored or self.settings
        stored, given = _index_settings(stored), _index_settings(settings, stored)
        differ = [key for key in SKETCH_KEYS if stored[key] != given[key]]
        if differ:
            words = ", ".join(f"{key} {stored[key]!r} (given {given[key]!r})" for key in differ)
            raise IndexSettingsError(
                f"the index {self.path} was built with {words}; sketches made with other settings cannot be "
                "mixed with its own: leave these options out, or build a new index"
            )

    def store_settings(self, settings: AuditSettings) -> None:
        """Record the settings (inside a write transaction): the reading options may change;
        what they leave unset keeps the stored value (`index_choices`)."""
        self.connection.execute(
            "UPDATE meta SET value = ? WHERE key = 'settings'",
            (json.dumps(_index_settings(settings, self.settings), sort_keys=True),),
        )

    def require_sketched(self) -> None:
        """Refuse to use the stored sketches while a migration has left them to be made again.

        Raises
        ------
        IndexFileError
            Naming the command that makes them (``dedup index update``).
        """
        with self.guard():
            reason = self.meta(schema.NEEDS_UPDATE)
        if reason is not None:
            raise IndexFileError(
                f"the index {self.path} has no sketches yet ({reason}): run 'dedup index update' once "
                "to read and sketch its documents again"
            )


def _one_line(text: str, limit: int = 300) -> str:
    """An error's text on one line and not too long (SQLite quotes stored values in some)."""
    text = " ".join(text.split())
    return text if len(text) <= limit else text[: limit - 1] + "…"


def _connect(path: str) -> sqlite3.Connection:
    connection = sqlite3.connect(path, isolation_level=None, timeout=BUSY_SECONDS, check_same_thread=False)
    connection.execute("PRAGMA synchronous = FULL")
    return connection


def _has_tables(connection: sqlite3.Connection) -> bool:
    return connection.execute("SELECT count(*) FROM sqlite_master").fetchone()[0] > 0


def _create(index: Index, settings: AuditSettings) -> None:
    connection = index.connection
    connection.execute(f"PRAGMA page_size = {PAGE_SIZE}")
    connection.execute("PRAGMA journal_mode = WAL")
    with index.writing():
        if _has_tables(connection):  # another process created it meanwhile
            return
        for statement in schema.statements(schema.CREATE):
            connection.execute(statement)
        connection.execute(f"PRAGMA application_id = {schema.APPLICATION_ID}")
        rows = {
            "format": schema.FORMAT,
            "schema_version": str(schema.SCHEMA_VERSION),
            "created_at": utc_now(),
            "created_by": f"dedup {__version__}",
            "settings": json.dumps(_index_settings(settings), sort_keys=True),
        }
        connection.executemany("INSERT INTO meta (key, value) VALUES (?, ?)", sorted(rows.items()))
        connection.execute(schema.EMPTY_TFIDF)


def _check_ours(index: Index) -> int:
    """The schema version of an existing file, after checking that it is an index."""
    connection = index.connection
    app_id = connection.execute("PRAGMA application_id").fetchone()[0]
    has_meta = connection.execute("SELECT count(*) FROM sqlite_master WHERE type = 'table' AND name = 'meta'")
    if app_id != schema.APPLICATION_ID or not has_meta.fetchone()[0] or index.meta("format") != schema.FORMAT:
        raise IndexFileError(f"{index.path} is an SQLite file but not a dedup index")
    version = index.meta("schema_version")
    if version is None or not re.fullmatch("[0-9]{1,9}", version):
        raise IndexFileError(index.damaged("it has no schema version"))
    return int(version)


def _migrate(index: Index, version: int) -> None:
    with index.writing() as connection:
        # Read again under the write lock: another process may have migrated meanwhile.
        version = int(index.meta("schema_version") or version)
        while version < schema.SCHEMA_VERSION:
            step = schema.MIGRATIONS.get(version)
            if step is None:
                raise IndexFileError(
                    f"the index {index.path} has schema version {version}, which this dedup cannot upgrade"
                )
            step(connection)
            version += 1
            connection.execute("UPDATE meta SET value = ? WHERE key = 'schema_version'", (str(version),))


def open_index(path: str, settings: AuditSettings | None = None, *, create: bool = False) -> Index:
    """Open (or, with ``create``, create) an index file.

    Parameters
    ----------
    path : str
        The index file.
    settings : AuditSettings, optional
        Checked against the stored settings (`Index.check_settings`); for a new index,
        the settings it is built with (default: ``AuditSettings()``), what they leave unset
        chosen by `index_choices`.
    create : bool
        Create the file when it does not exist (or is empty, as an interrupted first
        build leaves it).

    Returns
    -------
    Index

    Raises
    ------
    IndexFileError
        The file is missing (without ``create``), not an index, damaged, or newer than
        this dedup; `IndexSettingsError` when ``settings`` cannot be mixed with it.

    Notes
    -----
    Cost: a few small reads; the file's content is not scanned (``dedup index info
    --check`` runs SQLite's integrity check).
    """
    exists = os.path.exists(path)
    if exists and os.path.isdir(path):
        raise IndexFileError(f"{path} is a folder, not an index file")
    if not exists and not create:
        raise IndexFileError(f"there is no index at {path}: create one with 'dedup index build'")
    try:
        connection = _connect(path)
    except sqlite3.Error as err:
        if "not a database" in str(err):
            raise IndexFileError(f"{path} is not a dedup index (not an SQLite file)") from err
        raise IndexFileError(f"cannot open the index {path}: {err}") from err
    index = Index(path, connection)
    try:
        # The header is checked by SQLite itself: opening and closing the file by other means
        # would drop the locks other connections of this process hold on it.
        with index.guard():
            _prepare(index, settings, create)
    except BaseException:
        connection.close()
        raise
    return index


def _prepare(index: Index, settings: AuditSettings | None, create: bool) -> None:
    """Create the tables of an empty file (with ``create``), check the file is an index of
    a version this dedup reads, migrate an older one, and check ``settings``."""
    path, connection = index.path, index.connection
    try:
        has_tables = _has_tables(connection)
    except sqlite3.DatabaseError as err:
        if "not a database" in str(err):
            raise IndexFileError(f"{path} is not a dedup index (not an SQLite file)") from err
        raise
    if not has_tables:
        if not create:
            raise IndexFileError(
                f"the index {path} is empty (a first build did not finish): run 'dedup index build' again"
            )
        _create(index, settings or AuditSettings())
    version = _check_ours(index)
    if version > schema.SCHEMA_VERSION:
        raise IndexFileError(
            f"the index {path} was written by a newer dedup (schema version {version}; "
            f"this dedup reads up to {schema.SCHEMA_VERSION}): upgrade dedup"
        )
    if version < schema.SCHEMA_VERSION:
        _migrate(index, version)
    stored = index.settings  # refuses a settings row that does not read back
    if settings is not None:
        index.check_settings(settings, stored)
