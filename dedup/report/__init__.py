"""Report: audit.json, CSV exports and the HTML audit report."""

from __future__ import annotations

import os

from .files import (
    ACTION_COLUMNS,
    CLUSTER_COLUMNS,
    LEDGER_COLUMNS,
    PAIR_COLUMNS,
    StagedFiles,
    check_out_folder,
    cluster_rows,
    ensure_folder,
    write_csv,
    write_json,
)
from .html import iter_html, render_html
from .migration import write_migration
from .records import PASSAGE_COLUMNS

__all__ = ["write_outputs", "render_html", "RECORD_LISTS"]

# Lists of audit.json written one record per line.
RECORD_LISTS = (
    "ledger",
    "documents",
    "exact_groups",
    "pairs",
    "clusters",
    "actions",
    "passages",
    "unique_runs",
)


def write_outputs(result, out_dir: str, progress=None, report: bool = True) -> dict[str, str]:
    """Write all outputs of an audit into ``out_dir`` (created if needed); ``report=False``
    leaves out report.html (for pipelines that only read the data files).

    Every output is written to a temporary file beside it and all are renamed into place
    together at the end (`StagedFiles`): a link in ``out_dir`` is replaced, never written
    through, and a failure while writing leaves the previous outputs as they were.

    Raises
    ------
    OutputFolderError
        ``out_dir`` holds a file named like an output that dedup did not write
        (`check_out_folder`); nothing is written.
    """
    from ..progress import Progress

    progress = progress or Progress.silent()
    ensure_folder(out_dir)
    check_out_folder(out_dir)
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
    with StagedFiles() as staged:
        write_json(paths["audit.json"], data, RECORD_LISTS, staged)
        write_csv(paths["pairs.csv"], result.pairs, PAIR_COLUMNS, staged)
        write_csv(paths["clusters.csv"], cluster_rows(result.clusters), CLUSTER_COLUMNS, staged)
        write_csv(paths["actions.csv"], result.actions, ACTION_COLUMNS, staged)
        write_csv(paths["ledger.csv"], (e.to_dict() for e in result.ledger), LEDGER_COLUMNS, staged)
        write_csv(paths["passages.csv"], result.passages, PASSAGE_COLUMNS, staged)
        write_json(paths["run.json"], {"audit_id": result.audit_id, **result.run}, staged=staged)
        paths.update(
            write_migration(
                out_dir,
                documents=result.documents,
                clusters=result.clusters,
                actions=result.actions,
                unique_runs=result.unique_runs,
                texts=result.texts,
                base_url=result.settings.base_url,
                staged=staged,
            )
        )
        if report:
            with staged.open(paths["report.html"], "\n") as handle:
                handle.writelines(iter_html(result, progress))
    progress.done()
    return paths
