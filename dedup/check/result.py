"""What a class check found: `CheckResult`, the content of check.json and its CSV files.

check.json holds, in this order: the schema and tool version, the caution notice, the
settings, a summary, one record per submission (with the stretches left out and its
sources ranked), every passage (``matches``), the groups of submissions sharing
passages, the references used by several submissions, and the ledger of every input.
It is deterministic: no clock, no host, no absolute path that was not given.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .._version import __version__
from ..align import WordSpans
from .groups import peer_groups, shared_sources
from .inputs import ledger_rows
from .passages import Passage
from .records import pair_figures, passage_rows, submission_records
from .settings import CheckSettings
from .wording import CAUTION

__all__ = ["CheckResult", "SCHEMA", "MATCH_COLUMNS", "SUBMISSION_COLUMNS", "LEDGER_COLUMNS"]

SCHEMA = "dedup-check/1"
MATCH_COLUMNS = [
    "submission", "source", "source_kind", "submission_start", "submission_end", "source_start",
    "source_end", "words", "source_words", "similarity", "moved", "status", "reason", "cited", "via",
]  # fmt: skip
SUBMISSION_COLUMNS = [
    "submission", "words", "counted_words", "share_matched", "matched_words", "top_source",
    "top_source_kind", "top_source_share", "sources", "passages", "excluded_passages",
    "excluded_quoted", "excluded_reference_list", "excluded_template", "excluded_same_source",
    "excluded_short", "group",
]  # fmt: skip
LEDGER_COLUMNS = ["role", "input", "record", "status", "reason", "format", "size", "encoding", "document_id"]


@dataclass
class CheckResult:
    """Everything a class check found, ready to be written.

    Attributes
    ----------
    settings : CheckSettings
    summary : dict
        Counts: submissions, references read and compared, candidate pairs, passages, groups.
    submissions : list of dict
        One record per submission, by id (see `dedup.check.records.submission_records`).
    matches : list of dict
        One row per passage read from a submission's side (columns `MATCH_COLUMNS`).
    groups, shared_sources : list of dict
        Submissions linked by shared passages; references used by several submissions.
    ledger : list of dict
        Every input with its role and what became of it.
    texts : dict
        ``(kind, id) -> text`` of every submission and compared reference, for the report.
    run : dict
        Not in check.json: what varies between runs (the caller may add timings).
    """

    settings: CheckSettings
    summary: dict
    submissions: list[dict]
    matches: list[dict]
    groups: list[dict]
    shared_sources: list[dict]
    ledger: list[dict]
    texts: dict = field(default_factory=dict)
    run: dict = field(default_factory=dict)

    @classmethod
    def assemble(
        cls,
        *,
        settings: CheckSettings,
        ids: list[str],
        texts: list[str],
        is_sub: np.ndarray,
        words: WordSpans,
        codes: np.ndarray,
        regions: list,
        passages: list[Passage],
        counted: tuple[np.ndarray, np.ndarray],
        full: tuple[np.ndarray, np.ndarray],
        ledger: list,
        stats: dict,
    ) -> CheckResult:
        """Gather the records from the steps' outputs (see `dedup.check.run`)."""
        figures = pair_figures(passages, counted, full)
        groups, group_of = peer_groups(passages, ids, is_sub)
        records = submission_records(
            passages, figures, ids, is_sub, words.offsets, codes, (counted, full), group_of
        )
        left_out = {
            ids[d]: [
                {"start": r.start, "end": r.end, "reason": r.reason, "cited": r.cited} for r in regions[d]
            ]
            for d in np.flatnonzero(is_sub).tolist()
        }
        for record in records:
            record["left_out"] = left_out[record["submission"]]
        matches = passage_rows(passages, ids, is_sub)
        summary = {
            "submissions": int(is_sub.sum()),
            "references_read": stats["references"],
            "references_compared": stats["references_compared"],
            "candidate_pairs": stats["candidate_pairs"],
            "passages_counted": sum(m["status"] == "counted" for m in matches),
            "passages_excluded": sum(m["status"] != "counted" for m in matches),
            "groups": len(groups),
        }
        kinds = ["submission" if s else "reference" for s in is_sub.tolist()]
        return cls(
            settings=settings,
            summary=summary,
            submissions=records,
            matches=matches,
            groups=groups,
            shared_sources=shared_sources(passages, ids, is_sub),
            ledger=ledger_rows(ledger),
            texts={(k, i): t for k, i, t in zip(kinds, ids, texts)},
        )

    def to_dict(self) -> dict:
        """The content of check.json."""
        return {
            "schema": SCHEMA,
            "tool": {"name": "dedup", "version": __version__},
            "caution": list(CAUTION),
            "settings": self.settings.to_dict(),
            "summary": self.summary,
            "submissions": self.submissions,
            "matches": self.matches,
            "groups": self.groups,
            "shared_sources": self.shared_sources,
            "ledger": self.ledger,
        }

    def submission_rows(self) -> list[dict]:
        """One row per submission for submissions.csv."""
        rows = []
        for r in self.submissions:
            by = r["excluded_by_reason"]
            rows.append(
                {
                    **{c: r.get(c) for c in SUBMISSION_COLUMNS if c in r},
                    "sources": sum(1 for s in r["sources"] if s["passages"]),
                    **{
                        f"excluded_{k.replace(' ', '_')}": by.get(k, 0)
                        for k in ("quoted", "reference list", "template", "same source", "short")
                    },
                }
            )
        return rows

    def match_rows(self) -> list[dict]:
        """matches.csv rows: booleans as true/false, ``via`` joined by ``;``."""
        return [
            {
                **m,
                "moved": str(m["moved"]).lower(),
                "cited": str(m["cited"]).lower(),
                "via": ";".join(m["via"]),
            }
            for m in self.matches
        ]

    def write(self, out_dir: str, report: bool = True) -> dict[str, str]:
        """Write check.json, matches.csv, submissions.csv, ledger.csv and (``report``) check.html
        into ``out_dir`` (created if needed); returns name -> path."""
        from .outputs import write_outputs

        return write_outputs(self, out_dir, report=report)
