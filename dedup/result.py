"""What an audit found: `AuditResult`, the content of ``audit.json`` and the exports."""

from __future__ import annotations

from dataclasses import dataclass, field

from . import __version__
from .ingest import LedgerEntry
from .progress import Progress
from .settings import AuditSettings

__all__ = ["AuditResult", "SCHEMA_VERSION", "NOTICE"]

SCHEMA_VERSION = "1.0"


@dataclass(repr=False)
class AuditResult:
    """Everything an audit found, ready to be written as JSON, CSV and HTML.

    Attributes
    ----------
    settings : AuditSettings
    inputs : list of str
        The paths as given.
    ledger : list of LedgerEntry
        One entry per input (file or record).
    documents : list of dict
        Every document read (including empty ones), in id order.
    exact_groups : list of dict
    pairs : list of dict
        Confirmed pairs with all scores.
    clusters : list of dict
    actions : list of dict
        One proposed action per document.
    candidates : dict
        How candidates were found and the expected recall.
    tfidf : dict
        Hashed feature space and its collisions.
    warnings : list of dict
    run : dict
        Timings and peak memory of this run; not part of ``audit.json`` (which must
        be byte-identical between runs) but written to ``run.json``.
    passages : list of dict
        Shared passages of the confirmed pairs and of each cluster member with its keeper
        (character offsets into the texts as read; see `dedup.report.records.passage_records`).
    unique_runs : list of dict
        Text of a near-duplicate that its keeper lacks (runs of at least
        ``unique_min_words`` words): what must be merged before it is retired.
    texts : dict
        Original text of every clustered document, for the report's evidence view.
    delta : dict or None
        With an index: what changed since the last audit (see `dedup.index`).
    metadata : dict
        Document id → the other columns of its row, for rows given in memory (a
        DataFrame's columns besides the id and the text); carried into the frames, not
        into ``audit.json``.

    Tables: ``pairs_frame()``, ``clusters_frame()``, ``actions_frame()``,
    ``documents_frame()``, ``ledger_frame()``, ``passages_frame()`` (see `dedup.frames`).
    """

    settings: AuditSettings
    inputs: list[str]
    ledger: list[LedgerEntry]
    documents: list[dict]
    exact_groups: list[dict]
    pairs: list[dict]
    clusters: list[dict]
    actions: list[dict]
    candidates: dict
    tfidf: dict
    warnings: list[dict]
    summary: dict
    boilerplate: dict
    audit_id: str
    run: dict = field(default_factory=dict)
    passages: list[dict] = field(default_factory=list)
    unique_runs: list[dict] = field(default_factory=list)
    texts: dict = field(default_factory=dict)
    delta: dict | None = None
    metadata: dict = field(default_factory=dict)

    def __repr__(self) -> str:
        s = self.summary
        return (
            f"AuditResult({_count(s.get('documents_with_text', 0), 'document')} read, "
            f"{_count(s.get('exact_groups', 0), 'exact group')}, {_count(s.get('clusters', 0), 'cluster')})"
        )

    def _repr_html_(self) -> str:
        """A compact summary for notebooks (see `dedup.report.summary_html`)."""
        from .report.summary import summary_html

        return summary_html(self)

    def frame(self, name: str, kind: str | None = None):
        """The table ``name`` (pairs, clusters, actions, documents, ledger, passages) as a
        pandas DataFrame, or a pyarrow Table (``kind="arrow"``, or without pandas)."""
        from .frames import FRAMES, frame_of

        if name not in FRAMES:
            raise KeyError(f"no frame {name!r}; the frames are {', '.join(FRAMES)}")
        rows, columns = FRAMES[name](self)
        return frame_of(rows, columns, kind)

    def pairs_frame(self, kind: str | None = None):
        """Confirmed pairs with every score: the rows of pairs.csv."""
        return self.frame("pairs", kind)

    def clusters_frame(self, kind: str | None = None):
        """One row per cluster member with its role and scores: the rows of clusters.csv."""
        return self.frame("clusters", kind)

    def actions_frame(self, kind: str | None = None):
        """One proposed action per document (with the rows' metadata): actions.csv."""
        return self.frame("actions", kind)

    def documents_frame(self, kind: str | None = None):
        """Every document read, with the rows' metadata."""
        return self.frame("documents", kind)

    def ledger_frame(self, kind: str | None = None):
        """What became of every input: the rows of ledger.csv."""
        return self.frame("ledger", kind)

    def passages_frame(self, kind: str | None = None):
        """Shared passages with character offsets into both texts: passages.csv."""
        return self.frame("passages", kind)

    def to_dict(self, lazy: bool = False) -> dict:
        """The content of ``audit.json`` (deterministic: no clock, no host, no absolute path).

        With ``lazy`` the ledger is a generator of records (for writing, not keeping).
        """
        return {
            "schema_version": SCHEMA_VERSION,
            "tool": {"name": "dedup", "version": __version__},
            "audit_id": self.audit_id,
            "notice": NOTICE,
            "inputs": self.inputs,
            "settings": self.settings.to_dict(),
            "summary": self.summary,
            "candidates": self.candidates,
            "tfidf": self.tfidf,
            "boilerplate": self.boilerplate,
            "warnings": self.warnings,
            "ledger": (e.to_dict() for e in self.ledger) if lazy else [e.to_dict() for e in self.ledger],
            "documents": self.documents,
            "exact_groups": self.exact_groups,
            "pairs": self.pairs,
            "clusters": self.clusters,
            "actions": self.actions,
            "passages": self.passages,
            "unique_runs": self.unique_runs,
            **({"delta": self.delta} if self.delta is not None else {}),
        }

    def write(self, out_dir: str, progress: Progress | None = None, report: bool = True) -> dict[str, str]:
        """Write every output file into ``out_dir`` (``report=False``: all but report.html);
        returns name → path."""
        from .report import write_outputs

        return write_outputs(self, out_dir, progress=progress, report=report)


NOTICE = (
    "Similarity is evidence for a person to review, not a verdict: quotations, citations, shared "
    "templates and common phrasing match too. This tool only reads its inputs; the actions are "
    "proposals and no file has been changed, moved or deleted."
)


def _count(n: int, noun: str) -> str:
    return f"{n:,} {noun}" + ("" if n == 1 else "s")
