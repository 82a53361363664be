"""The HTML audit report: one self-contained file, rendered from jinja2 templates.

Autoescaping is on for every template, so document text, paths and metadata can never
become markup. A Content-Security-Policy meta tag forbids loading anything remote.
"""

from __future__ import annotations

import os
from functools import lru_cache

import jinja2

from .._version import __version__

__all__ = ["render_html", "template_folder"]


def template_folder() -> str:
    """Where the templates are: inside the installed package, or at the top of a checkout."""
    here = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
    for candidate in (
        os.path.join(here, "report_templates"),
        os.path.join(os.path.dirname(here), "report_templates"),
    ):
        if os.path.isdir(candidate):
            return candidate
    raise FileNotFoundError("report templates not found: reinstall dedup (pip install -e .)")


@lru_cache(maxsize=1)
def _environment() -> jinja2.Environment:
    env = jinja2.Environment(
        loader=jinja2.FileSystemLoader(template_folder()),
        autoescape=True,
        undefined=jinja2.StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
    )
    env.filters["pct"] = lambda x: "" if x is None else f"{x:.0%}"
    env.filters["score"] = lambda x: "" if x is None else f"{x:.3f}"
    env.filters["thousands"] = lambda x: f"{x:,}"
    return env


def render_html(result) -> str:
    """The report for an `AuditResult` as an HTML string."""
    skipped = [e for e in result.ledger if e.status != "read"]
    return (
        _environment()
        .get_template("report.html.j2")
        .render(
            result=result,
            data=result.to_dict(),
            skipped=skipped,
            version=__version__,
            generated=result.run.get("started", ""),
        )
    )
