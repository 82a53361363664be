"""The ledger's summary: counts per status that add up, and reasons grouped by kind."""

from __future__ import annotations

from dedup.ingest import STATUSES, LedgerEntry, summarize


def test_summary_counts_add_up_and_group_reasons():
    entries = [
        LedgerEntry("a.txt", "read", document_id="a.txt"),
        LedgerEntry("b.txt", "truncated", "text cut to 5 of 9 characters", document_id="b.txt"),
        LedgerEntry("c.txt", "empty", "no text", document_id="c.txt"),
        LedgerEntry("d.png", "skipped", "unsupported file type .png"),
        LedgerEntry("e.csv", "skipped", "row 3: 4 cells where the header has 2", record="row 3"),
        LedgerEntry("e.csv", "skipped", "row 9: 1 cells where the header has 2", record="row 9"),
        LedgerEntry("f.pdf", "skipped", "no text layer — scanned? (3 pages)"),
        LedgerEntry("g.pdf", "skipped", "no text layer — scanned? (1 page)"),
        LedgerEntry("z.zip!/../x", "refused", "unsafe path in the archive: '..' leads outside it"),
    ]
    counts = summarize(entries)
    assert counts["entries"] == 9 == sum(counts[s] for s in STATUSES)
    assert counts["files"] == 8
    assert (counts["read"], counts["truncated"], counts["empty"], counts["skipped"], counts["refused"]) == (
        1,
        1,
        1,
        5,
        1,
    )
    assert counts["skip_reasons"] == {
        "1 cells where the header has 2": 1,
        "4 cells where the header has 2": 1,
        "no text layer — scanned?": 2,
        "unsafe path in the archive": 1,
        "unsupported file type .png": 1,
    }
