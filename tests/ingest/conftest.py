"""Helpers for the ingest tests: read a tree, and check that the ledger accounts for everything."""

from __future__ import annotations

import pytest

from dedup.ingest import STATUSES, iter_documents, summarize


def check_ledger(docs, ledger) -> None:
    """Every document has exactly one entry and every entry is well formed.

    Fails when an entry has an unknown status, when two entries name the same input
    and record, when a document has no entry (or several), or when an entry claims a
    document that was not produced.
    """
    assert all(e.status in STATUSES for e in ledger), {e.status for e in ledger}
    keys = [(e.input, e.record) for e in ledger]
    assert len(keys) == len(set(keys)), "an input or record is in the ledger twice"
    claimed = [e.document_id for e in ledger if e.document_id]
    assert sorted(claimed) == sorted(d.id for d in docs)
    assert len(claimed) == len(set(claimed))
    for e in ledger:
        if e.document_id:
            assert e.status in ("read", "truncated", "empty"), e
        else:  # "empty" without a document: a records file or archive that holds nothing
            assert e.status in ("skipped", "refused", "empty"), e
        if e.status in ("skipped", "refused"):
            assert e.reason, e
    counts = summarize(ledger)
    assert counts["entries"] == sum(counts[s] for s in STATUSES) == len(ledger)


@pytest.fixture(scope="session")
def ledger_check():
    """`check_ledger`, for tests that call readers directly."""
    return check_ledger


@pytest.fixture
def read():
    """``read(paths, **options) -> (documents, ledger, {input or input#record: entry})``, checked."""

    def run(paths, **kw):
        ledger = []
        paths = [str(p) for p in (paths if isinstance(paths, (list, tuple)) else [paths])]
        docs = list(iter_documents(paths, ledger=ledger, **kw))
        check_ledger(docs, ledger)
        by_key = {(f"{e.input}#{e.record}" if e.record else e.input): e for e in ledger}
        return docs, ledger, by_key

    return run
