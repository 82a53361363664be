"""Command line of the persistent index: ``dedup index``, ``dedup decisions`` and ``dedup similar``.

``register(commands)`` adds the subcommands to the main parser's subparsers and
``run(args)`` runs one of them; ``audit_with_index`` is what ``dedup audit --index FILE``
calls after the audit and before writing its outputs.

Commands
--------
dedup index build PATH... --index FILE     create an index of the documents under PATH
dedup index update [PATH...] --index FILE  bring it up to date (default: the paths of the last run)
dedup index info --index FILE [--check]    what the index holds; --check runs SQLite's integrity check
dedup index baseline --index FILE          accept the latest recorded audit as the baseline
dedup decisions import FILE --index FILE   store the review decisions exported by a report
dedup similar [TEXT] --index FILE          indexed documents that best match TEXT (or --file)

Exit codes
----------
0  the command ran
1  (``dedup audit --index`` only) ``--fail-on`` is met: ``any`` cluster, a ``new`` cluster,
   a new or ``grown`` one, or a new, grown or ``changed`` one, since the baseline (else the
   last audit); clusters settled by a review never count, nor does an audit run with
   ``--accept``
2  usage error: a bad option, a path that does not exist, a file that is not an index,
   an index written by a newer dedup, a damaged index, settings that would mix sketches,
   a decisions file that does not follow the schema, a query without words, no query,
   a baseline asked of an index with no audit, a config file that cannot be used
4  (``index build`` and ``update``) inputs not read: no document was read, more than
   ``--max-skipped-share`` of the inputs could not be read, or (``--fail-on skipped``) any
   could not; the index is written all the same (see `dedup.cli.input_problems`)
"""

from __future__ import annotations

import argparse
import json
import sys
from typing import TYPE_CHECKING

from .cli import (
    add_config_options,
    add_input_options,
    add_setting_options,
    input_problems,
    report_input_problems,
    settings_from_args,
    terminal_text,
)
from .settings import INPUTS, SettingsError, setting_options

if TYPE_CHECKING:
    from .progress import Progress
    from .result import AuditResult

__all__ = ["COMMANDS", "register", "run", "audit_with_index", "delta_lines", "audit_json"]

COMMANDS = ("index", "decisions", "similar")
EXIT_OK, EXIT_FOUND, EXIT_USAGE = 0, 1, 2

# The settings that decide what a stored sketch is: the same names as `dedup.index.store.SKETCH_KEYS`,
# written here so that building the parser does not load the index code (a test keeps them equal).
SKETCH_SETTINGS = (
    "shingle_size",
    "char_ngrams",
    "hash_scheme",
    "num_perm",
    "seed",
    "tfidf_features",
    "sublinear_tf",
)
SKETCHES_TITLE = "sketches (recorded in the index; an update cannot change them)"


def _reading_settings() -> tuple[str, ...]:
    """The settings of the "inputs" section: how documents are read, all of them recorded in the index."""
    return tuple(name for name, option in setting_options() if option.group == INPUTS)


def _add_settings_options(p: argparse.ArgumentParser, stored: bool) -> None:
    """Sketch and reading options, generated as for ``dedup audit``; with ``stored`` every default is
    "as the index records" and only the options given change the recorded settings."""
    add_setting_options(p, SKETCH_SETTINGS, title=SKETCHES_TITLE, stored=stored)
    add_setting_options(p, _reading_settings(), stored=stored)


def register(commands: argparse._SubParsersAction) -> None:
    """Add ``index``, ``decisions`` and ``similar`` to the main parser's subcommands."""
    parser_class = commands._parser_class  # keep the main parser's one-line errors in nested commands
    _register_index(commands, parser_class)
    _register_decisions(commands, parser_class)
    _register_similar(commands)


_BUILD_EPILOG = (
    "Exit codes: 0 ran, 2 usage error (or an unusable index or config file), 3 internal error, 4 inputs not "
    "read (no document, more than --max-skipped-share of the inputs, or any with --fail-on skipped; the index "
    "is written all the same). Options can also be set in the [index] section of dedup.toml (see dedup audit "
    "--help)."
)


def _register_index(commands: argparse._SubParsersAction, parser_class: type) -> None:
    """``dedup index build|update|info|baseline``."""
    p = commands.add_parser(
        "index",
        help="build or update a persistent index of documents",
        description=(
            "A persistent index (one SQLite file) of documents with their signatures, shingles and TF-IDF "
            "statistics, for scheduled audits (dedup audit --index), remembered review decisions and "
            "similarity search (dedup similar)."
        ),
    )
    sub = p.add_subparsers(dest="index_command", metavar="ACTION", parser_class=parser_class)
    b = sub.add_parser(
        "build",
        help="create an index of the documents under PATH",
        description="Create an index of the documents under PATH (read as dedup audit reads them).",
        epilog=_BUILD_EPILOG,
    )
    b.add_argument("paths", nargs="+", metavar="PATH", help="files and folders to read (folders recursively)")
    b.add_argument("--index", required=True, metavar="FILE", help="the index file to create")
    _add_settings_options(b, stored=False)
    _add_output_options(b)
    u = sub.add_parser(
        "update",
        help="bring an index up to date",
        description=(
            "Bring an index up to date: documents whose text is unchanged are only hashed, new and changed "
            "ones are sketched, documents no longer found are marked removed. The whole update is one "
            "transaction: interrupted, the index stays as it was."
        ),
        epilog=_BUILD_EPILOG,
    )
    u.add_argument(
        "paths", nargs="*", metavar="PATH", help="files and folders to read (default: those of the last run)"
    )
    u.add_argument("--index", required=True, metavar="FILE", help="the index file")
    _add_settings_options(u, stored=True)
    _add_output_options(u)
    i = sub.add_parser(
        "info", help="what an index holds", description="Counts, settings and recent runs of an index."
    )
    i.add_argument("--index", required=True, metavar="FILE", help="the index file")
    i.add_argument(
        "--check", action="store_true", help="also run SQLite's integrity check over the whole file"
    )
    i.add_argument("--json", action="store_true", help="print JSON")
    a = sub.add_parser(
        "baseline",
        help="accept the latest recorded audit as the baseline",
        description=(
            "Accept the clusters of the latest audit recorded with this index (dedup audit --index) as the "
            "accepted state: from now on, dedup audit --index --fail-on new|grown|changed compares with it, "
            "until another baseline is accepted. dedup audit --index --accept does the same for the audit it runs."
        ),
    )
    a.add_argument("--index", required=True, metavar="FILE", help="the index file")
    a.add_argument("--json", action="store_true", help="print JSON")


def _register_decisions(commands: argparse._SubParsersAction, parser_class: type) -> None:
    """``dedup decisions import``."""
    p = commands.add_parser(
        "decisions",
        help="store review decisions in an index",
        description="Store review decisions exported by the report, so later audits with --index respect them.",
    )
    sub = p.add_subparsers(dest="decisions_command", metavar="ACTION", parser_class=parser_class)
    m = sub.add_parser(
        "import",
        help="import a decisions file exported by the report",
        description=(
            "Import a decisions file exported by the report. A pair or cluster marked not-duplicate or keep-both "
            "is not raised again by audits with --index while its texts are unchanged."
        ),
    )
    m.add_argument("file", metavar="FILE", help="the exported decisions (JSON)")
    m.add_argument("--index", required=True, metavar="INDEX", help="the index file (created if missing)")


def _register_similar(commands: argparse._SubParsersAction) -> None:
    """``dedup similar``."""
    s = commands.add_parser(
        "similar",
        help="indexed documents that best match a text",
        description=(
            "The indexed documents that best match a text (BM25 by default; stop words left out), each with the "
            "passage that matches best, how much of the text it already holds, the terms that contribute most, "
            "the TF-IDF cosine and the Jaccard similarity. Similarity is evidence for review, not a verdict."
        ),
    )
    s.add_argument("text", nargs="?", metavar="TEXT", help="the query text")
    s.add_argument("--file", metavar="FILE", help="read the query from a document file instead")
    s.add_argument("--index", required=True, metavar="FILE", help="the index file")
    s.add_argument("-k", "--top", type=int, default=10, metavar="K", help="how many results (default: 10)")
    s.add_argument(
        "--terms", type=int, default=5, metavar="N", help="contributing terms shown per result (default: 5)"
    )
    s.add_argument(
        "--ranking",
        choices=("bm25", "tfidf"),
        default="bm25",
        help="bm25, or tfidf: cosine of TF-IDF rows with sublinear tf (default: bm25)",
    )
    s.add_argument("--json", action="store_true", help="print JSON for scripts")


def _add_output_options(p: argparse.ArgumentParser) -> None:
    """Output, exit-code and config options of ``index build`` and ``update``."""
    g = p.add_argument_group("running")
    g.add_argument("--json", action="store_true", help="print the summary as JSON")
    g.add_argument("-q", "--quiet", action="store_true", help="no progress and no summary")
    add_input_options(g, ("none",), "skipped: exit with code 4 when any input could not be read")
    add_config_options(g)


def _print(text: str, **kwargs) -> None:
    """`print`, with the ids, titles, terms and paths in ``text`` escaped for the terminal
    (`dedup.cli.terminal_text`)."""
    print(terminal_text(text), **kwargs)


def _error(message: str) -> int:
    _print(f"dedup: error: {message}", file=sys.stderr)
    return EXIT_USAGE


def run(args: argparse.Namespace) -> int:
    """Run ``index``, ``decisions`` or ``similar``; returns the exit code.

    Every expected failure (see the module's exit codes) is one line on stderr and
    code 2; anything else propagates to the main command's internal-error handling.
    """
    from .index import DecisionsFileError, IndexFileError, QueryError
    from .ingest import InputError

    try:
        if args.command == "index":
            action = getattr(args, "index_command", None)
            if action in ("build", "update"):
                return _run_build_or_update(args, action)
            if action == "info":
                return _run_info(args)
            if action == "baseline":
                return _run_baseline(args)
            return _error("dedup index needs an action: build, update, info or baseline")
        if args.command == "decisions":
            if getattr(args, "decisions_command", None) == "import":
                return _run_import(args)
            return _error("dedup decisions needs an action: import")
        if args.command == "similar":
            return _run_similar(args)
    except (IndexFileError, InputError, SettingsError, DecisionsFileError, QueryError) as err:
        return _error(str(err))
    return _error(f"unknown command {args.command!r}")


def _progress(args: argparse.Namespace):
    from .progress import Progress, StderrProgress

    return Progress.silent() if getattr(args, "quiet", False) else StderrProgress()


def _run_build_or_update(args: argparse.Namespace, action: str) -> int:
    from .index import build, open_index, update

    try:
        if action == "build":
            settings = settings_from_args(args).validate()
        else:
            with open_index(args.index) as index:
                settings = settings_from_args(args, index.settings).validate()
    except SettingsError as err:
        config = getattr(args, "config_file", None)
        raise SettingsError(
            f"{err} (options from {config} and the command line)" if config else str(err)
        ) from None
    run = build if action == "build" else update
    summary = run(args.paths, args.index, settings, progress=_progress(args))
    problems = input_problems(summary.inputs, args.max_skipped_share, args.fail_on_skipped)
    if args.json:
        print(json.dumps(summary.to_dict(), indent=1, sort_keys=True))
    elif not args.quiet:
        inputs = summary.inputs
        _print(
            f"{summary.kind} {summary.run}: {summary.documents:,} documents ({summary.added:,} added, "
            f"{summary.changed:,} changed, {summary.removed:,} removed, {summary.unchanged:,} unchanged); "
            f"{summary.sketched:,} texts sketched, {summary.texts:,} searchable; {summary.seconds:.1f} s"
        )
        _print(
            f"inputs: {inputs.get('entries', 0):,} ({inputs.get('read', 0):,} read, "
            f"{inputs.get('empty', 0):,} empty, {inputs.get('skipped', 0):,} skipped)"
        )
        _print(f"index: {args.index}")
    # The index keeps no ledger: `dedup audit` over the same paths writes one (ledger.csv).
    return report_input_problems(problems, "")


def _run_info(args: argparse.Namespace) -> int:
    from .index import baseline_of, open_index

    with open_index(args.index) as index, index.reading() as db:
        info = {
            "index": args.index,
            "schema_version": int(index.meta("schema_version") or 0),
            "created_at": index.meta("created_at"),
            "created_by": index.meta("created_by"),
            "settings": json.loads(index.meta("settings") or "{}"),
            "documents": dict(
                db.execute("SELECT status, count(*) FROM documents GROUP BY status").fetchall()
            ),
            "texts": db.execute("SELECT count(*) FROM texts").fetchone()[0],
            "searchable_texts": db.execute("SELECT texts FROM tfidf").fetchone()[0],
            "postings_segments": db.execute("SELECT segments FROM tfidf").fetchone()[0],
            "audits": db.execute("SELECT count(*) FROM audits").fetchone()[0],
            "baseline": baseline_of(db),
            "decisions": db.execute("SELECT count(*) FROM decisions").fetchone()[0],
            "runs": [
                dict(
                    zip(
                        ("run", "kind", "started_at", "seconds", "added", "changed", "removed", "unchanged"),
                        row,
                    )
                )
                for row in db.execute(
                    "SELECT run, kind, started_at, seconds, added, changed, removed, unchanged FROM runs "
                    "ORDER BY run DESC LIMIT 5"
                )
            ],
        }
        if args.check:
            problems = [row[0] for row in db.execute("PRAGMA integrity_check")]
            info["integrity_check"] = problems
    if args.json:
        print(json.dumps(info, indent=1, sort_keys=True))
    else:
        for line in _info_lines(info):
            _print(line)
    if args.check and info["integrity_check"] != ["ok"]:
        return EXIT_USAGE
    return EXIT_OK


def _info_lines(info: dict) -> list[str]:
    """``dedup index info`` in words."""
    docs, b, s = info["documents"], info["baseline"], info["settings"]
    lines = [
        f"index: {info['index']} (schema {info['schema_version']}, created {info['created_at']})",
        f"documents: {docs.get('present', 0):,} present, {docs.get('removed', 0):,} removed; "
        f"texts: {info['texts']:,} ({info['searchable_texts']:,} searchable)",
        f"audits recorded: {info['audits']:,}; decisions: {info['decisions']:,}",
        f"baseline: audit {b['audit_id']} of {b['recorded_at']}, accepted {b['accepted_at']}"
        if b
        else "baseline: none (audits are compared with the last one; see dedup index baseline)",
        f"sketches: shingle_size={s.get('shingle_size')} char_ngrams={s.get('char_ngrams')} "
        f"num_perm={s.get('num_perm')} seed={s.get('seed')} hash_scheme={s.get('hash_scheme')} "
        f"tfidf_features={s.get('tfidf_features')} sublinear_tf={s.get('sublinear_tf')}",
    ]
    if "integrity_check" in info:
        lines.append("integrity check: " + "; ".join(info["integrity_check"]))
    return lines


def _run_import(args: argparse.Namespace) -> int:
    import os

    from .index import import_decisions, load_decisions_file, open_index

    data = load_decisions_file(args.file)
    with open_index(args.index, create=not os.path.exists(args.index)) as index:
        counts = import_decisions(index, data)
    _print(
        f"decisions: {counts['decisions']:,} in {args.file}, {counts['new']:,} new, "
        f"{counts['known']:,} already in {args.index}"
    )
    return EXIT_OK


def _run_baseline(args: argparse.Namespace) -> int:
    from .index import accept_latest, open_index

    with open_index(args.index) as index:
        baseline = accept_latest(index)
    if baseline is None:
        return _error(
            f"the index {args.index} has no audit recorded yet: run dedup audit --index {args.index} "
            "(with --accept to accept it at once)"
        )
    if args.json:
        print(
            terminal_text(
                json.dumps(baseline, indent=1, sort_keys=True, ensure_ascii=False), json_escapes=True
            )
        )
        return EXIT_OK
    _print(
        f"baseline: audit {baseline['audit_id']} of {baseline['recorded_at']} ({baseline['clusters']:,} clusters) "
        "accepted; dedup audit --index with --fail-on new, grown or changed now compares with it"
    )
    return EXIT_OK


def _run_similar(args: argparse.Namespace) -> int:
    from .index import QueryError, open_index, query_text_of_file, similar

    if args.text is None and args.file is None:
        raise QueryError(
            "give the text to search for, as TEXT or with --file FILE "
            f"(e.g. dedup similar 'how to reset a password' --index {args.index})"
        )
    if args.text is not None and args.file is not None:
        raise QueryError("give the text to search for either as TEXT or with --file FILE, not both")
    if args.top < 1 or args.terms < 0:
        raise QueryError("-k must be at least 1 and --terms at least 0")
    with open_index(args.index) as index:
        text = args.text if args.file is None else query_text_of_file(args.file, index.settings)
        results = similar(index, text, k=args.top, terms=args.terms, ranking=args.ranking)
    if args.json:
        out = {
            "query": {"file": args.file, "characters": len(text)},
            "k": args.top,
            "ranking": args.ranking,
            "results": results,
        }
        print(terminal_text(json.dumps(out, indent=1, ensure_ascii=False), json_escapes=True))
        return EXIT_OK
    if not results:
        _print("no indexed document shares a term with the query")
        return EXIT_OK
    from .normalize import canonical_text, token_text

    draft = len(token_text(canonical_text(text)).split()) >= _DRAFT_WORDS
    for r in results:
        for line in _result_lines(r, draft):
            _print(line)
    _print(
        "note: similarity is evidence for review, not a verdict; the passage is shown as normalized."
        + (
            " 'holds' is the share of the query's word sequences (shingles) found in the document."
            if draft
            else ""
        )
    )
    return EXIT_OK


# From this many words on a query is a draft: how much of it a document holds is shown.
_DRAFT_WORDS = 20


def _result_lines(r: dict, draft: bool) -> list[str]:
    """The lines of one search result; shingle figures only for a ``draft`` (a few words share none)."""
    copies = (
        f"  (+{len(r['copies'])} exact {'copy' if len(r['copies']) == 1 else 'copies'})"
        if r["copies"]
        else ""
    )
    title = f"  {r['title']!r}" if r["title"] else ""
    terms = ", ".join(f"{t['term']} {t['share']:.0%}" for t in r["terms"])
    snippet = r["snippet"]
    before = "… " if snippet["start"] > 0 else ""
    after = " …" if snippet["end"] < snippet["characters"] else ""
    return [
        f"{r['rank']:>3}. {r['ranking']} {r['score']:.3f}  {r['document_id']}{copies}{title}",
        "     "
        + (
            f"holds {r['containment']:.0%} of the query; Jaccard {r['jaccard']:.2f} "
            f"(MinHash estimate {r['jaccard_estimate']:.2f}); "
            if draft
            else ""
        )
        + f"cosine {r['cosine']:.3f}"
        + (f"; terms: {terms}" if terms else ""),
        f"     “{before}{snippet['text']}{after}”",
    ]


def audit_with_index(
    index_path: str,
    result: AuditResult,
    fail_on: str = "none",
    *,
    accept: bool = False,
    leave_out: list[tuple[str, str]] | None = None,
    quiet: bool = True,
) -> tuple[dict | None, int]:
    """For ``dedup audit --index FILE``: refresh the index over the audit's inputs, apply
    reviews, compare with the baseline (else the last audit), record this one.

    Call it after `dedup.audit` and before ``result.write(out)``: it marks ``result`` in
    place (reviews on pairs, members and clusters, actions of reviewed members, stable
    ids of clusters).

    Parameters
    ----------
    accept : bool
        ``--accept``: this audit becomes the baseline.
    leave_out : list of (path, reason), optional
        What the refresh must not read (the audit's own output and work folders), as
        for the audit (`dedup.ingest.leaving_out`).
    quiet : bool
        No progress of the refresh on stderr.

    Returns
    -------
    delta : dict or None
        The ``delta`` block for ``audit.json`` and the report (None when the index
        cannot be used).
    exit_code : int
        0, 1 when ``fail_on`` is met, 2 when the index cannot be used (the message has
        been printed on stderr).
    """
    from .index import IndexFileError, track_audit
    from .ingest import InputError, leaving_out

    try:
        with leaving_out(leave_out or []):
            delta, failed = track_audit(
                index_path, result, fail_on, accept=accept, progress=_progress_of(quiet)
            )
    except (IndexFileError, InputError) as err:
        _error(str(err))
        return None, EXIT_USAGE
    return delta, EXIT_FOUND if failed else EXIT_OK


def _progress_of(quiet: bool) -> Progress:
    from .progress import Progress, StderrProgress

    return Progress.silent() if quiet else StderrProgress()


# Clusters named one per line under the delta's counts; the rest are counted.
_DELTA_NAMED = 20
_RAISED = ("new", "grown", "changed", "shrunk", "resolved")


def delta_lines(delta: dict) -> list[str]:
    """Summary lines of a delta for the audit command's terminal output."""
    c = delta["counts"]
    p = delta["previous"]
    if p is None:
        head = "since last audit: no earlier audit in the index; every cluster is new"
    elif delta.get("basis") == "baseline":
        b = delta["baseline"] if not delta.get("accepted") else None
        head = f"since the baseline ({p['audit_id']}" + (f", accepted {b['accepted_at']})" if b else ")")
    else:
        head = f"since last audit ({p['audit_id']}, {p['recorded_at']})"
    lines = [
        f"{head}: {c['new']} new, {c['grown']} grown, {c.get('changed', 0)} changed, {c['shrunk']} shrunk, "
        f"{c['resolved']} resolved, {c['unchanged']} unchanged clusters; {c['reviewed']} settled by review"
    ]
    lines += _raised_lines(delta["clusters"])
    docs = delta.get("documents")
    if docs:
        lines.append(
            f"documents since then: {len(docs['added'])} added, {len(docs['changed'])} changed, "
            f"{len(docs['removed'])} removed"
        )
    lines += _review_lines(delta.get("review", {}))
    if delta["settings_changed"]:
        lines.append("settings changed since then: " + ", ".join(delta["settings_changed"]))
    lines += _index_lines(delta.get("index"))
    if delta.get("accepted"):
        lines.append(
            "accepted as the baseline: later audits with --fail-on new, grown or changed compare with it"
        )
    elif delta.get("basis") != "baseline":
        lines.append(
            "no baseline: accept today's clusters with --accept, or dedup index baseline --index FILE"
        )
    return lines


def _raised_lines(entries: list[dict]) -> list[str]:
    """One line per cluster that changed state (by stable id), reviewed ones marked."""
    raised = [e for e in entries if e["status"] in _RAISED]
    lines = []
    for e in raised[:_DELTA_NAMED]:
        number = f" ({e['cluster_id']})" if e["cluster_id"] else f" (was {e['previous_cluster_id']})"
        parts = [f"  {e['stable_id']}{number} {e['status']}"]
        for key, sign in (("added", "+"), ("changed", "~"), ("removed", "-")):
            if e[key] and e["status"] != "resolved":
                parts.append(" ".join(sign + d for d in e[key][:5]) + (" …" if len(e[key]) > 5 else ""))
        if e["status"] == "new" and e.get("from_clusters"):
            parts.append("from " + ", ".join(e["from_clusters"]))
        if e["status"] == "resolved" and e.get("now_in"):
            parts.append("now in " + ", ".join(e["now_in"]))
        review = e.get("review")
        if isinstance(review, dict) and review.get("decision") is not None:
            parts.append(
                f"review {review['status']}: earlier {review['decision']} on {review['decided_at'][:10]}"
            )
        lines.append("; ".join(parts))
    if len(raised) > _DELTA_NAMED:
        lines.append(f"  … and {len(raised) - _DELTA_NAMED} more (audit.json: delta)")
    return lines


def _review_lines(review: dict) -> list[str]:
    clusters, members = review.get("clusters", {}), review.get("members", {})
    lines = []
    if clusters.get("lapsed"):
        lines.append(f"reviews lapsed (a text changed since): {clusters['lapsed']} clusters raised again")
    if members.get("unreviewed") and (clusters.get("partly-reviewed") or clusters.get("lapsed")):
        lines.append(
            f"members not covered by an earlier review: {members['unreviewed']} (raised beside that review)"
        )
    return lines


def _index_lines(index: dict | None) -> list[str]:
    if not index:
        return []
    if not index["refreshed"]:
        why = "the inputs were read from standard input" if index["reason"] == "stdin" else "not asked"
        return [f"index: documents not refreshed ({why}); dedup similar searches what it held before"]
    lines = [
        f"index: {index['documents']:,} documents ({index['added']:,} added, {index['changed']:,} changed, "
        f"{index['removed']:,} removed), {index['texts']:,} searchable; search statistics refreshed"
    ]
    if index["differ"]:
        lines.append(
            f"warning: {index['differ']:,} documents differ between the audit and the index (changed while "
            "the audit ran?): " + ", ".join(index["differ_ids"])
        )
    return lines


def audit_json(
    result: AuditResult, paths: dict[str, str], delta: dict | None, code: int, fail_on: str
) -> str:
    """``dedup audit --json``: the summary and the delta as one JSON document for a pipeline.

    Keys: ``audit_id``, ``exit_code``, ``fail_on``, ``summary``, ``warnings``,
    ``outputs`` (file name -> path) and ``delta`` (None without ``--index``). Escaped for
    the terminal like every printed text (`dedup.cli.terminal_text`).
    """
    out = {
        "audit_id": result.audit_id,
        "exit_code": code,
        "fail_on": fail_on,
        "summary": result.summary,
        "warnings": result.warnings,
        "outputs": paths,
        "delta": delta,
    }
    text = json.dumps(out, indent=1, sort_keys=True, ensure_ascii=False, default=str)
    return terminal_text(text, json_escapes=True)
