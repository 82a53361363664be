"""Command line: a thin layer over `dedup.audit`.

The options of the audit settings are not written here: `add_setting_options` generates
them from the `Option` each `AuditSettings` field declares, and `settings_from_args`
maps the parsed arguments back, for ``dedup audit`` and the index commands alike.

Exit codes
----------
0  the audit ran (whatever it found)
1  ``--fail-on any`` and at least one cluster was found; with ``--index``, ``--fail-on new`` /
   ``grown`` / ``changed`` and a cluster new (new or grown; new, grown or changed) since the
   baseline, else the last audit; reviewed clusters never count, nor does an ``--accept`` run
2  usage error: a bad option, a path that does not exist, an output folder that
   cannot be written or holds files dedup did not write (see `_out_problem`)
3  an unexpected internal error (reported in one line; please file it)
"""

from __future__ import annotations

import argparse
import os
import re
import sys
from collections.abc import Iterable

from . import __version__
from .settings import GROUPS, AuditSettings, Option, SettingsError, setting_options

__all__ = ["main", "build_parser", "add_setting_options", "settings_from_args", "FAIL_ON", "terminal_text"]

EXIT_OK, EXIT_FOUND, EXIT_USAGE, EXIT_INTERNAL = 0, 1, 2, 3
# When ``dedup audit`` exits with code 1 (``--fail-on``); the same names as `dedup.index.history.FAIL_ON`.
FAIL_ON = ("none", "any", "new", "grown", "changed")

CAUTION = (
    "A similarity flag is evidence for a person to review, not a verdict: quotations, citations, "
    "shared templates and common phrasing match too. dedup only reads its inputs: it never changes, "
    "moves or deletes a file; the actions it writes are proposals."
)


# What a terminal would act on rather than show: C0 controls (ESC, BEL, line ends …), DEL,
# C1 controls (U+009B is an 8-bit CSI), the bidirectional overrides and isolates that
# reorder what is shown (Unicode TR 9), and lone surrogates (from file names that are not
# UTF-8), which a UTF-8 terminal cannot even be sent.
_UNSHOWABLE = re.compile("[\x00-\x1f\x7f-\x9f\u202a-\u202e\u2066-\u2069\ud800-\udfff]")
# The same in JSON text, whose encoder escapes C0 controls inside strings already: its
# own line ends are structure.
_UNSHOWABLE_IN_JSON = re.compile("[\x7f-\x9f\u202a-\u202e\u2066-\u2069\ud800-\udfff]")


def terminal_text(text: str, *, json_escapes: bool = False) -> str:
    """``text`` safe to print on a terminal: each character in `_UNSHOWABLE` as an escape.

    Every id, title and path the commands print goes through here, so a file named
    ``"\\x1b]0;…\\x07"`` cannot retitle the terminal or hide lines. ``json_escapes`` is
    for JSON text (``ensure_ascii=False``): C1 controls, bidirectional controls and
    surrogates become ``\\u009b``, valid inside a JSON string, and C0 controls (escaped
    by the encoder inside strings, line ends outside) are left. Cost: one
    regular-expression scan of the text.

    >>> terminal_text("a\\x1b[31mred\\x07.txt"), terminal_text("\\u202eevil", json_escapes=True)
    ('a\\\\x1b[31mred\\\\x07.txt', '\\\\u202eevil')
    """

    def escape(found: re.Match[str]) -> str:
        code = ord(found.group())
        return f"\\x{code:02x}" if code < 0x100 and not json_escapes else f"\\u{code:04x}"

    return (_UNSHOWABLE_IN_JSON if json_escapes else _UNSHOWABLE).sub(escape, text)


def _usage_error(message: str) -> int:
    """Print ``dedup: error: message`` (escaped: it may name paths) on stderr; the usage exit code."""
    print(f"dedup: error: {terminal_text(message)}", file=sys.stderr)
    return EXIT_USAGE


class _Parser(argparse.ArgumentParser):
    def error(self, message: str) -> None:  # one line and exit 2, as documented
        self.print_usage(sys.stderr)
        self.exit(EXIT_USAGE, f"dedup: error: {message}\n")


def build_parser() -> argparse.ArgumentParser:
    """The whole command line: ``audit`` (its settings generated from `AuditSettings`) and the index commands."""
    parser = _Parser(
        prog="dedup",
        description="Find exact copies, near-copies and shared passages in a body of text, and propose what to keep.",
        epilog=CAUTION,
    )
    parser.add_argument("--version", action="version", version=f"dedup {__version__}")
    commands = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)

    p = commands.add_parser(
        "audit",
        help="audit files and folders for duplicates",
        description=(
            "Audit files and folders (.txt .md .rst .adoc .html .htm .xhtml .eml .mbox; .docx .odt .pdf with "
            "dedup[docs]; records in .jsonl .json .csv .tsv .parquet; .zip .tar .tar.gz .tgz archives read in place; "
            "'-' reads a list of paths from standard input) for exact and "
            "near-duplicate documents. Writes audit.json, pairs.csv, clusters.csv, actions.csv, ledger.csv, "
            "run.json and report.html into --out."
        ),
        epilog=CAUTION
        + " Exit codes: 0 ran, 1 --fail-on was met, 2 usage error (or an unusable index), 3 internal error.",
    )
    p.add_argument("paths", nargs="+", metavar="PATH", help="files and folders to read (folders recursively)")
    p.add_argument("--out", required=True, metavar="DIR", help="folder for the outputs (created if needed)")
    add_setting_options(p)
    g = p.add_argument_group("running")
    g.add_argument(
        "--fail-on",
        choices=FAIL_ON,
        default="none",
        help="exit with code 1 when any cluster is found (any), or, with --index, when a cluster is new (new) "
        "or new or grown (grown), or new, grown or with a member's text changed (changed) since the baseline, "
        "else the last audit; reviewed clusters never count (default: none)",
    )
    g.add_argument(
        "--index",
        default=None,
        metavar="FILE",
        help="index file: refresh its documents and search statistics, apply remembered review decisions, "
        "compare with the baseline (else the last audit), record this audit",
    )
    g.add_argument(
        "--accept",
        action="store_true",
        help="with --index: accept this audit's clusters as the baseline that later audits compare with",
    )
    g.add_argument("--quiet", action="store_true", help="no progress and no summary")
    g.add_argument(
        "--json",
        action="store_true",
        help="print the summary and, with --index, the delta as JSON on stdout (instead of the summary lines)",
    )
    g.add_argument(
        "--no-report",
        action="store_true",
        help="write the data files (JSON, CSV) but not report.html, for pipelines that only read the data",
    )
    g.add_argument(
        "--work-dir",
        default=argparse.SUPPRESS,
        metavar="DIR",
        help="folder for intermediate data spilled to disk while auditing (texts, signatures; about twice "
        "the size of the text read, plus the word hashes of up to 64 MB of text); default: .dedup-work in "
        "the output folder",
    )
    g.add_argument(
        "--keep-work", action="store_true", help="leave the work folder in place at the end (to inspect it)"
    )
    g.add_argument(
        "--workers",
        type=_positive_int,
        default=1,
        metavar="N",
        help="processes that read and normalize files in parallel (default 1); results are the same for any N",
    )
    g.add_argument(
        "--engine",
        type=_engine_name,
        default="local",
        metavar="{local,spark}",
        help="where the audit runs: local (this machine) or spark (Apache Spark: needs dedup[spark] and "
        "Java); the outputs are the same (default: local)",
    )
    g.add_argument(
        "--spark-master",
        default=None,
        metavar="URL",
        help="with --engine spark: the master of the Spark session started (default: local[*])",
    )
    from . import cli_index

    cli_index.register(commands)
    from . import cli_check

    cli_check.register(commands)
    return parser


def add_setting_options(
    parser: argparse.ArgumentParser,
    names: Iterable[str] | None = None,
    *,
    title: str | None = None,
    stored: bool = False,
) -> None:
    """Add the options of settings to ``parser``, generated from their declaration in `AuditSettings`.

    Each option stores its value under the setting's own name, which `settings_from_args` reads back,
    so a new setting needs no change here.

    Parameters
    ----------
    names : iterable of str, optional
        The settings to offer (default: every setting with an `Option`), shown in declaration order.
    title : str, optional
        One help section for all of them instead of each option's own group.
    stored : bool
        The defaults are those recorded elsewhere (an index): an option not given is left out of
        the parsed arguments, and the help says "as the index records".
    """
    offered = setting_options()
    if names is not None:
        wanted = set(names)
        unknown = wanted - {name for name, _ in offered}
        if unknown:
            raise ValueError(f"no command-line option for the settings {sorted(unknown)}")
        offered = tuple((name, option) for name, option in offered if name in wanted)
    defaults = AuditSettings()
    sections: dict[str, argparse._ArgumentGroup] = {}
    # A stable sort keeps the declaration order inside each section.
    for name, option in sorted(offered, key=lambda item: 0 if title else GROUPS.index(item[1].group)):
        heading = title or option.group
        if heading not in sections:
            sections[heading] = parser.add_argument_group(heading)
        _add_setting_option(sections[heading], name, option, getattr(defaults, name), stored)


def _add_setting_option(
    group: argparse._ArgumentGroup, name: str, option: Option, default: object, stored: bool
) -> None:
    """One generated option: its argparse action, default and help (with the default where it says something)."""
    kwargs: dict[str, object] = {"dest": name, "help": option.help + _default_note(option, default, stored)}
    if option.form in ("switch", "inverse"):
        kwargs.update(action="store_const", const=option.form == "switch", default=default)
    else:
        kwargs.update(type=option.parse, choices=option.choices, metavar=option.metavar)
        if option.form == "many":
            # Never a list default: argparse would append to it (and repeat it in the help).
            kwargs.update(action="append", default=None)
        else:
            kwargs["default"] = default
    if stored:
        kwargs["default"] = argparse.SUPPRESS
    group.add_argument(*option.flags, **kwargs)


def _default_note(option: Option, default: object, stored: bool) -> str:
    """`` (default: …)`` where the default means something to the reader, else nothing.

    Switches (off unless given), repeatable options (none unless given) and values whose
    default is None say nothing, unless their `Option` words the default itself.
    """
    if stored:
        return " (default: as the index records)"
    if option.default_text is not None:
        return f" (default: {option.default_text})"
    if option.form == "value" and default is not None:
        return f" (default: {default})"
    return ""


def settings_from_args(args: argparse.Namespace, base: AuditSettings | None = None) -> AuditSettings:
    """The settings given by parsed arguments (options made by `add_setting_options`) over ``base``.

    A setting whose option was not added, or (``stored``) not given, keeps its value in ``base``
    (default: `AuditSettings`' defaults). Repeated options become tuples. Not validated.
    """
    given = vars(args)
    changes = {}
    for name, option in setting_options():
        if name not in given:
            continue
        value = given[name]
        if option.form == "many":
            if value is None:
                continue
            value = tuple(value)
        changes[name] = value
    return (base or AuditSettings()).replace(**changes)


def _summary_lines(result, paths: dict[str, str]) -> list[str]:
    s = result.summary
    inputs = s["inputs"]
    r = result.candidates["expected_recall"]["points"]
    lines = [
        (
            f"inputs: {inputs['entries']:,} ({inputs['read']:,} read, {inputs['truncated']:,} truncated, "
            f"{inputs['empty']:,} empty, {inputs['skipped']:,} skipped, {inputs['refused']:,} refused)"
        ),
        f"exact-copy groups: {s['exact_groups']:,} ({s['documents_in_exact_groups']:,} documents)",
        f"clusters: {s['clusters']:,} ({s['documents_in_clusters']:,} documents, {s['linked_through']:,} linked through another member)",
        f"proposed: retire {s['retire_documents']:,} documents ({s['retire_bytes']:,} bytes), "
        f"merge then retire {s['merge_documents']:,} ({s['merge_bytes']:,} bytes), review {s['review_documents']:,}",
        f"candidates: {result.candidates['reason']}",
        (
            "expected recall: 100% (exhaustive); LSH would catch "
            if result.candidates["method"] == "exhaustive"
            else "expected recall: "
        )
        + (
            f"{r['at']['probability']:.1%} at Jaccard {r['at']['jaccard']}, "
            f"{r['below']['probability']:.1%} at {r['below']['jaccard']}, {r['above']['probability']:.1%} at {r['above']['jaccard']}"
        ),
    ]
    lines += [f"warning: {w['message']}" for w in result.warnings]
    if "report.html" in paths:
        lines.append(f"report: {paths['report.html']}")
    else:
        lines.append(f"outputs: {os.path.dirname(paths['audit.json']) or '.'} (no report.html: --no-report)")
    lines.append("note: flags are evidence for review, not verdicts; no file was changed.")
    return lines


def _engine_name(text: str) -> str:
    """An engine that can run here (a usage error names what to install otherwise)."""
    if text == "local":  # the default: nothing to check, nothing to import
        return text
    from .engines import ENGINES, engine_problem

    if text not in ENGINES:
        raise argparse.ArgumentTypeError(f"choose one of {', '.join(ENGINES)}, not {text!r}")
    problem = engine_problem(text)
    if problem:
        raise argparse.ArgumentTypeError(problem)
    return text


def _positive_int(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"not a whole number: {text!r}") from None
    if value < 1:
        raise argparse.ArgumentTypeError(f"must be at least 1: {value}")
    return value


# The default work folder inside the output folder (hidden, so a walk over it skips it).
WORK_FOLDER = ".dedup-work"


def _out_problem(out: str, work_dir: str, inputs: list[str]) -> str:
    """Why the outputs cannot go into ``out`` (then nothing has been written), or ``""``
    once it exists and may be written (created if needed).

    Refused: a path that is not a folder; a folder that holds files named like our
    outputs that dedup did not write, or that is an input folder (or inside one) and
    holds anything but our outputs (`dedup.report.files.check_out_folder`); a work
    folder that is a link (its files would be written through it).
    """
    from .report.files import OutputFolderError, check_out_folder

    if os.path.exists(out) and not os.path.isdir(out):
        return f"--out {out} exists and is not a folder"
    if os.path.islink(work_dir):
        return f"the work folder {work_dir} is a link; dedup does not write through links: remove it"
    try:
        check_out_folder(out, inputs)
    except OutputFolderError as err:
        return str(err)
    try:
        os.makedirs(out, exist_ok=True)
    except OSError as err:
        return f"cannot create the output folder {out}: {err.strerror}"
    if not os.access(out, os.W_OK):
        return f"the output folder {out} is not writable"
    return ""


def _own_folders(out: str, work_dir: str, inputs: list[str]) -> list[tuple[str, str]]:
    """What the audit must not read of what it writes (see `dedup.ingest.leaving_out`): the
    work folder, each output file already in ``out``, and ``out`` itself when it is an
    input folder or inside one (it then holds nothing else: `_out_problem`)."""
    from .report.files import OUTPUT_NAMES

    own = [(work_dir, "work folder of this audit: not read")]
    own += [(os.path.join(out, name), "an output of this audit (--out): not read") for name in OUTPUT_NAMES]
    real = os.path.realpath(out)
    for given in inputs:
        folder = os.path.realpath(given) if given != "-" and os.path.isdir(given) else None
        if folder is not None and (real == folder or real.startswith(folder.rstrip(os.sep) + os.sep)):
            own.append((out, "output folder of this audit (--out): not read"))
            break
    return own


def _run_audit(args: argparse.Namespace) -> int:
    from .api import audit
    from .engines.spark.session import is_uri
    from .engines.tuning import lean_allocation
    from .ingest import InputError, leaving_out
    from .progress import Progress, StderrProgress

    try:
        settings = settings_from_args(args).validate()
    except SettingsError as err:
        return _usage_error(str(err))
    for path in args.paths + ([settings.ignore_text_file] if settings.ignore_text_file else []):
        if path != "-" and not (args.engine == "spark" and is_uri(path)) and not os.path.exists(path):
            return _usage_error(f"no such file or folder: {path}")
    if (args.fail_on not in ("none", "any") or args.accept) and not args.index:
        print(
            f"dedup: error: {'--accept' if args.accept else '--fail-on ' + args.fail_on} needs an index of "
            "earlier audits: give --index FILE",
            file=sys.stderr,
        )
        return EXIT_USAGE
    if args.index and os.path.exists(args.index):
        from .index import IndexFileError, open_index

        try:
            open_index(args.index).close()
        except IndexFileError as err:
            return _usage_error(str(err))
    out = args.out
    work_dir = getattr(args, "work_dir", None) or os.path.join(out, WORK_FOLDER)
    problem = _out_problem(out, work_dir, args.paths)
    if problem:
        return _usage_error(problem)
    progress = Progress.silent() if args.quiet else StderrProgress()
    try:
        with leaving_out(_own_folders(out, work_dir, args.paths)):
            result = audit(
                args.paths,
                settings,
                progress=progress,
                work_dir=work_dir,
                keep_work=args.keep_work,
                workers=args.workers,
                engine=args.engine,
                spark_master=args.spark_master,
                tune_process=True,  # the command owns its process; put back as it was afterwards
            )
    except InputError as err:
        return _usage_error(str(err))
    except OSError as err:
        # The work folder (texts spilled while auditing) could not be written: full disk, no permission.
        return _usage_error(f"cannot use the work folder {work_dir}: {err.strerror or err}")
    code = EXIT_FOUND if args.fail_on == "any" and result.summary["clusters"] > 0 else EXIT_OK
    delta = None
    if args.index:
        from .cli_index import audit_with_index, delta_lines

        delta, code = audit_with_index(
            args.index,
            result,
            args.fail_on,
            accept=args.accept,
            leave_out=_own_folders(out, work_dir, args.paths),
            quiet=args.quiet,
        )
        if code == EXIT_USAGE:
            return EXIT_USAGE
        result.delta = delta
    try:
        with lean_allocation():
            paths = result.write(out, progress, report=not args.no_report)
    except OSError as err:
        return _usage_error(f"cannot write the outputs into {out}: {err}")
    if args.json:
        from .cli_index import audit_json

        print(audit_json(result, paths, delta, code, args.fail_on))
    elif not args.quiet:
        # Escaped line by line: warnings and paths hold document ids and file names.
        print("\n".join(map(terminal_text, _summary_lines(result, paths))))
        if delta is not None:
            print("\n".join(map(terminal_text, delta_lines(delta))))
    return code


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if args.command is None:
        parser.print_help(sys.stderr)
        return EXIT_USAGE
    try:
        if args.command == "audit":
            return _run_audit(args)
        if args.command == "check":
            from . import cli_check

            return cli_check.run(args)
        from . import cli_index

        if args.command in cli_index.COMMANDS:
            return cli_index.run(args)
    except KeyboardInterrupt:
        print("dedup: interrupted", file=sys.stderr)
        return 130
    except Exception as err:  # a bug of ours: one clear line, never a traceback
        if os.environ.get("DEDUP_DEBUG"):
            raise
        print(
            terminal_text(
                f"dedup: internal error: {type(err).__name__}: {err} (set DEDUP_DEBUG=1 for details)"
            ),
            file=sys.stderr,
        )
        return EXIT_INTERNAL
    return EXIT_USAGE


if __name__ == "__main__":
    sys.exit(main())
