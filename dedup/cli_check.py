"""Command line of the class check: ``dedup check SUBMISSIONS... --against REFERENCES... --out DIR``.

``register(commands)`` adds the subcommand to the main parser's subparsers; ``run(args)``
runs it. The options map one to one onto `dedup.check.CheckSettings`.

Exit codes
----------
0  the check ran (whatever it found)
2  usage error: a bad option, a path that does not exist, no submission with words,
   an output folder that cannot be written, a config file that cannot be used
3  an unexpected internal error
4  inputs not read: ``--against`` was given and no reference was read, more than
   ``--max-skipped-share`` of the inputs (submissions, references, templates) could not be
   read, or (``--fail-on skipped``) any could not; the outputs are written all the same
   (see `dedup.cli.input_problems`)
"""

from __future__ import annotations

import argparse
import os
import sys

from .cli import add_config_options, add_input_options, add_out_option, input_problems, report_input_problems

__all__ = ["register", "run", "COMMAND"]

COMMAND = "check"
EXIT_OK, EXIT_USAGE = 0, 2

# Kept in step with `dedup.check.wording.CAUTION` (a test compares them), written here so that
# the help does not load the check's compiled code.
HELP_CAUTION = (
    "Matching text is not proof of misconduct: quotations, shared sources, the assignment's template, "
    "common phrases and permitted collaboration all produce matching text. A person decides: read every "
    "passage in context and follow your institution's academic-integrity procedure. The report contains "
    "students' work: protect it as you protect the work itself. dedup only reads its inputs."
)


def _whole(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"not a whole number: {text!r}") from None
    if value < 1:
        raise argparse.ArgumentTypeError(f"must be at least 1: {value}")
    return value


def _share(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"not a number: {text!r}") from None
    if not 0 < value <= 1:
        raise argparse.ArgumentTypeError(f"must be above 0 and at most 1: {value}")
    return value


def register(commands: argparse._SubParsersAction) -> None:
    """Add ``check`` to the main parser's subcommands."""
    p = commands.add_parser(
        COMMAND,
        help="check a class of submissions against reference material and each other",
        description=(
            "Compare each submission with the reference material and with the other submissions, and "
            "show where they share text. References are never compared with each other. Writes "
            "check.json, matches.csv, submissions.csv, ledger.csv and check.html into --out."
        ),
        epilog=HELP_CAUTION
        + " Exit codes: 0 ran, 2 usage error (or an unusable config file), 3 internal error, 4 inputs not read "
        "(no reference read from --against, more than --max-skipped-share of the inputs, or any with --fail-on "
        "skipped; the outputs are written all the same). Options can also be set in the [check] section of "
        "dedup.toml (see dedup audit --help).",
    )
    p.add_argument(
        "submissions", nargs="+", metavar="SUBMISSION", help="files and folders of the students' texts"
    )
    p.add_argument(
        "--against",
        nargs="+",
        default=[],
        metavar="REFERENCE",
        help="files and folders of reference material",
    )
    p.add_argument(
        "--against-index",
        metavar="FILE",
        help="an index (dedup index build) whose texts are references too, in their stored form: lower "
        "case, markup removed; source offsets of their passages point into that form",
    )
    add_out_option(p)
    _add_settings(p)
    g = p.add_argument_group("running")
    g.add_argument(
        "--workers", type=_whole, default=1, metavar="N", help="threads aligning passages (default: 1)"
    )
    g.add_argument("--no-report", action="store_true", help="write the data files but not check.html")
    g.add_argument("-q", "--quiet", action="store_true", help="no summary")
    add_input_options(
        g, ("none",), "skipped: exit with code 4 when any submission, reference or template could not be read"
    )
    add_config_options(g)


def _add_settings(p: argparse.ArgumentParser) -> None:
    g = p.add_argument_group("what counts")
    g.add_argument("--min-words", type=_whole, default=15, metavar="N",
                   help="fewest words of a counted passage; shorter shared runs are listed as excluded (default: 15)")  # fmt: skip
    g.add_argument("--template", action="append", default=[], metavar="FILE",
                   help="the assignment prompt or a provided skeleton: text matching it is excluded (repeatable)")  # fmt: skip
    g.add_argument("--count-quotes", dest="exclude_quotes", action="store_false",
                   help="count text in quotation marks and block quotes (by default it is excluded)")  # fmt: skip
    g.add_argument("--count-reference-lists", dest="exclude_reference_lists", action="store_false",
                   help="count reference lists (by default excluded from a References, Bibliography or Works "
                   "cited heading to the end)")  # fmt: skip
    g.add_argument(
        "--shingle-size", type=_whole, default=5, metavar="K", help="words per shingle (default: 5)"
    )
    g = p.add_argument_group("candidate sources")
    g.add_argument("--seed-shingles", type=_whole, default=4, metavar="N",
                   help="shared shingles that make a source a candidate (default: 4)")  # fmt: skip
    g.add_argument("--common-share", type=_share, default=0.01, metavar="SHARE",
                   help="a shingle in more than this share of the references seeds nothing (default: 0.01)")  # fmt: skip
    g.add_argument("--common-min", type=_whole, default=50, metavar="N",
                   help="... and in more than this many (default: 50)")  # fmt: skip
    g = p.add_argument_group("inputs")
    g.add_argument(
        "--id-field", default=None, metavar="FIELD", help="record field holding the id (.jsonl/.csv)"
    )
    g.add_argument("--text-field", dest="text_fields", action="append", default=None, metavar="FIELD",
                   help="record field(s) holding the text (repeatable) (default: text)")  # fmt: skip
    g.add_argument(
        "--include", action="append", default=[], metavar="GLOB", help="read only paths matching this"
    )
    g.add_argument(
        "--exclude", action="append", default=[], metavar="GLOB", help="do not read paths matching this"
    )


def _settings(args: argparse.Namespace):
    from .check import CheckSettings

    return CheckSettings(
        min_words=args.min_words,
        short_words=min(CheckSettings.short_words, args.min_words),
        shingle_size=args.shingle_size,
        seed_shingles=args.seed_shingles,
        common_share=args.common_share,
        common_min=args.common_min,
        exclude_quotes=args.exclude_quotes,
        exclude_reference_lists=args.exclude_reference_lists,
        templates=tuple(args.template),
        id_field=args.id_field,
        text_fields=tuple(args.text_fields or ("text",)),
        include=tuple(args.include),
        exclude=tuple(args.exclude),
    )


def _usable_out(out: str) -> str | None:
    """None when ``out`` can take the outputs, else the message."""
    if os.path.exists(out) and not os.path.isdir(out):
        return f"--out {out} exists and is not a folder"
    try:
        os.makedirs(out, exist_ok=True)
    except OSError as err:
        return f"cannot create the output folder {out}: {err.strerror}"
    if not os.access(out, os.W_OK):
        return f"the output folder {out} is not writable"
    return None


def _summary_lines(result, paths: dict[str, str]) -> list[str]:
    s = result.summary
    shown = sorted(result.submissions, key=lambda r: (-r["share_matched"], r["submission"]))[:5]
    lines = [
        f"submissions: {s['submissions']:,}; references read: {s['references_read']:,}, compared: {s['references_compared']:,}",
        f"passages: {s['passages_counted']:,} counted, {s['passages_excluded']:,} excluded; groups sharing text: {s['groups']:,}",
    ]
    lines += [
        f"  {r['submission']}: {r['share_matched']:.1%} found elsewhere, {r['passages']} passages"
        for r in shown
    ]
    lines.append(
        f"report: {paths['check.html']}"
        if "check.html" in paths
        else f"outputs: {os.path.dirname(paths['check.json'])}"
    )
    lines.append("note: matching text is not proof of misconduct; read each passage in context.")
    return lines


def run(args: argparse.Namespace) -> int:
    """Run ``dedup check``; returns the exit code."""
    from .check import check
    from .ingest import InputError
    from .settings import SettingsError

    for path in [*args.submissions, *args.against, *args.template, *filter(None, [args.against_index])]:
        if not os.path.exists(path):
            print(f"dedup: error: no such file or folder: {path}", file=sys.stderr)
            return EXIT_USAGE
    problem = _usable_out(args.out)
    if problem:
        print(f"dedup: error: {problem}", file=sys.stderr)
        return EXIT_USAGE
    from .index import IndexFileError

    try:
        result = check(
            args.submissions,
            against=args.against,
            settings=_settings(args),
            workers=args.workers,
            against_index=args.against_index,
        )
    except IndexFileError as err:
        print(f"dedup: error: {err}", file=sys.stderr)
        return EXIT_USAGE
    except (SettingsError, InputError) as err:
        config = getattr(args, "config_file", None)
        note = (
            f" (options from {config} and the command line)"
            if config and isinstance(err, SettingsError)
            else ""
        )
        print(f"dedup: error: {err}{note}", file=sys.stderr)
        return EXIT_USAGE
    problems = _input_problems(result.ledger, args)
    try:
        paths = result.write(args.out, report=not args.no_report)
    except OSError as err:
        print(f"dedup: error: cannot write the outputs into {args.out}: {err}", file=sys.stderr)
        return EXIT_USAGE
    if not args.quiet:
        print("\n".join(_summary_lines(result, paths)))
    return report_input_problems(problems, paths.get("ledger.csv", args.out))


def _input_problems(rows: list[dict], args: argparse.Namespace) -> list[str]:
    """Why the check exits with code 4 (`dedup.cli.input_problems` over its whole ledger), and
    a ``--against`` from which no reference was read: submissions were compared with nothing."""
    from .ingest import LedgerEntry, summarize

    def counts(role: str | None) -> dict:
        return summarize(
            [
                LedgerEntry(**{k: v for k, v in row.items() if k != "role"})
                for row in rows
                if role in (None, row["role"])
            ]
        )

    # With a share of 1 only "no reference was read" can be said of the references.
    given = args.against or args.against_index
    problems = input_problems(counts("reference"), 1.0, False, what="reference") if given else []
    return problems + input_problems(counts(None), args.max_skipped_share, args.fail_on_skipped)
