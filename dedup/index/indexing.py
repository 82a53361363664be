"""Building and updating an index: the audit's normalize, template and sketch steps, run incrementally.

A run reads the given paths with the audit's reader and its normalize step
(`dedup.normalize.batch.prepare_documents`, compiled, a batch at a time), so every
document's content hash and canonical text are byte for byte those of `dedup.audit`.
Then, document by document:

* a document whose id and hash are already stored is *unchanged*: nothing more is done
  with its text;
* a new document, or one whose hash changed, is *added* or *changed*; its text is
  written (`dedup.index.texts.NewTexts`: line hashes and canonical form) if no stored
  document already has the same text (exact copies share one stored text) and it has
  words;
* a stored document the run did not find is marked *removed* (its row stays, so its
  history does too), and a text no present document has is deleted.

Then the template lines of the whole indexed corpus are found with the audit's counter
and rule, the stored texts' counts merged with the run's (`dedup.index.templates`), and
the new texts — with the stored ones whose template lines changed — are stripped of
them and sketched with the plan's sketch step (`dedup.index.texts.sketch_texts`). So the
stored shingle sets, signatures and term counts are those an audit of the present
corpus compares, and an update gives what a fresh build of the same corpus gives.

The whole run is one transaction (`Index.writing`): killed at any point, the index is as
it was before the run. Cost: reading and normalizing every document, O(total bytes);
writing and sketching the new texts; reading every stored line set when texts came or
went (`dedup.index.templates`); one pass over the postings (`refresh_statistics`).
"""

from __future__ import annotations

import functools
import json
import os
import sqlite3
import time
from collections.abc import Iterable, Iterator, Sequence
from dataclasses import asdict, dataclass, field
from datetime import datetime

from ..ingest import InputError, iter_documents, summarize
from ..ingest.walk import UNCHANGED_REASON
from ..normalize.batch import prepare_documents
from ..normalize.boilerplate import Boilerplate
from ..progress import Progress
from ..settings import AuditSettings
from . import schema
from .damage import StoredValueError
from .postings import refresh_statistics
from .store import Index, IndexFileError, index_choices, open_index, read_keys, utc_now
from .templates import CorpusLines, TemplateRule, changed_lines, load_templates, store_templates
from .texts import NewTexts, delete_unused_texts, renumber, sketch_texts, stripped_otherwise, text_sequence

__all__ = ["RunSummary", "build", "update", "index_paths", "run_in", "checkpoint"]

# The audit's normalize step, canonical lines joined by LF whatever the template
# settings: the lines are what template lines are found among, and with the breaks made
# spaces they are the canonical text (so templates can be turned on later).
PREPARE = functools.partial(prepare_documents, lines=True)
# Documents (or characters of text) normalized together.
BATCH_DOCUMENTS = 1024
BATCH_CHARACTERS = 8 * 2**20


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
    resketched : int
        Of ``sketched``, stored texts sketched again because their template lines changed.
    template_lines : int
        Template lines of the indexed corpus, left out of the sketches.
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
    resketched: int = 0
    template_lines: int = 0

    def to_dict(self) -> dict:
        return asdict(self)


def index_paths(index: Index) -> list[str]:
    """The paths the last run read (absolute), for an update given no paths.

    Raises
    ------
    IndexFileError
        The stored list does not read back (a damaged index).
    """
    with index.guard():
        row = index.connection.execute("SELECT roots FROM runs ORDER BY run DESC LIMIT 1").fetchone()
        roots = json.loads(row[0]) if row else []
        if not isinstance(roots, list) or not all(isinstance(root, str) for root in roots):
            raise StoredValueError("the paths of its last run are not a list of paths")
    return roots


def _batches(documents: Iterable) -> Iterator[list]:
    """Documents in batches of `BATCH_DOCUMENTS` (or `BATCH_CHARACTERS` of text)."""
    batch: list = []
    size = 0
    for doc in documents:
        batch.append(doc)
        size += len(doc.text) if doc.prepared is None else len(doc.prepared[0])
        if len(batch) >= BATCH_DOCUMENTS or size >= BATCH_CHARACTERS:
            yield batch
            batch, size = [], 0
    if batch:
        yield batch


def _normalized(batch: list) -> list:
    """The batch with every document normalized (those a reading process did not)."""
    todo = [doc for doc in batch if doc.prepared is None]
    if todo:
        prepare_documents(todo, parallel=True, lines=True)
    return batch


class _Documents:
    """The ``documents`` table during a run: each document read recorded, and the tally."""

    def __init__(self, connection, run: int) -> None:
        self.connection, self.run = connection, run
        self.known = {
            row[0]: row[1:]
            for row in connection.execute(
                "SELECT doc_id, content_hash, status, source, format, title, bytes, mtime, metadata, changed_run "
                "FROM documents"
            )
        }
        self.seen: set[str] = set()
        self.tally = {"added": 0, "changed": 0, "unchanged": 0, "removed": 0}
        self.replaced: set[str] = set()  # texts some document had before this run changed it

    def record(self, doc_id: str, fields: tuple) -> None:
        """Insert or update a document read; ``fields`` from the content hash to the metadata."""
        self.seen.add(doc_id)
        before = self.known.get(doc_id)
        if before is None:
            self.tally["added"] += 1
            self.connection.execute(
                "INSERT INTO documents (doc_id, content_hash, status, source, format, title, bytes, mtime, "
                "metadata, added_run, changed_run) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
                (doc_id, *fields, self.run, self.run),
            )
            return
        if before[1] != "present":
            what = "added"  # found again after it was removed
        elif before[0] != fields[0]:
            what = "changed"
            self.replaced.add(before[0])
        else:
            what = "unchanged"
        self.tally[what] += 1
        if tuple(before[:8]) != fields:  # an unchanged text may still have a new time or title
            self.connection.execute(
                "UPDATE documents SET content_hash = ?, status = ?, source = ?, format = ?, title = ?, "
                "bytes = ?, mtime = ?, metadata = ?, removed_run = NULL, changed_run = ? WHERE doc_id = ?",
                (*fields, self.run if what != "unchanged" else before[8], doc_id),
            )

    def count_skipped(self, ledger: list) -> None:
        """Files skipped by their modification time are present and unchanged."""
        for entry in ledger:
            if entry.reason == UNCHANGED_REASON and entry.document_id not in self.seen:
                self.seen.add(entry.document_id)
                self.tally["unchanged"] += 1

    def remove_missing(self) -> set[str]:
        """Mark the present documents not seen as removed; the texts they had."""
        gone = [
            doc_id for doc_id, row in self.known.items() if row[1] == "present" and doc_id not in self.seen
        ]
        self.connection.executemany(
            "UPDATE documents SET status = 'removed', removed_run = ? WHERE doc_id = ?",
            [(self.run, d) for d in gone],
        )
        self.tally["removed"] = len(gone)
        return {self.known[d][0] for d in gone}


def _fields(doc, original: bytes, digest: str) -> tuple:
    """A document's columns from ``content_hash`` to ``metadata``."""
    metadata = json.dumps(doc.metadata, sort_keys=True, ensure_ascii=False, default=str)
    return (digest, "present", doc.source, doc.format, doc.title or "", len(original), doc.mtime, metadata)


class _Run:
    """One build or update inside its write transaction: the steps in order (see the module notes)."""

    def __init__(
        self, connection, settings: AuditSettings, kind: str, rule: TemplateRule, progress: Progress
    ) -> None:
        self.db, self.settings, self.kind = connection, settings, kind
        self.rule, self.progress = rule, progress
        self.run = connection.execute("SELECT coalesce(max(run), 0) + 1 FROM runs").fetchone()[0]
        self.documents = _Documents(connection, self.run)
        self.first = text_sequence(connection)  # texts with larger ids are sketched by this run
        stored = {row[0] for row in connection.execute("SELECT content_hash FROM texts")}
        self.texts = NewTexts(connection, self.run, stored)
        self.ledger: list = []
        self.deleted = self.sketched = self.resketched = self.template_lines = 0

    def read(self, paths: Sequence[str]) -> None:
        """The read and normalize steps: every document recorded, its new text written."""
        reading = {key: getattr(self.settings, key) for key in read_keys()}
        known = self.documents.known
        unchanged = _unchanged_check(self.db, known, self.run) if self.kind == "update" else None
        documents = iter_documents(paths, ledger=self.ledger, unchanged=unchanged, prepare=PREPARE, **reading)
        self.progress.start("reading")
        for batch in _batches(documents):
            for doc in _normalized(batch):
                original, canonical, characters, digest = doc.prepared
                doc.prepared = None
                self.documents.record(doc.id, _fields(doc, original, digest))
                self.texts.offer(digest, canonical, characters)
                self.progress.advance()
        self.texts.flush()
        self.documents.count_skipped(self.ledger)
        self.progress.done(f"{len(self.documents.seen):,} documents")

    def remove_missing(self) -> None:
        """Documents not found are removed; texts no present document has are deleted."""
        gone = self.documents.remove_missing()
        self.deleted = delete_unused_texts(self.db, gone | self.documents.replaced)

    def templates(self) -> Boilerplate | None:
        """The template step over the whole indexed corpus; stored texts whose stripped form
        it changes are renumbered to be sketched again. None when nothing can have changed
        (no text came or went, same rule): then there is nothing to sketch either."""
        stored = load_templates(self.db)
        same_texts = not self.texts.written and not self.deleted
        if same_texts and stored is not None and stored.rule == self.rule.key():
            self.template_lines = int(stored.line_hashes.shape[0])
            return None
        self.progress.start("templates")
        corpus = CorpusLines.load(self.db, below=self.first + 1)
        counter = corpus.counter().merge(self.texts.counter)
        boilerplate = self.rule.find(counter)
        lines = changed_lines(stored, boilerplate, self.rule)
        changed = stripped_otherwise(self.db, corpus, lines, boilerplate, self.rule.max_text_share)
        self.resketched = renumber(self.db, changed, self.run)
        store_templates(self.db, self.rule, boilerplate, counter.texts)
        self.template_lines = len(boilerplate)
        self.progress.done(f"{len(boilerplate):,} template lines, {self.resketched:,} texts to sketch again")
        return boilerplate

    def sketch(self, boilerplate: Boilerplate | None) -> None:
        """The sketch step over the texts written or renumbered by this run."""
        if boilerplate is not None:
            self.sketched = sketch_texts(
                self.db, self.settings, boilerplate, after=self.first, run=self.run, progress=self.progress
            )

    def statistics(self) -> dict:
        """The TF-IDF statistics after the run (refreshed when the texts changed)."""
        self.progress.start("statistics")
        if self.sketched or self.deleted or self.kind == "build":
            statistics = refresh_statistics(
                self.db, self.run, self.settings.sublinear_tf, n_features=self.settings.tfidf_features
            )
        else:  # the same texts as before: the stored statistics still hold
            statistics = _stored_statistics(self.db)
        self.progress.done()
        return statistics

    def finish(self, statistics: dict, seconds: float) -> RunSummary:
        """Record the run's counts; its summary."""
        tally = self.documents.tally
        present = self.db.execute("SELECT count(*) FROM documents WHERE status = 'present'").fetchone()[0]
        counts = (tally["added"], tally["changed"], tally["removed"], tally["unchanged"], self.sketched)
        self.db.execute(
            "UPDATE runs SET seconds = ?, documents = ?, added = ?, changed = ?, removed = ?, unchanged = ?, "
            "sketched = ? WHERE run = ?",
            (seconds, present, *counts, self.run),
        )
        return RunSummary(
            self.run,
            self.kind,
            present,
            *counts,
            texts=statistics["texts"],
            seconds=seconds,
            inputs=summarize(self.ledger),
            statistics=statistics,
            resketched=self.resketched,
            template_lines=self.template_lines,
        )


def run_in(
    index: Index,
    db: sqlite3.Connection,
    paths: Sequence[str],
    settings: AuditSettings,
    progress: Progress,
    kind: str | None = None,
) -> RunSummary:
    """One build or update inside the caller's write transaction (`Index.writing`).

    `build` and `update` run it alone; ``dedup audit --index`` runs it in the transaction
    that records the audit, over the audit's inputs (`dedup.index.tracking`). ``kind``
    defaults to ``build`` for an index without runs, else ``update``.

    Raises
    ------
    dedup.InputError
        A path, or the ignore-text file, does not exist (nothing has been written).
    """
    started = time.perf_counter()
    missing = [p for p in paths if p != "-" and not os.path.exists(p)]
    if missing:
        raise InputError(f"no such file or folder: {missing[0]}")
    roots = [p if p == "-" else os.path.abspath(p) for p in paths]
    rule = TemplateRule.of(settings)  # reads the ignore-text file: fails before anything is written
    if kind is None:
        kind = "update" if db.execute("SELECT count(*) FROM runs").fetchone()[0] else "build"
    run = _Run(db, settings, kind, rule, progress)
    db.execute(
        "INSERT INTO runs (run, kind, started_at, roots) VALUES (?, ?, ?, ?)",
        (run.run, kind, utc_now(), json.dumps(roots)),
    )
    run.read(paths)
    run.remove_missing()
    run.sketch(run.templates())
    statistics = run.statistics()
    index.store_settings(settings)
    db.execute("DELETE FROM meta WHERE key = ?", (schema.NEEDS_UPDATE,))
    return run.finish(statistics, round(time.perf_counter() - started, 3))


def checkpoint(index: Index) -> None:
    """Fold the write-ahead log back into the file, so it does not stay as large as the run."""
    with index.guard():
        index.connection.execute("PRAGMA wal_checkpoint(TRUNCATE)")


def _run(
    index: Index, paths: Sequence[str], settings: AuditSettings, kind: str, progress: Progress
) -> RunSummary:
    with index.writing() as db:
        summary = run_in(index, db, paths, settings, progress, kind)
    checkpoint(index)
    return summary


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
        Sketch settings (shingles, MinHash, TF-IDF), template settings (``boilerplate``,
        ``boilerplate_*``, ``ignore_text_file``) and reading options, recorded in the
        index; default ``AuditSettings()``. A ``tfidf_features`` left unset hashes the
        terms into 2**20 columns (`dedup.index.store.index_choices`).

    Raises
    ------
    IndexFileError
        ``index_path`` already holds an index (use `update`), or is not an index file.
    dedup.InputError
        A path, or the ignore-text file, does not exist.

    Notes
    -----
    Cost O(total bytes) for reading, normalizing and sketching, plus writing every text's
    signature, shingles, term counts, line hashes and compressed canonical form once.
    """
    settings = index_choices(settings or AuditSettings()).validate()
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
        sketch settings (`SKETCH_KEYS`); their template settings and reading options are
        used and recorded (texts whose template lines they change are sketched again).
        A ``tfidf_features`` left unset takes the stored number (`index_choices`).

    Raises
    ------
    IndexFileError
        No index at ``index_path``, or not an index; `IndexSettingsError` when the
        sketch settings differ.
    dedup.InputError
        A path, or the ignore-text file, does not exist.

    Notes
    -----
    Cost: reading and normalizing every document whose file changed, O(their bytes);
    sketching only the new and changed texts and those whose template lines changed;
    when texts came or went, one pass over the stored line sets; one pass over the
    stored term counts for the statistics.
    """
    with open_index(index_path, settings) as index:
        stored = index.settings
        chosen = index_choices(settings or stored, stored).validate()
        roots = list(paths or []) or index_paths(index)
        if not roots:
            raise IndexFileError(f"the index {index_path} records no paths: give the paths to read")
        return _run(index, roots, chosen, "update", progress or Progress.silent())
