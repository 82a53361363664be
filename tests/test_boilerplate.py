"""Boilerplate lines shared by many documents are left out of the comparison."""

from __future__ import annotations

import dedup
from dedup import AuditSettings
from dedup.cli import main

FOOTER = (
    "This page is maintained by the knowledge team of the cooperative. Report mistakes through the service "
    "portal, quoting the page title and the date you read it. Printed copies are not controlled documents "
    "and may be out of date; always check the intranet for the current version before acting on it. "
    "Questions about this procedure go to the duty supervisor of your depot, who keeps the signed register "
    "of changes and can confirm which version applied on a given day, for audits and for complaints alike."
)
BODIES = [
    "Meter readers visit every property once a quarter.",
    "Leave requests go to your line manager for approval.",
    "Reset your VPN password from the self-service portal.",
    "Vehicles are booked through the fleet calendar.",
    "Printers on the second floor need a badge to release jobs.",
]


def _corpus(write_corpus):
    return write_corpus({f"a{i}.md": f"{body}\n\n{FOOTER}\n" for i, body in enumerate(BODIES)})


def test_shared_footer_alone_does_not_make_duplicates(write_corpus):
    root = _corpus(write_corpus)
    kept = dedup.audit([str(root)], AuditSettings(boilerplate=False))
    assert len(kept.clusters) == 1 and kept.clusters[0]["size"] == 5  # the footer dominates each text
    result = dedup.audit([str(root)])
    assert result.clusters == []
    assert result.boilerplate["lines"] == 1 and result.boilerplate["top"][0]["texts"] == 5
    assert result.boilerplate["texts_affected"] == 5


def test_exact_copies_never_make_their_own_lines_boilerplate(write_corpus):
    article = "\n".join(
        f"Line {i} of the refund procedure explains one careful step in words." for i in range(12)
    )
    edited = article.replace("Line 5 of", "Row 5 of")
    files = {f"copy{i}.md": article for i in range(6)}
    files["edited.md"] = edited
    root = write_corpus(files)
    result = dedup.audit([str(root)])
    assert result.boilerplate["lines"] == 0
    assert len(result.clusters) == 1 and result.clusters[0]["size"] == 7


def test_ignore_text_file_is_always_left_out(write_corpus, tmp_path):
    root = write_corpus({"a.md": f"{BODIES[0]}\n{FOOTER}\n", "b.md": f"{BODIES[1]}\n{FOOTER}\n"})
    assert len(dedup.audit([str(root)]).clusters) == 1  # two texts: below the boilerplate limit
    known = tmp_path / "known.txt"
    known.write_text(FOOTER.upper() + "\n", encoding="utf-8")
    result = dedup.audit([str(root)], AuditSettings(ignore_text_file=str(known)))
    assert result.clusters == []
    assert result.boilerplate["top"][0]["texts"] == 2
    out = tmp_path / "out"
    assert main(["audit", str(root), "--out", str(out), "--ignore-text", str(tmp_path / "missing.txt")]) == 2
    assert (
        main(
            [
                "audit",
                str(root),
                "--out",
                str(out),
                "--ignore-text",
                str(known),
                "--fail-on",
                "any",
                "--quiet",
            ]
        )
        == 0
    )
    assert (
        main(["audit", str(root), "--out", str(out), "--keep-boilerplate", "--fail-on", "any", "--quiet"])
        == 1
    )
