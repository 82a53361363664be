"""Building and updating an index: read every document, sketch only the texts not yet stored.

A run reads the given paths with the same reader as an audit and computes each
document's content hash (BLAKE2b of its canonical text). Then:

* a document whose id and hash are already stored is *unchanged*: nothing more is done
  with its text;
* a new document, or one whose hash changed, is *added* or *changed*; its text is
  shingled, MinHash-sketched and counted for TF-IDF only if no stored document already
  has the same text (exact copies share one stored text);
* a stored document the run did not find is marked *removed* (its row stays, so its
  history does too), and a text no present document has is deleted.

The sketches are of the whole canonical text: the audit's boilerplate removal depends on
the whole corpus, so it cannot be applied incrementally.

The whole run is one transaction (`Index.writing`): killed at any point, the index is as
it was before the run. Cost: reading and hashing every document, O(total bytes), plus
sketching the new texts, plus one pass over the postings (`refresh_statistics`).
"""

from __future__ import annotations

import json
import os
import time
from collections.abc import Sequence
from dataclasses import asdict, dataclass, field
from datetime import datetime

import numpy as np
import scipy.sparse as sp

from ..features.shingles import features_with
from ..ingest import InputError, iter_documents, summarize
from ..ingest.walk import UNCHANGED_REASON
from ..normalize import canonical_text, content_hash
from ..progress import Progress
from ..settings import AuditSettings
from ..sketch import signatures_with
from .blobs import pack_array
from .postings import refresh_statistics, term_counts, write_segment
from .store import Index, IndexFileError, open_index, read_keys, utc_now

__all__ = ["RunSummary", "build", "update", "index_paths"]

# Texts sketched together: large enough for the compiled kernels to pay off, small
# enough that a batch's features stay in a few hundred megabytes.
BATCH_TEXTS = 4000


@dataclass
class RunSummary:
    """What one build or update did.

    Attributes
    ----------
    run : int
        Number of the run in the index.
    kind : {"build", "update"}
    documents : int
        Present documents after the run.
    added, changed, removed, unchanged : int
        Documents by what happened to them (a document found again after being removed
        counts as added).
    sketched : int
        Distinct texts that were shingled and sketched (the rest were already stored).
    texts : int
        Searchable distinct texts after the run.
    seconds : float
    inputs : dict
        Ledger counts of the reading (read, empty, skipped, ...), as in ``audit.json``.
    statistics : dict
        Postings entries and segments after the run (see `refresh_statistics`).
    """

    run: int
    kind: str
    documents: int
    added: int
    changed: int
    removed: int
    unchanged: int
    sketched: int
    texts: int
    seconds: float
    inputs: dict = field(default_factory=dict)
    statistics: dict = field(default_factory=dict)

    def to_dict(self) -> dict:
        return asdict(self)


def index_paths(index: Index) -> list[str]:
    """The paths the last run read (absolute), for an update given no paths."""
    row = index.connection.execute("SELECT roots FROM runs ORDER BY run DESC LIMIT 1").fetchone()
    return json.loads(row[0]) if row else []


class _Sketcher:
    """Shingles, signatures and term counts of batches of new texts, written as they come."""

    def __init__(self, connection, settings: AuditSettings, run: int) -> None:
        self.connection = connection
        self.settings = settings
        self.run = run
        self.text_ids: list[np.ndarray] = []
        self.counts: list[sp.csr_matrix] = []
        self.sketched = 0

    def add(self, batch: dict[str, tuple[bytes, int]]) -> None:
        """Sketch and store ``{content hash: (canonical UTF-8, characters)}``."""
        if not batch:
            return
        s = self.settings
        hashes = list(batch)
        encoded = [batch[h][0] for h in hashes]
        offsets = np.zeros(len(encoded) + 1, dtype=np.int64)
        np.cumsum([len(e) for e in encoded], out=offsets[1:])
        buf = np.frombuffer(b"".join(encoded), dtype=np.uint8) if offsets[-1] else np.zeros(0, np.uint8)
        features = features_with(s, buf, offsets)
        signatures = signatures_with(s, features).values
        counts = term_counts(features.token_hashes, features.token_offsets, s.tfidf_features)
        words = np.diff(features.token_offsets)
        terms = np.diff(counts.indptr)
        ids = np.empty(len(hashes), dtype=np.int64)
        for i, h in enumerate(hashes):
            shingles = features.shingles_of(i)
            cursor = self.connection.execute(
                "INSERT INTO texts (content_hash, characters, words, terms, shingle_count, run) "
                "VALUES (?, ?, ?, ?, ?, ?)",
                (h, batch[h][1], int(words[i]), int(terms[i]), int(shingles.shape[0]), self.run),
            )
            ids[i] = cursor.lastrowid
            self.connection.execute(
                "INSERT INTO sketches (text_id, signature, shingles) VALUES (?, ?, ?)",
                (int(ids[i]), pack_array(signatures[i], "<u4"), pack_array(shingles, "<u8")),
            )
        self.text_ids.append(ids)
        self.counts.append(counts)
        self.sketched += len(hashes)

    def write_postings(self) -> int:
        """All counts of this run as one postings segment."""
        if not self.text_ids:
            return 0
        ids = np.concatenate(self.text_ids)
        counts = sp.vstack(self.counts, format="csr")
        return write_segment(self.connection, self.run, ids, counts)


def _run(
    index: Index, paths: Sequence[str], settings: AuditSettings, kind: str, progress: Progress
) -> RunSummary:
    started = time.perf_counter()
    missing = [p for p in paths if p != "-" and not os.path.exists(p)]
    if missing:
        raise InputError(f"no such file or folder: {missing[0]}")
    reading = {key: getattr(settings, key) for key in read_keys()}
    roots = [p if p == "-" else os.path.abspath(p) for p in paths]
    ledger: list = []
    with index.writing() as db:
        run = db.execute("SELECT coalesce(max(run), 0) + 1 FROM runs").fetchone()[0]
        db.execute(
            "INSERT INTO runs (run, kind, started_at, roots) VALUES (?, ?, ?, ?)",
            (run, kind, utc_now(), json.dumps(roots)),
        )
        known = {
            row[0]: row[1:]
            for row in db.execute(
                "SELECT doc_id, content_hash, status, source, format, title, bytes, mtime, metadata, changed_run "
                "FROM documents"
            )
        }
        stored_texts = {row[0] for row in db.execute("SELECT content_hash FROM texts")}
        unchanged = _unchanged_check(db, known, run) if kind == "update" else None
        sketcher = _Sketcher(db, settings, run)
        batch: dict[str, tuple[bytes, int]] = {}
        seen: set[str] = set()
        tally = {"added": 0, "changed": 0, "unchanged": 0}
        replaced: set[str] = set()  # texts some document had before this run changed it
        progress.start("reading")
        for doc in iter_documents(paths, ledger=ledger, unchanged=unchanged, **reading):
            canonical = canonical_text(doc.text)
            encoded = canonical.encode("utf-8")
            digest = content_hash(encoded)
            seen.add(doc.id)
            fields = (
                digest,
                "present",
                doc.source,
                doc.format,
                doc.title or "",
                len(doc.text.encode("utf-8")),
                doc.mtime,
                json.dumps(doc.metadata, sort_keys=True, ensure_ascii=False, default=str),
            )
            before = known.get(doc.id)
            if before is None:
                tally["added"] += 1
                db.execute(
                    "INSERT INTO documents (doc_id, content_hash, status, source, format, title, bytes, mtime, "
                    "metadata, added_run, changed_run) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
                    (doc.id, *fields, run, run),
                )
            else:
                if before[1] != "present":
                    what = "added"  # found again after it was removed
                elif before[0] != digest:
                    what = "changed"
                else:
                    what = "unchanged"
                tally[what] += 1
                if what == "changed":
                    replaced.add(before[0])
                if tuple(before[:8]) != fields:  # an unchanged text may still have a new time or title
                    db.execute(
                        "UPDATE documents SET content_hash = ?, status = ?, source = ?, format = ?, title = ?, "
                        "bytes = ?, mtime = ?, metadata = ?, removed_run = NULL, changed_run = ? WHERE doc_id = ?",
                        (*fields, run if what != "unchanged" else before[8], doc.id),
                    )
            if digest not in stored_texts and digest not in batch:
                batch[digest] = (encoded, len(canonical))
                if len(batch) >= BATCH_TEXTS:
                    sketcher.add(batch)
                    stored_texts.update(batch)
                    batch = {}
            progress.advance()
        # Files skipped by their modification time are present and unchanged.
        for entry in ledger:
            if entry.reason == UNCHANGED_REASON and entry.document_id not in seen:
                seen.add(entry.document_id)
                tally["unchanged"] += 1
        progress.done(f"{len(seen):,} documents")
        progress.start("sketching")
        sketcher.add(batch)
        gone = [doc_id for doc_id, row in known.items() if row[1] == "present" and doc_id not in seen]
        db.executemany(
            "UPDATE documents SET status = 'removed', removed_run = ? WHERE doc_id = ?",
            [(run, d) for d in gone],
        )
        deleted = _delete_unused_texts(db, {known[d][0] for d in gone} | replaced)
        sketcher.write_postings()
        progress.done(f"{sketcher.sketched:,} new texts")
        progress.start("statistics")
        if sketcher.sketched or deleted or kind == "build":
            statistics = refresh_statistics(db, run, settings.sublinear_tf)
        else:  # the same texts as before: the stored statistics still hold
            statistics = _stored_statistics(db)
        progress.done()
        index.store_settings(settings)
        present = db.execute("SELECT count(*) FROM documents WHERE status = 'present'").fetchone()[0]
        seconds = round(time.perf_counter() - started, 3)
        db.execute(
            "UPDATE runs SET seconds = ?, documents = ?, added = ?, changed = ?, removed = ?, unchanged = ?, "
            "sketched = ? WHERE run = ?",
            (
                seconds,
                present,
                tally["added"],
                tally["changed"],
                len(gone),
                tally["unchanged"],
                sketcher.sketched,
                run,
            ),
        )
    # Fold the write-ahead log back into the file, so it does not stay as large as the run.
    with index.guard():
        index.connection.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    return RunSummary(
        run=run,
        kind=kind,
        documents=present,
        added=tally["added"],
        changed=tally["changed"],
        removed=len(gone),
        unchanged=tally["unchanged"],
        sketched=sketcher.sketched,
        texts=statistics["texts"],
        seconds=seconds,
        inputs=summarize(ledger),
        statistics=statistics,
    )


# A file changed within this many seconds of the last run may share its modification time
# with the version that run read (coarse file-system clocks): such files are read again.
MTIME_GUARD_SECONDS = 2.0


def _unchanged_check(db, known: dict, run: int):
    """``unchanged(id, mtime)`` for `iter_documents`: same modification time as last indexed.

    Like make and rsync, an update trusts the file's modification time: a present document
    whose file still has the time stored for it is not read or hashed again. Files whose
    stored time lies within `MTIME_GUARD_SECONDS` of the previous run's start are read
    anyway, since an edit in that window could keep the same time.
    """
    row = db.execute("SELECT started_at FROM runs WHERE run < ? ORDER BY run DESC LIMIT 1", (run,)).fetchone()
    if row is None:
        return None
    try:
        last_start = datetime.fromisoformat(str(row[0]).replace("Z", "+00:00")).timestamp()
    except ValueError:
        return None
    cutoff = last_start - MTIME_GUARD_SECONDS

    def unchanged(doc_id: str, mtime: float) -> bool:
        before = known.get(doc_id)
        return before is not None and before[1] == "present" and before[6] == mtime and mtime < cutoff

    return unchanged


def _delete_unused_texts(connection, candidates: set[str]) -> int:
    """Delete the texts among ``candidates`` that no present document has; O(candidates) lookups."""
    unused = []
    for digest in sorted(candidates):
        still = connection.execute(
            "SELECT 1 FROM documents WHERE content_hash = ? AND status = 'present' LIMIT 1", (digest,)
        ).fetchone()
        if still is None:
            row = connection.execute("SELECT text_id FROM texts WHERE content_hash = ?", (digest,)).fetchone()
            if row is not None:
                unused.append(row)
    connection.executemany("DELETE FROM sketches WHERE text_id = ?", unused)
    connection.executemany("DELETE FROM texts WHERE text_id = ?", unused)
    return len(unused)


def _stored_statistics(connection) -> dict:
    texts, entries, live, segments = connection.execute(
        "SELECT texts, entries, live_entries, segments FROM tfidf WHERE id = 1"
    ).fetchone()
    return {"texts": texts, "entries": entries, "live_entries": live, "segments": segments, "merged": False}


def build(
    paths: Sequence[str],
    index_path: str,
    settings: AuditSettings | None = None,
    *,
    progress: Progress | None = None,
) -> RunSummary:
    """Create a new index of the documents under ``paths``.

    Parameters
    ----------
    paths : sequence of str
        Files and folders, read as `dedup.audit` reads them.
    index_path : str
        The index file to create; it must not hold an index yet.
    settings : AuditSettings, optional
        Sketch settings (shingles, MinHash, TF-IDF) and reading options, recorded in the
        index; default ``AuditSettings()``.

    Raises
    ------
    IndexFileError
        ``index_path`` already holds an index (use `update`), or is not an index file.
    dedup.InputError
        A path does not exist.

    Notes
    -----
    Cost O(total bytes) for reading and sketching, plus writing every text's signature,
    shingles and term counts once.
    """
    settings = (settings or AuditSettings()).validate()
    if os.path.exists(index_path) and os.path.getsize(index_path) > 0:
        with open_index(index_path) as existing, existing.guard():
            has_runs = existing.connection.execute("SELECT count(*) FROM runs").fetchone()[0]
        if has_runs:
            raise IndexFileError(
                f"{index_path} already holds an index: update it with 'dedup index update', "
                "or remove the file to build anew"
            )
    with open_index(index_path, settings, create=True) as index:
        return _run(index, paths, settings, "build", progress or Progress.silent())


def update(
    paths: Sequence[str] | None,
    index_path: str,
    settings: AuditSettings | None = None,
    *,
    progress: Progress | None = None,
) -> RunSummary:
    """Bring an index up to date with the documents under ``paths``.

    Parameters
    ----------
    paths : sequence of str or None
        The whole current state: a stored document not found there is marked removed.
        Empty or None: the paths of the previous run.
    index_path : str
    settings : AuditSettings, optional
        Default: the settings stored in the index. Given settings must have the same
        sketch settings (`SKETCH_KEYS`); their reading options are used and recorded.

    Raises
    ------
    IndexFileError
        No index at ``index_path``, or not an index; `IndexSettingsError` when the
        sketch settings differ.
    dedup.InputError
        A path does not exist.

    Notes
    -----
    Cost: reading and hashing every document, O(total bytes); sketching only the new
    and changed texts; one pass over the stored term counts for the statistics.
    """
    with open_index(index_path, settings) as index:
        chosen = (settings or index.settings).validate()
        roots = list(paths or []) or index_paths(index)
        if not roots:
            raise IndexFileError(f"the index {index_path} records no paths: give the paths to read")
        return _run(index, roots, chosen, "update", progress or Progress.silent())
