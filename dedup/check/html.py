"""The class check report, check.html: one self-contained page, rendered from our own templates.

Layout: the caution first; a class overview (every submission, sorted by the share of its
text found elsewhere); groups of submissions sharing passages and references used by
several; then one page per submission (shown when its link is followed): its sources
ranked, a reading of its text with each matched stretch marked and its source named, and
its passages, each with the source's words beneath.

Safety: autoescaping is on, so document text, ids and paths never become markup; the
page's small script reads no data and writes no text. A Content-Security-Policy meta tag
forbids every remote load and allows only our own inline script and style, by their
SHA-256 hashes. Cost O(text of the submissions + passages).
"""

from __future__ import annotations

import os

from .._version import __version__
from ..report.html import csp_hash, template_environment, template_folder
from .result import CheckResult
from .wording import CAUTION, REASON_WORDS

__all__ = ["render_check_html", "reading_segments", "SOURCE_EXCERPT_CHARS"]

# Characters of a source shown under each passage (longer stretches are cut, and marked).
SOURCE_EXCERPT_CHARS = 1500


def reading_segments(text: str, marks: list[tuple[int, int, str]], left_out: list[dict]) -> list[dict]:
    """The text cut where a mark or a left-out stretch starts or ends.

    ``marks`` are (start, end, source label) of counted passages; each segment has its
    ``text``, the ``sources`` marking it and the ``reason`` it is left out (or ""), and
    ``tag`` (the sources named after the last segment of a marked run).

    >>> [(s["text"], s["sources"], s["tag"]) for s in reading_segments("ab cd ef", [(3, 5, "R")], [])]
    [('ab ', [], []), ('cd', ['R'], ['R']), (' ef', [], [])]
    """
    cuts = {0, len(text)}
    for a, b, _ in marks:
        cuts.update((a, b))
    for r in left_out:
        cuts.update((r["start"], r["end"]))
    points = sorted(c for c in cuts if 0 <= c <= len(text))
    segments: list[dict] = []
    for a, b in zip(points[:-1], points[1:]):
        sources = sorted({label for s, e, label in marks if s < b and a < e})
        reason = next((r["reason"] for r in left_out if r["start"] < b and a < r["end"]), "")
        if segments and segments[-1]["sources"] == sources and segments[-1]["reason"] == reason:
            segments[-1]["text"] += text[a:b]
        else:
            segments.append({"text": text[a:b], "sources": sources, "reason": reason, "tag": []})
    for n, seg in enumerate(segments):
        following = segments[n + 1]["sources"] if n + 1 < len(segments) else []
        if seg["sources"] and not set(seg["sources"]) <= set(following):
            seg["tag"] = seg["sources"]
    return segments


def _excerpt(text: str, start: int, end: int) -> str:
    if end - start <= SOURCE_EXCERPT_CHARS:
        return text[start:end]
    return text[start : start + SOURCE_EXCERPT_CHARS] + " …"


def _pages(result: CheckResult) -> list[dict]:
    """Per submission, what its page shows: record, reading segments and passages with excerpts."""
    by_sub: dict[str, list[dict]] = {}
    for m in result.matches:
        by_sub.setdefault(m["submission"], []).append(m)
    pages = []
    for n, record in enumerate(
        sorted(result.submissions, key=lambda r: (-r["share_matched"], r["submission"]))
    ):
        text = result.texts[("submission", record["submission"])]
        rows = by_sub.get(record["submission"], [])
        marks = [
            (m["submission_start"], m["submission_end"], m["source"])
            for m in rows
            if m["status"] == "counted"
        ]
        passages = [
            {
                **m,
                "excerpt": text[m["submission_start"] : m["submission_end"]],
                "source_excerpt": _excerpt(
                    result.texts[(m["source_kind"], m["source"])], m["source_start"], m["source_end"]
                ),
                "reason_words": REASON_WORDS.get(m["reason"], ""),
            }
            for m in rows
        ]
        pages.append(
            {
                "anchor": f"s-{n + 1}",
                "record": record,
                "segments": reading_segments(text, marks, record["left_out"]),
                "passages": passages,
            }
        )
    return pages


def render_check_html(result: CheckResult) -> str:
    """check.html for ``result`` as one string."""
    folder = template_folder()
    with open(os.path.join(folder, "check.js"), encoding="utf-8") as handle:
        script = handle.read()
    with open(os.path.join(folder, "check.css"), encoding="utf-8") as handle:
        style = handle.read()
    pages = _pages(result)
    return (
        template_environment()
        .get_template("check.html.j2")
        .render(
            result=result,
            pages=pages,
            anchors={p["record"]["submission"]: p["anchor"] for p in pages},
            caution=CAUTION,
            reasons=REASON_WORDS,
            version=__version__,
            settings=result.settings,
            script=script,
            style=style,
            script_hash=csp_hash(script),
            style_hash=csp_hash(style),
        )
    )
