"""The persistent index: one SQLite file for scheduled audits, reviews and similarity search.

It keeps every document read (id, path, content hash, size, time, metadata), the
signature, shingles and TF-IDF term counts of every distinct text, the TF-IDF
statistics, the settings the sketches were built with, every audit recorded with it
and the review decisions imported from reports. The tables are described in
`dedup.index.schema`.

Texts are normalized, stripped of template lines and sketched by the audit's own steps
(`dedup.index.indexing`, `dedup.index.templates`, `dedup.index.texts`), so content
hashes, shingle sets and term counts are those `dedup.audit` gives the same corpus.

Use::

    from dedup.index import build, update, open_index, similar
    build(["docs/"], "docs.index")
    update(["docs/"], "docs.index")
    with open_index("docs.index") as index:
        similar(index, "how do I reset my password", k=5)

The index is written only by `build`, `update`, `track_audit` (a refresh over the
audit's inputs, the reviews and the audit record, together), `accept_latest` and
`import_decisions`, each in one transaction; documents are only ever read.
"""

from importlib import import_module

# Name -> module that defines it. Loaded on first use, so a search does not import the
# indexing and audit machinery (the command line starts faster).
_WHERE = {
    "Index": "store",
    "IndexFileError": "store",
    "IndexSettingsError": "store",
    "IndexBusyError": "store",
    "open_index": "store",
    "RunSummary": "indexing",
    "build": "indexing",
    "update": "indexing",
    "QueryError": "search",
    "similar": "search",
    "query_text_of_file": "search",
    "STATES": "history",
    "FAIL_ON": "history",
    "MATCHING_RULE": "history",
    "compare_clusters": "history",
    "record_audit": "history",
    "accept_latest": "history",
    "baseline_of": "history",
    "fails": "history",
    "assign_stable_ids": "lineage",
    "STOP_WORDS": "stopwords",
    "RANKINGS": "search",
    "DecisionsFileError": "decisions",
    "load_decisions_file": "decisions",
    "import_decisions": "decisions",
    "apply_decisions": "decisions",
    "track_audit": "tracking",
}
__all__ = list(_WHERE)


def __getattr__(name: str):
    if name in _WHERE:
        return getattr(import_module(f".{_WHERE[name]}", __name__), name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
