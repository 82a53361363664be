"""The tables of an index file, its schema version and the migrations between versions.

An index is one SQLite file. It is marked twice so that no other file is taken for one:
``PRAGMA application_id`` (a 32-bit number in the file header, SQLite's own way of
naming a file format) and a ``meta`` row ``format = dedup-index``. ``meta`` also holds
``schema_version``; a file with a higher version than `SCHEMA_VERSION` was written by a
newer dedup and is refused, a lower one is brought up to date by `MIGRATIONS`, each step
in the same transaction as the version bump.

Tables (version 3)
------------------
meta(key, value)
    ``format``, ``schema_version``, ``created_at``, ``created_by`` (tool version),
    ``settings`` (JSON: the settings the sketches were built with, template rule
    included), after a migration from version 1 until the next update,
    ``needs_update`` (why the texts must be sketched again), and once an audit is
    accepted, ``baseline`` (its ``seq``) and ``baseline_accepted_at``.
runs(run, kind, started_at, seconds, roots, documents, added, changed, removed, unchanged, sketched)
    One row per build or update; ``run`` numbers the documents' history columns.
texts(text_id, content_hash, characters, words, terms, shingle_count, sketched_hash, run)
    One row per distinct canonical text with words of a present document (a text
    without words is never searched, as an audit never compares it). ``words``,
    ``terms`` (distinct term columns, i.e. entries in ``postings``) and
    ``shingle_count`` are of the text as sketched, its template lines left out;
    ``sketched_hash`` is the content hash of exactly those bytes; ``run`` is the run
    that sketched it. ``text_id`` is never reused (AUTOINCREMENT), so postings of a
    text that is gone, or sketched again under a new id, are never taken for another's.
sketches(text_id, signature, shingles)
    The MinHash signature (``num_perm`` x uint32) and the sorted unique shingle hashes
    (uint64) of each text as sketched; apart from ``texts`` so that reading the small
    columns of every text never pages through the large blobs.
text_lines(text_id, lines)
    The sorted distinct hashes (uint64) of each text's canonical lines: its part of
    the corpus-wide template counter (`dedup.index.templates`).
canonicals(text_id, form)
    Each text's canonical lines joined by LF, zlib-compressed: what is stripped of
    template lines and sketched again when its template lines change.
templates(id, rule, max_text_share, texts, threshold, line_hashes, counts)
    One row: the template lines the stored sketches left out (sorted hashes, and in
    how many texts each is), the rule that chose them (JSON), and over how many texts.
documents(doc_id, content_hash, status, source, format, title, bytes, mtime, metadata,
          added_run, changed_run, removed_run)
    One row per document ever indexed; ``status`` is ``present`` or ``removed``. A
    document keeps its row when removed, so its history survives its return.
postings(segment, term_column, df, text_ids, counts)
    TF-IDF term counts, column-major: for each hashed term column, the texts that use it
    (`blobs.pack_sorted`) and how often (`blobs.pack_uints`). Each build or update adds a
    segment holding only the texts it sketched; segments are merged when there are many
    or when many of their texts are gone.
tfidf(id, texts, text_ids, norms, term_columns, df, entries, live_entries, segments, run,
      search_norms, lengths)
    One row: the TF-IDF statistics of the present texts, refreshed by every write: the
    searchable texts (sorted ids), the Euclidean norm of each one's TF-IDF row (as the
    audit weighs it), the document frequency of every used column, and for the search
    (`dedup.index.search`) each text's norm with sublinear tf and the stop words left out,
    and its length in words.
audits(seq, audit_id, recorded_at, settings, summary, clusters, documents)
    Every audit recorded with ``--index``: its clusters as member ids with content
    hashes and stable ids (JSON). ``documents`` (id and hash of every document) is kept
    for the latest audit and the baseline only, for the next delta.
cluster_ids(stable_id, minted_seq, last_seq, members)
    Every stable cluster id ever given (`dedup.index.lineage`): the audit that gave it,
    the latest audit it named a cluster in, and that cluster's document ids (JSON). An
    id is never given to another cluster.
decisions(decision_id, subject, kind, cluster_id, audit_id, decision, comment,
          decided_at, imported_at, documents)
    Review decisions imported from reports. ``subject`` names what was decided on
    (kind and the sorted documents with their hashes); importing the same file twice
    adds nothing.
"""

from __future__ import annotations

import sqlite3
from collections.abc import Callable

__all__ = ["SCHEMA_VERSION", "APPLICATION_ID", "FORMAT", "CREATE", "MIGRATIONS", "NEEDS_UPDATE"]

SCHEMA_VERSION = 3
FORMAT = "dedup-index"
# "DDUP" in ASCII, stored in the SQLite header by PRAGMA application_id.
APPLICATION_ID = 0x44445550
# The ``meta`` key a migration leaves when the stored texts must be sketched again.
NEEDS_UPDATE = "needs_update"

# The tables of the distinct texts and what was made of them: a migration that changes
# how texts are sketched drops and creates these anew.
TEXT_TABLES = """
CREATE TABLE texts (
    text_id INTEGER PRIMARY KEY AUTOINCREMENT,
    content_hash TEXT NOT NULL UNIQUE,
    characters INTEGER NOT NULL,
    words INTEGER NOT NULL,
    terms INTEGER NOT NULL,
    shingle_count INTEGER NOT NULL,
    sketched_hash TEXT NOT NULL,
    run INTEGER NOT NULL
);
CREATE TABLE sketches (
    text_id INTEGER PRIMARY KEY,
    signature BLOB NOT NULL,
    shingles BLOB NOT NULL
);
CREATE TABLE text_lines (
    text_id INTEGER PRIMARY KEY,
    lines BLOB NOT NULL
);
CREATE TABLE canonicals (
    text_id INTEGER PRIMARY KEY,
    form BLOB NOT NULL
);
CREATE TABLE templates (
    id INTEGER PRIMARY KEY CHECK (id = 1),
    rule TEXT NOT NULL,
    max_text_share REAL NOT NULL,
    texts INTEGER NOT NULL,
    threshold INTEGER NOT NULL,
    line_hashes BLOB NOT NULL,
    counts BLOB NOT NULL
);
"""

CLUSTER_IDS = """
CREATE TABLE cluster_ids (
    stable_id TEXT PRIMARY KEY,
    minted_seq INTEGER NOT NULL,
    last_seq INTEGER NOT NULL,
    members TEXT NOT NULL
);
"""

CREATE = (
    """
CREATE TABLE meta (
    key TEXT PRIMARY KEY,
    value TEXT NOT NULL
);
CREATE TABLE runs (
    run INTEGER PRIMARY KEY,
    kind TEXT NOT NULL CHECK (kind IN ('build', 'update')),
    started_at TEXT NOT NULL,
    seconds REAL,
    roots TEXT NOT NULL,
    documents INTEGER,
    added INTEGER,
    changed INTEGER,
    removed INTEGER,
    unchanged INTEGER,
    sketched INTEGER
);
CREATE TABLE documents (
    doc_id TEXT PRIMARY KEY,
    content_hash TEXT NOT NULL,
    status TEXT NOT NULL CHECK (status IN ('present', 'removed')),
    source TEXT NOT NULL,
    format TEXT NOT NULL,
    title TEXT NOT NULL,
    bytes INTEGER NOT NULL,
    mtime REAL,
    metadata TEXT NOT NULL,
    added_run INTEGER NOT NULL,
    changed_run INTEGER NOT NULL,
    removed_run INTEGER
);
CREATE INDEX documents_by_hash ON documents (content_hash);
CREATE TABLE postings (
    segment INTEGER NOT NULL,
    term_column INTEGER NOT NULL,
    df INTEGER NOT NULL,
    text_ids BLOB NOT NULL,
    counts BLOB NOT NULL
);
CREATE UNIQUE INDEX postings_by_column ON postings (term_column, segment);
CREATE TABLE tfidf (
    id INTEGER PRIMARY KEY CHECK (id = 1),
    texts INTEGER NOT NULL,
    text_ids BLOB NOT NULL,
    norms BLOB NOT NULL,
    term_columns BLOB NOT NULL,
    df BLOB NOT NULL,
    entries INTEGER NOT NULL,
    live_entries INTEGER NOT NULL,
    segments INTEGER NOT NULL,
    run INTEGER NOT NULL,
    search_norms BLOB NOT NULL DEFAULT x'',
    lengths BLOB NOT NULL DEFAULT x''
);
CREATE TABLE audits (
    seq INTEGER PRIMARY KEY AUTOINCREMENT,
    audit_id TEXT NOT NULL,
    recorded_at TEXT NOT NULL,
    settings TEXT NOT NULL,
    summary TEXT NOT NULL,
    clusters TEXT NOT NULL,
    documents TEXT
);
CREATE TABLE decisions (
    decision_id INTEGER PRIMARY KEY AUTOINCREMENT,
    subject TEXT NOT NULL,
    kind TEXT NOT NULL CHECK (kind IN ('cluster', 'pair')),
    cluster_id TEXT NOT NULL,
    audit_id TEXT NOT NULL,
    decision TEXT,
    comment TEXT NOT NULL,
    decided_at TEXT NOT NULL,
    imported_at TEXT NOT NULL,
    documents TEXT NOT NULL,
    UNIQUE (subject, decided_at)
);
"""
    + TEXT_TABLES
    + CLUSTER_IDS
)

EMPTY_TFIDF = (
    "INSERT INTO tfidf (id, texts, text_ids, norms, term_columns, df, entries, live_entries, segments, run) "
    "VALUES (1, 0, x'', x'', x'', x'', 0, 0, 0, 0)"
)


def statements(script: str) -> list[str]:
    """The statements of a script, to run one at a time (``executescript`` would commit
    the open transaction)."""
    return [statement for statement in script.split(";") if statement.strip()]


def _sketch_texts_again(connection: sqlite3.Connection) -> None:
    """Version 1 to 2: texts are normalized and sketched as an audit does (template lines
    left out), and keep their line hashes and canonical form.

    Version 1 kept neither, so its sketches (of whole texts) cannot be turned into the
    new ones: the texts and their postings are dropped, every document's modification
    time is forgotten so the next ``dedup index update`` reads and sketches every file
    again, and ``meta.needs_update`` says so until then (a search refuses with that
    message). Documents, their history, recorded audits and review decisions are kept.
    Cost: O(documents) here; the update after costs what a build costs.
    """
    for table in ("texts", "sketches", "text_lines", "canonicals", "templates"):
        connection.execute(f"DROP TABLE IF EXISTS {table}")
    for statement in statements(TEXT_TABLES):
        connection.execute(statement)
    connection.execute("DELETE FROM postings")
    connection.execute("DELETE FROM tfidf")
    connection.execute(EMPTY_TFIDF)
    connection.execute("UPDATE documents SET mtime = NULL")
    connection.execute(
        "INSERT OR REPLACE INTO meta (key, value) VALUES (?, ?)",
        (NEEDS_UPDATE, "it was written by an older dedup, whose sketches this one cannot use"),
    )


def _stable_ids_and_search_statistics(connection: sqlite3.Connection) -> None:
    """Version 2 to 3: stable cluster ids (`dedup.index.lineage`) and the search's statistics.

    The clusters of the latest recorded audit are given ids from their content, so the
    next audit keeps them; older audits are never compared with again. The search's norms
    and text lengths are computed from the stored postings (`refresh_statistics`).
    Cost: one pass over the postings, and the latest audit's clusters.
    """
    import json

    from .lineage import assign_stable_ids, store_lineage
    from .postings import refresh_statistics

    connection.execute("ALTER TABLE tfidf ADD COLUMN search_norms BLOB NOT NULL DEFAULT x''")
    connection.execute("ALTER TABLE tfidf ADD COLUMN lengths BLOB NOT NULL DEFAULT x''")
    for statement in statements(CLUSTER_IDS):
        connection.execute(statement)
    latest = connection.execute("SELECT seq, clusters FROM audits ORDER BY seq DESC LIMIT 1").fetchone()
    if latest is not None:
        records = json.loads(latest[1])
        ids = assign_stable_ids([[(m[0], m[1]) for m in r["members"]] for r in records], [], None, set())
        for record, given in zip(records, ids):
            record.update(given)
        connection.execute(
            "UPDATE audits SET clusters = ? WHERE seq = ?",
            (json.dumps(records, ensure_ascii=False), latest[0]),
        )
        store_lineage(connection, latest[0], records)
    settings = json.loads(connection.execute("SELECT value FROM meta WHERE key = 'settings'").fetchone()[0])
    run = connection.execute("SELECT coalesce(max(run), 0) FROM runs").fetchone()[0]
    refresh_statistics(
        connection,
        run,
        bool(settings.get("sublinear_tf")),
        n_features=int(settings.get("tfidf_features", 2**20)),
        merge=False,
    )


# Version n -> function that brings a version-n file to version n + 1 (run inside the
# transaction that also writes the new version number).
MIGRATIONS: dict[int, Callable[[sqlite3.Connection], None]] = {
    1: _sketch_texts_again,
    2: _stable_ids_and_search_statistics,
}
