"""Exports for a migration: redirects, the merge worklist, and the documents that remain.

They follow the proposals, which a person reviews first: nothing has been retired, merged
or moved (the tool only reads its inputs).

``redirects.csv`` / ``redirects.json``
    Every member proposed for retirement (``retire``, or ``merge-then-retire``: valid
    once its runs are merged) → its cluster's keeper, with URLs when a base URL is given.
    A keeper is never retired, so no redirect leads to another redirect.
``merge-worklist.csv``
    Every unique run of a near-duplicate (`dedup.cluster.loss.settle_actions`): the text
    its keeper lacks, with its character span in the member's original text, so an
    editor can carry it over. A run whose text (after normalization) equals an earlier
    run for the same keeper names that run (``same_as_*``): carry it over once.
``keep.csv`` / ``keep.txt``
    The documents that remain once the proposals are carried out: keepers, documents in
    no cluster, and every document proposed for review (a person decides those).

A document's URL is the base URL followed by its id, percent-encoded (`document_url`),
for documents that are files of their own; a record of a records file or a member of an
archive has none. All files are byte-identical for the same inputs, rows sorted by id
(worklist: by cluster, member, run). Cost O(documents + runs + characters of the runs).
"""

from __future__ import annotations

import os
from collections.abc import Mapping, Sequence
from urllib.parse import quote

from ..cluster.actions import RETIRING_ACTIONS
from ..normalize import canonical_text
from .files import StagedFiles, write_csv, write_json

__all__ = [
    "REDIRECT_COLUMNS",
    "MERGE_COLUMNS",
    "KEEP_COLUMNS",
    "MIGRATION_FILES",
    "document_url",
    "redirect_records",
    "merge_worklist_records",
    "keep_records",
    "write_migration",
]

REDIRECT_COLUMNS = ["from_id", "to_id", "action", "cluster_id", "from_url", "to_url"]
MERGE_COLUMNS = [
    "document_id",
    "keeper",
    "cluster_id",
    "action",
    "run",
    "start",
    "end",
    "words",
    "same_as_document",
    "same_as_run",
    "text",
]
KEEP_COLUMNS = ["document_id", "kept_as", "cluster_id", "url"]
# What a worklist row takes from its unique run record.
_RUN_KEYS = ("document_id", "keeper", "cluster_id", "action", "run", "start", "end", "words")
MIGRATION_FILES = ("redirects.csv", "redirects.json", "merge-worklist.csv", "keep.csv", "keep.txt")


def document_url(doc_id: str, source: str | None, base_url: str | None) -> str | None:
    """``base_url`` + ``/`` + the id, percent-encoded, for a document that is a file of its
    own (its id is its source path, not an archive member); else None. O(len(id)).

    >>> document_url("guides/set up.md", "guides/set up.md", "https://wiki.example.org/kb/")
    'https://wiki.example.org/kb/guides/set%20up.md'
    >>> document_url("notes.jsonl#7", "notes.jsonl", "https://wiki.example.org") is None
    True
    """
    if base_url is None or doc_id != source or "!/" in doc_id:
        return None
    return base_url.rstrip("/") + "/" + quote(doc_id, safe="/")


def _sources(documents: Sequence[dict]) -> dict[str, str | None]:
    return {rec["id"]: rec.get("source") for rec in documents}


def redirect_records(clusters: Sequence[dict], documents: Sequence[dict], base_url: str | None) -> list[dict]:
    """One redirect per member proposed for retirement (plainly or after a merge), to its
    keeper, sorted by ``from_id``."""
    source = _sources(documents)
    rows = [
        {
            "from_id": m["document_id"],
            "to_id": c["keeper"],
            "action": m["action"],
            "cluster_id": c["id"],
            "from_url": document_url(m["document_id"], source.get(m["document_id"]), base_url),
            "to_url": document_url(c["keeper"], source.get(c["keeper"]), base_url),
        }
        for c in clusters
        for m in c["members"]
        if m["action"] in RETIRING_ACTIONS
    ]
    rows.sort(key=lambda r: r["from_id"])
    return rows


def merge_worklist_records(unique_runs: Sequence[dict], texts: Mapping[str, str]) -> list[dict]:
    """One row per unique run, in the order given, with its text from ``texts`` (original
    texts by id); ``same_as_*`` name the first earlier run for the same keeper with the
    same canonical text."""
    first: dict[tuple[str, str], tuple[str, int]] = {}
    rows = []
    for run in unique_runs:
        text = texts[run["document_id"]][run["start"] : run["end"]]
        same = first.setdefault((run["keeper"], canonical_text(text)), (run["document_id"], run["run"]))
        earlier = same != (run["document_id"], run["run"])
        rows.append(
            {
                **{key: run[key] for key in _RUN_KEYS},
                "same_as_document": same[0] if earlier else None,
                "same_as_run": same[1] if earlier else None,
                "text": text,
            }
        )
    return rows


def keep_records(
    actions: Sequence[dict], clusters: Sequence[dict], documents: Sequence[dict], base_url: str | None
) -> list[dict]:
    """The documents that remain after the proposals, in the order of ``actions`` (id
    order): ``kept_as`` is ``keeper``, ``review`` or ``unclustered``."""
    keepers = {c["keeper"] for c in clusters}
    source = _sources(documents)
    rows = []
    for a in actions:
        if a["action"] in RETIRING_ACTIONS:
            continue
        doc = a["document_id"]
        kept_as = "keeper" if doc in keepers else ("review" if a["action"] == "review" else "unclustered")
        url = document_url(doc, source.get(doc), base_url)
        rows.append({"document_id": doc, "kept_as": kept_as, "cluster_id": a["cluster_id"], "url": url})
    return rows


def write_migration(
    out_dir: str,
    *,
    documents: Sequence[dict],
    clusters: Sequence[dict],
    actions: Sequence[dict],
    unique_runs: Sequence[dict],
    texts: Mapping[str, str],
    base_url: str | None,
    staged: StagedFiles | None = None,
) -> dict[str, str]:
    """Write the five migration files (`MIGRATION_FILES`) into ``out_dir`` (which must
    exist); returns name -> path.

    ``documents``, ``clusters``, ``actions`` and ``texts`` are an audit's
    (`dedup.result.AuditResult`); ``unique_runs`` is what
    `dedup.cluster.loss.settle_actions` returned. ``keep.txt`` holds one id per line.
    With ``staged`` the files are renamed into place with the other outputs.
    """
    paths = {name: os.path.join(out_dir, name) for name in MIGRATION_FILES}
    redirects = redirect_records(clusters, documents, base_url)
    write_csv(paths["redirects.csv"], redirects, REDIRECT_COLUMNS, staged)
    write_json(
        paths["redirects.json"], {"base_url": base_url, "redirects": redirects}, ("redirects",), staged=staged
    )
    write_csv(paths["merge-worklist.csv"], merge_worklist_records(unique_runs, texts), MERGE_COLUMNS, staged)
    kept = keep_records(actions, clusters, documents, base_url)
    write_csv(paths["keep.csv"], kept, KEEP_COLUMNS, staged)
    if staged is not None:
        with staged.open(paths["keep.txt"], "\n") as handle:
            handle.writelines(row["document_id"] + "\n" for row in kept)
    else:
        with open(paths["keep.txt"], "w", encoding="utf-8", newline="\n") as handle:
            handle.writelines(row["document_id"] + "\n" for row in kept)
    return paths
