"""A compact HTML summary of an audit, for notebooks (``AuditResult._repr_html_``).

The counts a reader looks at first and the largest clusters, in a few lines; the full
evidence is in the report (``result.write(folder)``). Every value is escaped.
"""

from __future__ import annotations

from html import escape

__all__ = ["summary_html", "SHOWN_CLUSTERS"]

SHOWN_CLUSTERS = 5


def _row(label: str, value) -> str:
    shown = f"{value:,}" if isinstance(value, int) else str(value)
    return f"<tr><th style='text-align:left'>{escape(label)}</th><td>{escape(shown)}</td></tr>"


def _counts(summary: dict) -> list[str]:
    inputs = summary.get("inputs", {})
    return [
        _row("documents read", summary.get("documents_with_text", 0)),
        _row("inputs skipped", inputs.get("skipped", 0)),
        _row("exact groups", summary.get("exact_groups", 0)),
        _row("clusters", summary.get("clusters", 0)),
        _row("proposed to retire", summary.get("retire_documents", 0)),
        _row("to merge before retiring", summary.get("merge_documents", 0)),
        _row("to review", summary.get("review_documents", 0)),
    ]


def _largest(clusters: list[dict]) -> str:
    if not clusters:
        return ""
    largest = sorted(clusters, key=lambda c: (-c["size"], c["id"]))[:SHOWN_CLUSTERS]
    head = "<tr><th>cluster</th><th>size</th><th>kind</th><th>keeper</th></tr>"
    rows = "".join(
        f"<tr><td>{escape(c['id'])}</td><td>{c['size']:,}</td><td>{escape(c['kind'])}</td>"
        f"<td>{escape(c['keeper'])}</td></tr>"
        for c in largest
    )
    more = len(clusters) - len(largest)
    tail = f"<p>… and {more:,} more (<code>result.clusters_frame()</code>)</p>" if more > 0 else ""
    return f"<p>Largest clusters</p><table>{head}{rows}</table>{tail}"


def summary_html(result) -> str:
    """The summary of ``result`` as one HTML fragment (no script, no style sheet).

    Cost: a sort of the clusters by size.
    """
    from ..result import NOTICE

    counts = "".join(_counts(result.summary))
    return (
        "<div class='dedup-summary'>"
        f"<p><strong>dedup audit</strong> {escape(result.audit_id)}</p>"
        f"<table>{counts}</table>"
        f"{_largest(result.clusters)}"
        f"<p><small>{escape(NOTICE)}</small></p>"
        "</div>"
    )
