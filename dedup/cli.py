"""Command line: a thin layer over `dedup.audit`.

Exit codes
----------
0  the audit ran (whatever it found)
1  ``--fail-on any`` and at least one cluster was found; with ``--index``, ``--fail-on new`` /
   ``grown`` and a cluster new (or grown) since the last audit; reviewed clusters never count
2  usage error: a bad option, a path that does not exist, an output folder that
   cannot be written
3  an unexpected internal error (reported in one line; please file it)
"""

from __future__ import annotations

import argparse
import os
import sys

from . import __version__
from .settings import CANDIDATE_METHODS, HASH_SCHEMES, KEEPER_POLICIES, MEASURES, AuditSettings, SettingsError

__all__ = ["main", "build_parser"]

EXIT_OK, EXIT_FOUND, EXIT_USAGE, EXIT_INTERNAL = 0, 1, 2, 3

CAUTION = (
    "A similarity flag is evidence for a person to review, not a verdict: quotations, citations, "
    "shared templates and common phrasing match too. dedup only reads its inputs: it never changes, "
    "moves or deletes a file; the actions it writes are proposals."
)


class _Parser(argparse.ArgumentParser):
    def error(self, message: str) -> None:  # one line and exit 2, as documented
        self.print_usage(sys.stderr)
        self.exit(EXIT_USAGE, f"dedup: error: {message}\n")


def build_parser() -> argparse.ArgumentParser:
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
        formatter_class=argparse.ArgumentDefaultsHelpFormatter,
    )
    d = AuditSettings()
    p.add_argument("paths", nargs="+", metavar="PATH", help="files and folders to read (folders recursively)")
    p.add_argument("--out", required=True, metavar="DIR", help="folder for the outputs (created if needed)")
    g = p.add_argument_group("what counts as a duplicate")
    g.add_argument(
        "--threshold",
        type=float,
        default=d.threshold,
        help="score at or above which a pair is a near-duplicate",
    )
    g.add_argument("--measure", choices=MEASURES, default=d.measure, help="the exact score that decides")
    g.add_argument("--shingle-size", type=int, default=d.shingle_size, metavar="K", help="words per shingle")
    g.add_argument(
        "--char-ngrams",
        type=int,
        default=None,
        metavar="N",
        help="use character N-grams instead of word shingles (for text without spaces)",
    )
    g = p.add_argument_group("candidate search (MinHash LSH)")
    g.add_argument(
        "--candidates",
        choices=CANDIDATE_METHODS,
        default=d.candidates,
        help="how candidate pairs are found; auto compares all pairs exactly for small inputs",
    )
    g.add_argument(
        "--exhaustive-max-docs",
        type=int,
        default=d.exhaustive_max_docs,
        metavar="N",
        help="largest number of distinct texts for which auto compares all pairs",
    )
    g.add_argument(
        "--candidate-threshold",
        type=float,
        default=None,
        metavar="J",
        help="Jaccard level the LSH bands are tuned for (default: the threshold for jaccard, 0.5 otherwise)",
    )
    g.add_argument("--num-perm", type=int, default=d.num_perm, metavar="N", help="MinHash permutations")
    g.add_argument("--seed", type=int, default=d.seed, help="seed of the MinHash permutations")
    g.add_argument(
        "--bands", type=int, default=None, help="LSH bands (with --rows; default: chosen from the threshold)"
    )
    g.add_argument("--rows", type=int, default=None, help="rows per LSH band (with --bands)")
    g.add_argument(
        "--bucket-limit",
        type=int,
        default=d.bucket_limit,
        metavar="N",
        help="band buckets larger than this are reported and only partly compared",
    )
    g.add_argument(
        "--hash-scheme",
        choices=HASH_SCHEMES,
        default=d.hash_scheme,
        help="MinHash hashing: stable64 (one hash function per permutation), binned "
        "(one hash split into bins, several times faster), datasketch-sha1 (reproduces datasketch's MinHash, slow)",
    )
    g = p.add_argument_group("TF-IDF cosine")
    g.add_argument(
        "--tfidf-features",
        type=int,
        default=d.tfidf_features,
        metavar="N",
        help="size of the hashed feature space",
    )
    g.add_argument("--sublinear-tf", action="store_true", help="use 1 + ln(tf) for term frequency")
    g = p.add_argument_group("what to keep")
    g.add_argument(
        "--keeper",
        choices=KEEPER_POLICIES,
        default=d.keeper_policy,
        help="how the document to keep is chosen in each cluster",
    )
    g.add_argument(
        "--prefer",
        action="append",
        default=[],
        metavar="GLOB",
        help="path pattern that wins as keeper, in the order given (repeatable), e.g. 'current/**'",
    )
    g.add_argument(
        "--date-field",
        default=None,
        metavar="FIELD",
        help="record field with a date for --keeper newest/oldest (else file modification time)",
    )
    g.add_argument(
        "--retire-coverage",
        type=float,
        default=d.retire_coverage,
        metavar="SHARE",
        help="propose retiring a near-duplicate only if this share of it is in the keeper",
    )
    g = p.add_argument_group("boilerplate")
    g.add_argument(
        "--keep-boilerplate", action="store_true", help="do not leave out lines shared by many documents"
    )
    g.add_argument(
        "--boilerplate-share",
        type=float,
        default=d.boilerplate_share,
        metavar="SHARE",
        help="a line in at least this share of the distinct texts is boilerplate",
    )
    g.add_argument(
        "--boilerplate-min-texts",
        type=int,
        default=d.boilerplate_min_texts,
        metavar="N",
        help="... and in at least this many",
    )
    g.add_argument(
        "--boilerplate-max-text-share",
        type=float,
        default=d.boilerplate_max_text_share,
        metavar="SHARE",
        help="a text that would lose more than this share to boilerplate is compared whole",
    )
    g.add_argument(
        "--ignore-text",
        default=None,
        metavar="FILE",
        help="a file of known shared text (one line per notice, footer, …) always left out",
    )
    g = p.add_argument_group("inputs")
    g.add_argument(
        "--id-field",
        default=None,
        metavar="FIELD",
        help="record field holding the document id (.jsonl/.csv); default: the line or row number",
    )
    g.add_argument(
        "--text-field",
        action="append",
        default=None,
        metavar="FIELD",
        help="record field(s) holding the text (repeatable; joined); default: text",
    )
    g.add_argument(
        "--max-file-bytes",
        type=int,
        default=d.max_file_bytes,
        metavar="N",
        help="skip files larger than this",
    )
    g.add_argument("--include-hidden", action="store_true", help="also read hidden files and folders")
    g.add_argument(
        "--include-vcs", action="store_true", help="also read version-control folders (.git, .hg, .svn, …)"
    )
    g.add_argument(
        "--include",
        action="append",
        default=[],
        metavar="GLOB",
        help="read only paths matching this glob (repeatable)",
    )
    g.add_argument(
        "--exclude",
        action="append",
        default=[],
        metavar="GLOB",
        help="do not read paths matching this glob (repeatable)",
    )
    g.add_argument(
        "--max-text-chars",
        type=int,
        default=d.max_text_chars,
        metavar="N",
        help="cut longer texts to this many characters (marked truncated)",
    )
    g.add_argument(
        "--max-archive-ratio",
        type=float,
        default=d.max_archive_ratio,
        metavar="R",
        help="refuse archive members that expand more than R times",
    )
    g.add_argument(
        "--max-archive-bytes",
        type=int,
        default=d.max_archive_bytes,
        metavar="N",
        help="stop expanding an archive beyond N bytes in all",
    )
    g.add_argument(
        "--html-keep-all",
        action="store_true",
        help="keep navigation, headers, footers and asides of HTML pages",
    )
    g = p.add_argument_group("running")
    g.add_argument(
        "--fail-on",
        choices=("none", "any", "new", "grown"),
        default="none",
        help="exit with code 1 when any cluster is found (any), or, with --index, when a cluster is new (new) "
        "or new or grown (grown) since the last audit; reviewed clusters never count",
    )
    g.add_argument(
        "--index",
        default=None,
        metavar="FILE",
        help="index file: apply remembered review decisions, compare with the last audit, record this one",
    )
    g.add_argument("--quiet", action="store_true", help="no progress and no summary")
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
    from . import cli_index

    cli_index.register(commands)
    return parser


def _settings_from(args: argparse.Namespace) -> AuditSettings:
    return AuditSettings(
        threshold=args.threshold,
        measure=args.measure,
        candidate_threshold=args.candidate_threshold,
        shingle_size=args.shingle_size,
        char_ngrams=args.char_ngrams,
        num_perm=args.num_perm,
        seed=args.seed,
        hash_scheme=args.hash_scheme,
        bands=args.bands,
        rows=args.rows,
        bucket_limit=args.bucket_limit,
        candidates=args.candidates,
        exhaustive_max_docs=args.exhaustive_max_docs,
        tfidf_features=args.tfidf_features,
        sublinear_tf=args.sublinear_tf,
        keeper_policy=args.keeper,
        prefer=tuple(args.prefer),
        date_field=args.date_field,
        retire_coverage=args.retire_coverage,
        id_field=args.id_field,
        text_fields=tuple(args.text_field) if args.text_field else ("text",),
        boilerplate=not args.keep_boilerplate,
        boilerplate_share=args.boilerplate_share,
        boilerplate_min_texts=args.boilerplate_min_texts,
        boilerplate_max_text_share=args.boilerplate_max_text_share,
        ignore_text_file=args.ignore_text,
        max_file_bytes=args.max_file_bytes,
        include_hidden=args.include_hidden,
        include_vcs=args.include_vcs,
        include=tuple(args.include),
        exclude=tuple(args.exclude),
        max_text_chars=args.max_text_chars,
        max_archive_ratio=args.max_archive_ratio,
        max_archive_bytes=args.max_archive_bytes,
        html_keep_all=args.html_keep_all,
        fail_on=args.fail_on,
    )


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
        f"proposed: retire {s['retire_documents']:,} documents ({s['retire_bytes']:,} bytes), review {s['review_documents']:,}",
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
    lines.append(f"report: {paths['report.html']}")
    lines.append("note: flags are evidence for review, not verdicts; no file was changed.")
    return lines


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


def _run_audit(args: argparse.Namespace) -> int:
    from .api import audit
    from .ingest import InputError
    from .progress import Progress, StderrProgress

    try:
        settings = _settings_from(args).validate()
    except SettingsError as err:
        print(f"dedup: error: {err}", file=sys.stderr)
        return EXIT_USAGE
    for path in args.paths + ([args.ignore_text] if args.ignore_text else []):
        if path != "-" and not os.path.exists(path):
            print(f"dedup: error: no such file or folder: {path}", file=sys.stderr)
            return EXIT_USAGE
    if settings.fail_on in ("new", "grown") and not args.index:
        print(
            f"dedup: error: --fail-on {settings.fail_on} compares with the last audit: give --index FILE",
            file=sys.stderr,
        )
        return EXIT_USAGE
    if args.index and os.path.exists(args.index):
        from .index import IndexFileError, open_index

        try:
            open_index(args.index).close()
        except IndexFileError as err:
            print(f"dedup: error: {err}", file=sys.stderr)
            return EXIT_USAGE
    out = args.out
    if os.path.exists(out) and not os.path.isdir(out):
        print(f"dedup: error: --out {out} exists and is not a folder", file=sys.stderr)
        return EXIT_USAGE
    try:
        os.makedirs(out, exist_ok=True)
    except OSError as err:
        print(f"dedup: error: cannot create the output folder {out}: {err.strerror}", file=sys.stderr)
        return EXIT_USAGE
    if not os.access(out, os.W_OK):
        print(f"dedup: error: the output folder {out} is not writable", file=sys.stderr)
        return EXIT_USAGE
    progress = Progress.silent() if args.quiet else StderrProgress()
    try:
        result = audit(
            args.paths,
            settings,
            progress=progress,
            work_dir=getattr(args, "work_dir", None) or os.path.join(out, WORK_FOLDER),
            keep_work=args.keep_work,
            workers=args.workers,
        )
    except InputError as err:
        print(f"dedup: error: {err}", file=sys.stderr)
        return EXIT_USAGE
    except OSError as err:
        # The work folder (texts spilled while auditing) could not be written: full disk, no permission.
        where = getattr(args, "work_dir", None) or os.path.join(out, WORK_FOLDER)
        print(f"dedup: error: cannot use the work folder {where}: {err.strerror or err}", file=sys.stderr)
        return EXIT_USAGE
    code = EXIT_FOUND if settings.fail_on == "any" and result.summary["clusters"] > 0 else EXIT_OK
    delta = None
    if args.index:
        from .cli_index import audit_with_index, delta_lines

        delta, code = audit_with_index(args.index, result, settings.fail_on)
        if code == EXIT_USAGE:
            return EXIT_USAGE
        result.delta = delta
    try:
        paths = result.write(out, progress)
    except OSError as err:
        print(f"dedup: error: cannot write the outputs into {out}: {err}", file=sys.stderr)
        return EXIT_USAGE
    if not args.quiet:
        print("\n".join(_summary_lines(result, paths)))
        if delta is not None:
            print("\n".join(delta_lines(delta)))
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
            f"dedup: internal error: {type(err).__name__}: {err} (set DEDUP_DEBUG=1 for details)",
            file=sys.stderr,
        )
        return EXIT_INTERNAL
    return EXIT_USAGE


if __name__ == "__main__":
    sys.exit(main())
