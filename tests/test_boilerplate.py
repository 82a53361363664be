"""Boilerplate lines shared by many documents are left out of the comparison."""

from __future__ import annotations

from hypothesis import given, settings
from hypothesis import strategies as st

import dedup
from dedup import AuditSettings
from dedup.cli import main
from dedup.normalize import canonical_text
from dedup.normalize.boilerplate import canonical_lines

FOOTER = (
    "This page is maintained by the knowledge team of the cooperative. Report mistakes through the service "
    "portal, quoting the page title and the date you read it. Printed copies are not controlled documents "
    "and may be out of date; always check the intranet for the current version before acting on it. "
    "Questions about this procedure go to the duty supervisor of your depot, who keeps the signed register "
    "of changes and can confirm which version applied on a given day, for audits and for complaints alike."
)
BODIES = [
    " ".join(f"Meter reading step {i} covers the quarterly visit and the estimate rules." for i in range(12)),
    " ".join(
        f"Leave request rule {i} explains approval by the line manager and the calendar." for i in range(12)
    ),
    " ".join(
        f"VPN reset note {i} describes the portal, the token and the expiry reminder." for i in range(12)
    ),
    " ".join(
        f"Fleet booking item {i} lists the calendar, the keys and the fuel card return." for i in range(12)
    ),
    " ".join(
        f"Printer badge hint {i} says how jobs are released on the second floor today." for i in range(12)
    ),
]
# The footer is a large share of each text but less than half of it.
LOW = AuditSettings(threshold=0.3)


def _corpus(write_corpus):
    return write_corpus({f"a{i}.md": f"{body}\n\n{FOOTER}\n" for i, body in enumerate(BODIES)})


def test_shared_footer_alone_does_not_make_duplicates(write_corpus):
    root = _corpus(write_corpus)
    kept = dedup.audit([str(root)], LOW.replace(boilerplate=False))
    assert len(kept.clusters) == 1 and kept.clusters[0]["size"] == 5  # the footer alone links them
    result = dedup.audit([str(root)], LOW)
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
    assert len(dedup.audit([str(root)], LOW).clusters) == 1  # two texts: below the boilerplate limit
    known = tmp_path / "known.txt"
    known.write_text(FOOTER.upper() + "\n", encoding="utf-8")
    result = dedup.audit([str(root)], LOW.replace(ignore_text_file=str(known)))
    assert result.clusters == []
    assert result.boilerplate["top"][0]["texts"] == 2
    out = tmp_path / "out"
    assert main(["audit", str(root), "--out", str(out), "--ignore-text", str(tmp_path / "missing.txt")]) == 2
    low = ["--threshold", "0.3", "--fail-on", "any", "--quiet"]
    assert main(["audit", str(root), "--out", str(out), "--ignore-text", str(known), *low]) == 0
    assert main(["audit", str(root), "--out", str(out), "--keep-boilerplate", *low]) == 1


def test_a_family_of_generated_pages_is_compared_whole(write_corpus):
    """Lines shared by many near-copies are their content, not boilerplate around it."""
    template = "\n".join(
        f"Shared generated line {i} of the reference page for the command." for i in range(30)
    )
    files = {f"page{i}.txt": f"Page {i} describes command number {i}.\n{template}\n" for i in range(8)}
    root = write_corpus(files)
    result = dedup.audit([str(root)])
    assert result.boilerplate["lines"] == 30 and result.boilerplate["texts_compared_whole"] == 8
    assert len(result.clusters) == 1 and result.clusters[0]["size"] == 8


@settings(max_examples=400, deadline=None)
@given(st.text(alphabet=st.characters(codec="utf-8"), max_size=200))
def test_canonical_lines_joined_equal_the_canonical_text(text):
    """The audit hashes exact copies from the joined lines; it must equal canonical_text of the whole."""
    assert " ".join(canonical_lines(text)) == canonical_text(text)


NOTICE = [
    f"Notice line {i}: this handbook page is reviewed by the depot council each spring and summer."
    for i in range(10)
]


def _page(body_word: str, i: int) -> list[str]:
    return [
        f"{body_word} step {k} of procedure {i} covers the visit, the estimate and the reading."
        for k in range(12)
    ]


def test_a_copy_whose_template_lines_were_rewrapped_is_still_found(write_corpus):
    """Only the original loses its template lines when the copy's are re-wrapped: the two
    are compared whole as well, so the copy is found (and says it was compared whole)."""
    words = ["Meter", "Leave", "Fleet", "Badge", "Token", "Ferry"]
    files = {f"page{i}.txt": "\n".join(_page(w, i) + NOTICE) for i, w in enumerate(words)}
    body = _page(words[0], 0)
    body[3] = body[3].replace("estimate", "written estimate")
    rewrapped = [" ".join(NOTICE[k : k + 2]) for k in range(0, len(NOTICE), 2)]
    files["copy.txt"] = "\n".join(body + rewrapped)
    root = write_corpus(files)
    result = dedup.audit([str(root)])
    assert result.boilerplate["lines"] == len(NOTICE)
    pairs = {tuple(sorted((p["left"], p["right"]))): p for p in result.pairs}
    found = pairs[("copy.txt", "page0.txt")]
    assert found["templates_left_out"] == "none"
    assert found["jaccard"] == found["whole_text_jaccard"] >= 0.8
    assert set(pairs) == {("copy.txt", "page0.txt")}  # the pages sharing only the notice are no pair
