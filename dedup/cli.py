"""Command line: a thin layer over `dedup.audit`.

The options of the audit settings are not written here: `add_setting_options` generates
them from the `Option` each `AuditSettings` field declares, and `settings_from_args`
maps the parsed arguments back, for ``dedup audit`` and the index commands alike.

Options may also come from a config file (``dedup.toml`` in the first folder given, a
``[tool.dedup]`` table of its ``pyproject.toml``, or ``--config FILE``; see `dedup.config`):
options given on the command line win over the file.

Exit codes
----------
0  the audit ran (whatever it found)
1  ``--fail-on any`` and at least one cluster was found; with ``--index``, ``--fail-on new`` /
   ``grown`` / ``changed`` and a cluster new (new or grown; new, grown or changed) since the
   baseline, else the last audit; reviewed clusters never count, nor does an ``--accept`` run
2  usage error: a bad option, a path that does not exist, an output folder that
   cannot be written or holds files dedup did not write (see `_out_problem`), a config
   file that cannot be used
3  an unexpected internal error (reported in one line; please file it)
4  inputs not read: no document was read, more than ``--max-skipped-share`` of the inputs
   could not be read, or (``--fail-on skipped``) any could not; the reasons are on stderr
   and every output is written all the same (``ledger.csv`` says what became of each
   input). Wins over 1. Inputs are the entries of the ledger (files, archive members,
   records) except those left out on purpose (`LEFT_OUT_ON_PURPOSE`); an input is not read
   when it is skipped or refused for another reason (`unread_inputs`)
130  interrupted (Ctrl-C); 141  standard output closed by its reader (``| head``)
"""

from __future__ import annotations

import argparse
import os
import re
import sys
from collections.abc import Iterable

from . import __version__
from .settings import GROUPS, AuditSettings, Option, SettingsError, setting_options

__all__ = [
    "main",
    "build_parser",
    "add_setting_options",
    "settings_from_args",
    "FAIL_ON",
    "terminal_text",
    "input_problems",
    "unread_inputs",
    "LEFT_OUT_ON_PURPOSE",
]

EXIT_OK, EXIT_FOUND, EXIT_USAGE, EXIT_INTERNAL, EXIT_INPUTS = 0, 1, 2, 3, 4
# When ``dedup audit`` exits with code 1 (``--fail-on``); the same names as `dedup.index.history.FAIL_ON`.
# ``--fail-on skipped`` (code 4) comes on top of these.
FAIL_ON = ("none", "any", "new", "grown", "changed")
# Above this share of inputs not read a command exits with code 4 (``--max-skipped-share``).
DEFAULT_MAX_SKIPPED_SHARE = 0.5

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


class _HelpFormatter(argparse.HelpFormatter):
    """Help that says when an option is required (argparse only shows it in the usage line)."""

    def _get_help_string(self, action: argparse.Action) -> str | None:
        text = action.help
        if text and action.required and action.option_strings and "(required)" not in text:
            text += " (required)"
        return text


class _Parser(argparse.ArgumentParser):
    def __init__(self, *args, **kwargs) -> None:
        kwargs.setdefault("formatter_class", _HelpFormatter)
        super().__init__(*args, **kwargs)

    def error(self, message: str) -> None:  # one line and exit 2, as documented
        self.print_usage(sys.stderr)
        self.exit(EXIT_USAGE, f"dedup: error: {message}\n")


def build_parser() -> argparse.ArgumentParser:
    """The whole command line: ``audit`` (its settings generated from `AuditSettings`), ``check``,
    the index commands, ``schema`` and ``completion``."""
    parser = _Parser(
        prog="dedup",
        description="Find exact copies, near-copies and shared passages in a body of text, and propose what to keep.",
        epilog=CAUTION,
    )
    parser.add_argument("--version", action="version", version=f"dedup {__version__}")
    commands = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    _register_audit(commands)
    from . import cli_index

    cli_index.register(commands)
    from . import cli_check

    cli_check.register(commands)
    _register_schema(commands)
    from . import cli_completion

    cli_completion.register(commands)
    return parser


def _register_audit(commands: argparse._SubParsersAction) -> None:
    """``dedup audit``: the paths, ``--out``, the generated setting options and the running options."""
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
        epilog=CAUTION + " " + EXIT_CODES_HELP + " " + CONFIG_HELP,
    )
    p.add_argument("paths", nargs="+", metavar="PATH", help="files and folders to read (folders recursively)")
    add_out_option(p)
    add_setting_options(p)
    g = p.add_argument_group("running")
    add_input_options(
        g,
        FAIL_ON,
        "exit with code 1 when any cluster is found (any), or, with --index, when a cluster is new (new) "
        "or new or grown (grown), or new, grown or with a member's text changed (changed) since the baseline, "
        "else the last audit; reviewed clusters never count; skipped: exit with code 4 when any input could "
        "not be read (repeatable: --fail-on any --fail-on skipped)",
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
    g.add_argument("-q", "--quiet", action="store_true", help="no progress and no summary")
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
    _add_work_options(g)
    add_config_options(g)


def _add_work_options(g: argparse._ArgumentGroup) -> None:
    """Where and how ``dedup audit`` works: work folder, processes, engine."""
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
        help="processes that read and normalize files in parallel; results are the same for any N (default: 1)",
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


# The exit codes in a help epilog (the module docstring has them in full).
EXIT_CODES_HELP = (
    "Exit codes: 0 ran, 1 --fail-on was met, 2 usage error (or an unusable index or config file), "
    "3 internal error or the Spark engine failed (one line says why), 4 inputs not read (no document, more than --max-skipped-share of the inputs, or "
    "any with --fail-on skipped; the outputs are written all the same)."
)
CONFIG_HELP = (
    "Options can also be set in dedup.toml (or [tool.dedup] of pyproject.toml) in the first folder "
    "given, or in --config FILE, by their setting or flag name; the command line wins."
)


def add_out_option(p: argparse.ArgumentParser) -> None:
    """``-o/--out DIR``, required; ``-`` is refused (the outputs are several files)."""
    p.add_argument(
        "-o",
        "--out",
        required=True,
        type=_out_folder,
        metavar="DIR",
        help="folder for the outputs (created if needed)",
    )


def _out_folder(text: str) -> str:
    if text == "-":
        raise argparse.ArgumentTypeError(
            "'-' is not a folder: the outputs are several files, written into a folder; standard output "
            "cannot take them (give a folder, e.g. -o dedup-out)"
        )
    if not text:
        raise argparse.ArgumentTypeError("give a folder for the outputs")
    return text


class _FailOn(argparse.Action):
    """``--fail-on WHEN``, repeatable: ``skipped`` sets ``fail_on_skipped``; any other choice is
    the condition on clusters (the last one given wins)."""

    repeatable = True  # a config file may give a list (`dedup.config`)

    def __call__(self, parser, namespace, values, option_string=None) -> None:
        if values == "skipped":
            namespace.fail_on_skipped = True
        else:
            setattr(namespace, self.dest, values)


def add_input_options(g: argparse._ArgumentGroup, fail_on: tuple[str, ...], fail_on_help: str) -> None:
    """``--fail-on`` (``fail_on`` among ``fail_on`` and ``fail_on_skipped``) and ``--max-skipped-share``:
    when a command exits with code 1 or 4 (see `input_problems`). Choices of the command line,
    not settings: they change no output."""
    g.add_argument(
        "--fail-on",
        action=_FailOn,
        choices=(*fail_on, "skipped"),
        default="none",
        help=fail_on_help + " (default: none)",
    )
    g.set_defaults(fail_on_skipped=False)
    g.add_argument(
        "--max-skipped-share",
        type=_share,
        default=DEFAULT_MAX_SKIPPED_SHARE,
        metavar="SHARE",
        help="exit with code 4 when more than this share of the inputs could not be read (inputs left out "
        f"on purpose, e.g. hidden or excluded, do not count) (default: {DEFAULT_MAX_SKIPPED_SHARE})",
    )


def add_config_options(g: argparse._ArgumentGroup) -> None:
    """``--config FILE`` and ``--no-config`` (see `dedup.config`)."""
    g.add_argument(
        "--config",
        default=None,
        metavar="FILE",
        help="read options from this TOML file (dedup.toml, or a pyproject.toml with [tool.dedup]) instead of "
        "the dedup.toml or pyproject.toml of the first folder given",
    )
    g.add_argument(
        "--no-config",
        action="store_true",
        help="read no config file, not even dedup.toml or pyproject.toml of the first folder given",
    )


def _register_schema(commands: argparse._SubParsersAction) -> None:
    """``dedup schema [NAME]``."""
    p = commands.add_parser(
        "schema",
        help="print the JSON Schema of an output",
        description="Print the JSON Schema (draft 2020-12) of one of dedup's JSON outputs, to check them in a "
        "pipeline; without a NAME, list the names.",
    )
    name = p.add_argument(
        "name", nargs="?", metavar="NAME", help="the schema to print (default: list the names)"
    )
    name.complete_words = _schema_names  # for the completion script (`dedup.cli_completion`)


def _schema_names() -> list[str]:
    """The names `dedup.schemas` publishes, or none when it is missing."""
    try:
        from .schemas import schema_names
    except ImportError:
        return []
    return schema_names()


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


# Why an input is passed over on purpose (the kinds of `dedup.ingest.reason_kind`, by how they
# start): a choice of the reader or of the user, not a failure to read, so such an input is not
# counted among the inputs at all (`unread_inputs`). Each has an option to read it, or is read
# elsewhere (a file seen twice), or is no text (an unsupported type, e.g. an image), or is what
# the audit itself writes.
LEFT_OUT_ON_PURPOSE = (
    "hidden ",  # hidden file or folder: --include-hidden
    "version-control folder",  # --include-vcs
    "excluded by --exclude",
    "not matched by --include",
    "link to a file outside the audited folders",  # --follow-links
    "link to a folder, not followed",
    "link inside an archive, not followed",
    "same file as ",  # read once, under its first name
    "unsupported file type",
    "work folder of this audit",
    "an output of this audit",
    "output folder of this audit",
)


def unread_inputs(inputs: dict) -> tuple[int, dict[str, int]]:
    """How many inputs count, and the reasons (kind -> count) of those that could not be read.

    ``inputs`` is a ledger summary (`dedup.ingest.summarize`). Its entries are the inputs —
    files, archive members, records — except those left out on purpose (`LEFT_OUT_ON_PURPOSE`);
    an input is not read when it is skipped or refused for any other reason (binary data, an
    encoding not recognized, too large, damaged, encrypted, no text layer, a record without
    its text field, an unsafe archive member …). Read, truncated and empty inputs were read.

    >>> unread_inputs({"entries": 5, "skip_reasons": {"binary data": 2, "hidden file": 1}})
    (4, {'binary data': 2})
    """
    reasons = inputs.get("skip_reasons", {})
    on_purpose = sum(n for kind, n in reasons.items() if kind.startswith(LEFT_OUT_ON_PURPOSE))
    failed = {kind: n for kind, n in reasons.items() if not kind.startswith(LEFT_OUT_ON_PURPOSE)}
    return inputs.get("entries", 0) - on_purpose, failed


def input_problems(
    inputs: dict, max_skipped_share: float, fail_on_skipped: bool, what: str = "document"
) -> list[str]:
    """Why a run exits with code 4 (none: ``[]``), from its ledger summary ``inputs``.

    A run that read no ``what`` (nothing read or truncated), that could not read more than
    ``max_skipped_share`` of its inputs, or (``fail_on_skipped``) that could not read one of
    them, has not done what was asked however it ends. Inputs as in `unread_inputs`.
    """
    counted, failed = unread_inputs(inputs)
    not_read = sum(failed.values())
    why = _reasons_text(failed)
    if inputs.get("read", 0) + inputs.get("truncated", 0) == 0:
        if inputs.get("entries", 0) == 0:
            return [f"no {what} was read: the paths given hold no input"]
        parts = [f"{not_read:,} could not be read ({why})" if not_read else ""]
        parts.append(f"{inputs.get('empty', 0):,} had no text" if inputs.get("empty", 0) else "")
        left_out = inputs.get("entries", 0) - counted
        parts.append(
            f"{left_out:,} were left out on purpose (hidden, excluded, not text …)" if left_out else ""
        )
        return [f"no {what} was read ({counted:,} inputs): " + "; ".join(p for p in parts if p)]
    if not_read and not_read / counted > max_skipped_share:
        return [
            f"{not_read:,} of {counted:,} inputs could not be read ({not_read / counted:.0%}, more than "
            f"--max-skipped-share {max_skipped_share:g}): {why}"
        ]
    if not_read and fail_on_skipped:
        return [f"{not_read:,} of {counted:,} inputs could not be read (--fail-on skipped): {why}"]
    return []


def _reasons_text(failed: dict[str, int], shown: int = 3) -> str:
    """The most frequent reasons with their counts, e.g. ``binary data: 5, file too large: 3``."""
    ranked = sorted(failed.items(), key=lambda item: (-item[1], item[0]))
    text = ", ".join(f"{kind}: {n:,}" for kind, n in ranked[:shown])
    return text + (f", and {len(ranked) - shown} other reasons" if len(ranked) > shown else "")


def report_input_problems(problems: list[str], where: str) -> int:
    """Print each problem on stderr (``where``: where the ledger is); the exit code (4, or 0 without problems)."""
    for problem in problems:
        print(terminal_text(f"dedup: inputs not read: {problem}"), file=sys.stderr)
    if problems and where:
        print(terminal_text(f"dedup: what became of each input: {where}"), file=sys.stderr)
    return EXIT_INPUTS if problems else EXIT_OK


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
    ]
    if s.get("distinct_texts", 0) < 2:
        # Nothing was compared: no statement about what a comparison would have caught.
        lines.append(f"candidates: none ({s.get('distinct_texts', 0):,} distinct texts: nothing to compare)")
    elif result.settings.measure != "jaccard" and result.candidates["method"] == "exhaustive":
        lines.append(f"candidates: {result.candidates['reason']}")
        lines.append(f"expected recall: 100% (exact search for {result.settings.measure})")
    elif result.candidates["expected_recall"].get("value", 1.0) is None:
        lines.append(f"candidates: {result.candidates['reason']}")
        measure = result.settings.measure
        lines.append(
            f"expected recall: none promised for {measure} with LSH (--candidates exhaustive finds every pair)"
        )
    else:
        lines.append(f"candidates: {result.candidates['reason']}")
        lines.append(
            (
                "expected recall: 100% (exhaustive); LSH would catch "
                if result.candidates["method"] == "exhaustive"
                else "expected recall: "
            )
            + (
                f"{r['at']['probability']:.1%} at Jaccard {r['at']['jaccard']}, "
                f"{r['below']['probability']:.1%} at {r['below']['jaccard']}, {r['above']['probability']:.1%} at {r['above']['jaccard']}"
            )
        )
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


def _share(text: str) -> float:
    """A share from 0 to 1 (0: any input not read is too many; 1: never too many)."""
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"not a number: {text!r}") from None
    if not 0 <= value <= 1:
        raise argparse.ArgumentTypeError(f"must be from 0 to 1: {value}")
    return value


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


def _checked_settings(args: argparse.Namespace) -> AuditSettings | str:
    """The validated settings of ``dedup audit``, or the usage problem that stops it (nothing written)."""
    from .engines.spark.session import is_uri

    try:
        settings = settings_from_args(args).validate()
    except SettingsError as err:
        return str(err) + _config_note(args)
    for path in args.paths + ([settings.ignore_text_file] if settings.ignore_text_file else []):
        if path != "-" and not (args.engine == "spark" and is_uri(path)) and not os.path.exists(path):
            return f"no such file or folder: {path}"
    if (args.fail_on not in ("none", "any") or args.accept) and not args.index:
        return (
            f"{'--accept' if args.accept else '--fail-on ' + args.fail_on} needs an index of "
            "earlier audits: give --index FILE"
        )
    if args.index and os.path.exists(args.index):
        from .index import IndexFileError, open_index

        try:  # a damaged index is refused before the audit, not after it (the check writes nothing)
            with open_index(args.index) as index, index.writing():
                pass
        except IndexFileError as err:
            return str(err)
    return settings


def _config_note(args: argparse.Namespace) -> str:
    """`` (options from FILE)`` after a settings error when a config file gave options, else nothing."""
    path = getattr(args, "config_file", None)
    return f" (options from {path} and the command line)" if path else ""


def _run_audit(args: argparse.Namespace) -> int:
    from .api import audit
    from .engines import EngineFailed
    from .ingest import InputError, leaving_out
    from .progress import Progress, StderrProgress

    settings = _checked_settings(args)
    if isinstance(settings, str):
        return _usage_error(settings)
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
    except EngineFailed as err:  # before OSError: a JVM that went away is a connection error
        print(terminal_text(f"dedup: error: {err}"), file=sys.stderr)
        return EXIT_INTERNAL
    except OSError as err:
        # The work folder (texts spilled while auditing) could not be written: full disk, no permission.
        return _usage_error(f"cannot use the work folder {work_dir}: {err.strerror or err}")
    return _finish_audit(args, result, work_dir, progress)


def _finish_audit(args: argparse.Namespace, result, work_dir: str, progress) -> int:
    """Compare with the index (``--index``), write the outputs, print the summary; the exit code."""
    from .engines.tuning import lean_allocation

    out = args.out
    code = EXIT_FOUND if args.fail_on == "any" and result.summary["clusters"] > 0 else EXIT_OK
    delta = None
    if args.index:
        from .cli_index import audit_with_index

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
    # Written whatever the inputs were: a reviewer needs the ledger most when inputs were not read.
    problems = input_problems(result.summary["inputs"], args.max_skipped_share, args.fail_on_skipped)
    code = EXIT_INPUTS if problems else code
    if getattr(args, "config_file", None):  # which file gave options, beside how the run went
        result.run["config_file"] = os.path.abspath(args.config_file)
    try:
        with lean_allocation():
            paths = result.write(out, progress, report=not args.no_report)
    except OSError as err:
        return _usage_error(f"cannot write the outputs into {out}: {err}")
    _print_audit(args, result, paths, delta, code)
    report_input_problems(problems, paths.get("ledger.csv", out))
    return code


def _print_audit(
    args: argparse.Namespace, result, paths: dict[str, str], delta: dict | None, code: int
) -> None:
    """The summary on stdout: JSON (``--json``), lines, or nothing (``--quiet``)."""
    from .cli_index import audit_json, delta_lines

    if args.json:
        print(audit_json(result, paths, delta, code, args.fail_on))
    elif not args.quiet:
        # Escaped line by line: warnings and paths hold document ids and file names.
        print("\n".join(map(terminal_text, _summary_lines(result, paths))))
        if delta is not None:
            print("\n".join(map(terminal_text, delta_lines(delta))))


def _run_schema(args: argparse.Namespace) -> int:
    """``dedup schema``: the names of the published JSON Schemas, or the text of one."""
    try:
        from .schemas import schema_names, schema_text
    except ImportError:
        print("dedup: internal error: the JSON Schemas are missing from this installation", file=sys.stderr)
        return EXIT_INTERNAL
    names = schema_names()
    if args.name is None:
        print("\n".join(names))
        return EXIT_OK
    if args.name not in names:
        return _usage_error(f"no schema named {args.name!r}: choose one of {', '.join(names)}")
    text = schema_text(args.name)
    sys.stdout.write(text if text.endswith("\n") else text + "\n")
    return EXIT_OK


# The commands that read options from a config file, by section (see `dedup.config`).
_CONFIG_COMMANDS = {"audit": ("audit",), "check": ("check",), "index": ("index build", "index update")}


def _command_parser(parser: argparse.ArgumentParser, words: str) -> argparse.ArgumentParser:
    """The parser of the command ``words`` (``"index build"``)."""
    for word in words.split():
        commands = next(a for a in parser._actions if isinstance(a, argparse._SubParsersAction))
        parser = commands.choices[word]
    return parser


def _config_section(args: argparse.Namespace) -> tuple[str, str, list[str]] | None:
    """The config section, the command and the paths of a command that reads a config file, else None."""
    if args.command in ("audit", "check"):
        return args.command, args.command, args.paths if args.command == "audit" else args.submissions
    if args.command == "index" and getattr(args, "index_command", None) in ("build", "update"):
        return "index", f"index {args.index_command}", args.paths
    return None


# Options a config file found in the audited folder may not set: where dedup writes and
# what else it reads are the choice of whoever runs it, not of the folder's content.
_GIVEN_FILE_ONLY = frozenset(
    {
        "index",
        "work_dir",
        "keep_work",
        "follow_links",
        "include_hidden",
        "include_vcs",
        "ignore_text_file",
        "accept",
    }
)


def _apply_config(parser: argparse.ArgumentParser, args: argparse.Namespace, argv: list[str]) -> str:
    """Set in ``args`` what the command's config file gives and the command line does not;
    a usage problem, else ``""``. Notes the file on stderr and in ``args.config_file``."""
    from .config import ConfigError, config_values, find_config, read_config

    found = _config_section(args)
    if found is None:
        return ""
    section, command, paths = found
    path = args.config
    # A class's submissions are not the checker's to configure: only --config for a check.
    searched = section != "check" and not args.no_config and paths and paths[0] != "-"
    if path is None and searched and os.path.isdir(paths[0]):
        path = find_config(paths[0])
    if path is None:
        return ""
    if not os.path.isfile(path):
        return f"no such config file: {path}"
    offered = {name: [_command_parser(parser, c) for c in cs] for name, cs in _CONFIG_COMMANDS.items()}
    try:
        values = config_values(read_config(path), path, section, _command_parser(parser, command), offered)
    except ConfigError as err:
        return str(err)
    if args.config is None:
        guarded = sorted(dest for dest in values if dest in _GIVEN_FILE_ONLY)
        if guarded:
            return (
                f"{path} was found in the folder being read, so it may not set {', '.join(guarded)} "
                "(where outputs go and what else is read): give the file with --config, or those options "
                "on the command line"
            )
    given = _given_on_command_line(argv)
    for dest, value in values.items():
        if dest not in given:
            setattr(args, dest, value)
    args.config_file = path
    found_how = "" if args.config else " (found in the first folder given; --no-config ignores it)"
    print(terminal_text(f"dedup: options from {path}{found_how}"), file=sys.stderr)
    return ""


def _given_on_command_line(argv: list[str]) -> set[str]:
    """The arguments (by name) that ``argv`` gives: parsed again with every default None."""
    parser = build_parser()
    stack = [parser]
    while stack:
        p = stack.pop()
        p._defaults = dict.fromkeys(p._defaults)
        for action in p._actions:
            action.default = None
            if isinstance(action, argparse._SubParsersAction):
                stack.extend(action.choices.values())
    return {dest for dest, value in vars(parser.parse_args(argv)).items() if value is not None}


def main(argv: list[str] | None = None) -> int:
    argv = sys.argv[1:] if argv is None else list(argv)
    parser = build_parser()
    args = parser.parse_args(argv)
    if args.command is None:
        parser.print_help(sys.stderr)
        return EXIT_USAGE
    try:
        problem = _apply_config(parser, args, argv)
        if problem:
            return _usage_error(problem)
        return _run(args)
    except KeyboardInterrupt:
        print("dedup: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        # Whoever read standard output stopped (``dedup schema | head -1``): nothing is wrong, and
        # what is left unwritten must not fail again when Python flushes it at exit.
        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return 141  # as a shell reports a command ended by SIGPIPE
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


def _run(args: argparse.Namespace) -> int:
    """Run the command parsed into ``args``; its exit code."""
    if args.command == "audit":
        return _run_audit(args)
    if args.command == "check":
        from . import cli_check

        return cli_check.run(args)
    if args.command == "schema":
        return _run_schema(args)
    if args.command == "completion":
        from . import cli_completion

        return cli_completion.run(args, build_parser())
    from . import cli_index

    if args.command in cli_index.COMMANDS:
        return cli_index.run(args)
    return EXIT_USAGE


if __name__ == "__main__":
    sys.exit(main())
