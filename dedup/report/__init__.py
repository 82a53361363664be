"""Report: audit.json, CSV exports and the HTML audit report."""

from __future__ import annotations

import os

from .files import (
    ACTION_COLUMNS,
    CLUSTER_COLUMNS,
    LEDGER_COLUMNS,
    PAIR_COLUMNS,
    cluster_rows,
    ensure_folder,
    write_csv,
    write_json,
)
from .html import iter_html, render_html
from .records import PASSAGE_COLUMNS

__all__ = ["write_outputs", "render_html", "RECORD_LISTS"]

# Lists of audit.json written one record per line.
RECORD_LISTS = ("ledger", "documents", "exact_groups", "pairs", "clusters", "actions", "passages")


def write_outputs(result, out_dir: str, progress=None, report: bool = True) -> dict[str, str]:
    """Write all outputs of an audit into ``out_dir`` (created if needed); ``report=False``
    leaves out report.html (for pipelines that only read the data files)."""
    from ..progress import Progress

    progress = progress or Progress.silent()
    ensure_folder(out_dir)
    paths = {
        name: os.path.join(out_dir, name)
        for name in (
            "audit.json",
            "pairs.csv",
            "clusters.csv",
            "actions.csv",
            "ledger.csv",
            "passages.csv",
            "run.json",
            *(("report.html",) if report else ()),
        )
    }
    progress.start("writing")
    data = result.to_dict(lazy=True)
    write_json(paths["audit.json"], data, RECORD_LISTS)
    write_csv(paths["pairs.csv"], result.pairs, PAIR_COLUMNS)
    write_csv(paths["clusters.csv"], cluster_rows(result.clusters), CLUSTER_COLUMNS)
    write_csv(paths["actions.csv"], result.actions, ACTION_COLUMNS)
    write_csv(paths["ledger.csv"], (e.to_dict() for e in result.ledger), LEDGER_COLUMNS)
    write_csv(paths["passages.csv"], result.passages, PASSAGE_COLUMNS)
    write_json(paths["run.json"], {"audit_id": result.audit_id, **result.run})
    if report:
        with open(paths["report.html"], "w", encoding="utf-8", newline="\n") as handle:
            handle.writelines(iter_html(result, progress))
    progress.done()
    return paths
