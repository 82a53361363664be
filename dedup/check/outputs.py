"""Writing a class check's files: check.json, matches.csv, submissions.csv, ledger.csv, check.html.

The JSON and CSV files are byte-identical for the same inputs and settings (fixed order,
``\\n`` line ends, UTF-8; CSV floats with six decimals), written with
`dedup.report.files`. Cost O(size of the outputs).
"""

from __future__ import annotations

import os

from ..report.files import write_csv, write_json
from .result import LEDGER_COLUMNS, MATCH_COLUMNS, SUBMISSION_COLUMNS, CheckResult

__all__ = ["write_outputs", "FILES"]

FILES = ("check.json", "matches.csv", "submissions.csv", "ledger.csv", "check.html")


def write_outputs(result: CheckResult, out_dir: str, report: bool = True) -> dict[str, str]:
    """Every output of ``result`` in ``out_dir``; returns file name -> path."""
    os.makedirs(out_dir, exist_ok=True)
    paths = {name: os.path.join(out_dir, name) for name in FILES if report or name != "check.html"}
    write_json(paths["check.json"], result.to_dict(), record_lists=("matches", "ledger"))
    write_csv(paths["matches.csv"], result.match_rows(), MATCH_COLUMNS)
    write_csv(paths["submissions.csv"], result.submission_rows(), SUBMISSION_COLUMNS)
    write_csv(paths["ledger.csv"], result.ledger, LEDGER_COLUMNS)
    if report:
        from .html import render_check_html

        with open(paths["check.html"], "w", encoding="utf-8", newline="\n") as handle:
            handle.write(render_check_html(result))
    return paths
