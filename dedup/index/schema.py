"""The tables of an index file, its schema version and the migrations between versions.

An index is one SQLite file. It is marked twice so that no other file is taken for one:
``PRAGMA application_id`` (a 32-bit number in the file header, SQLite's own way of
naming a file format) and a ``meta`` row ``format = dedup-index``. ``meta`` also holds
``schema_version``; a file with a higher version than `SCHEMA_VERSION` was written by a
newer dedup and is refused, a lower one is brought up to date by `MIGRATIONS`, each step
in the same transaction as the version bump.

Tables (version 1)
------------------
meta(key, value)
    ``format``, ``schema_version``, ``created_at``, ``created_by`` (tool version) and
    ``settings`` (JSON: the settings the sketches were built with).
runs(run, kind, started_at, seconds, roots, documents, added, changed, removed, unchanged, sketched)
    One row per build or update; ``run`` numbers the documents' history columns.
texts(text_id, content_hash, characters, words, terms, shingle_count, run)
    One row per distinct canonical text of a present document (``terms``: how many
    distinct term columns it uses, i.e. its entries in ``postings``). ``text_id`` is
    never reused (AUTOINCREMENT), so postings of a text that is gone can never be taken
    for a later text's.
sketches(text_id, signature, shingles)
    The MinHash signature (``num_perm`` x uint32) and the sorted unique shingle hashes
    (uint64) of each text; apart from ``texts`` so that reading the small columns of
    every text never pages through the large blobs.
documents(doc_id, content_hash, status, source, format, title, bytes, mtime, metadata,
          added_run, changed_run, removed_run)
    One row per document ever indexed; ``status`` is ``present`` or ``removed``. A
    document keeps its row when removed, so its history survives its return.
postings(segment, term_column, df, text_ids, counts)
    TF-IDF term counts, column-major: for each hashed term column, the texts that use it
    (`blobs.pack_sorted`) and how often (`blobs.pack_uints`). Each build or update adds a
    segment holding only the texts it sketched; segments are merged when there are many
    or when many of their texts are gone.
tfidf(id, texts, text_ids, norms, term_columns, df, entries, live_entries, segments, run)
    One row: the TF-IDF statistics of the present texts, refreshed by every write: the
    searchable texts (sorted ids), the Euclidean norm of each one's TF-IDF row, and the
    document frequency of every used column.
audits(seq, audit_id, recorded_at, settings, summary, clusters, documents)
    Every audit recorded with ``--index``: its clusters as member ids with content
    hashes (JSON). ``documents`` (id and hash of every document) is kept for the latest
    audit only, for the next delta.
decisions(decision_id, subject, kind, cluster_id, audit_id, decision, comment,
          decided_at, imported_at, documents)
    Review decisions imported from reports. ``subject`` names what was decided on
    (kind and the sorted documents with their hashes); importing the same file twice
    adds nothing.
"""

from __future__ import annotations

import sqlite3
from collections.abc import Callable

__all__ = ["SCHEMA_VERSION", "APPLICATION_ID", "FORMAT", "CREATE", "MIGRATIONS"]

SCHEMA_VERSION = 1
FORMAT = "dedup-index"
# "DDUP" in ASCII, stored in the SQLite header by PRAGMA application_id.
APPLICATION_ID = 0x44445550

CREATE = """
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
CREATE TABLE texts (
    text_id INTEGER PRIMARY KEY AUTOINCREMENT,
    content_hash TEXT NOT NULL UNIQUE,
    characters INTEGER NOT NULL,
    words INTEGER NOT NULL,
    terms INTEGER NOT NULL,
    shingle_count INTEGER NOT NULL,
    run INTEGER NOT NULL
);
CREATE TABLE sketches (
    text_id INTEGER PRIMARY KEY,
    signature BLOB NOT NULL,
    shingles BLOB NOT NULL
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
    run INTEGER NOT NULL
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

# Version n -> function that brings a version-n file to version n + 1 (run inside the
# transaction that also writes the new version number). Empty while there is one version.
MIGRATIONS: dict[int, Callable[[sqlite3.Connection], None]] = {}
