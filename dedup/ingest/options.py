"""What a reading run may do: the limits and choices every reader consults.

One frozen object travels from `iter_documents` down to the readers of archive members,
so a nested reader never sees different limits from the run that started it.
"""

from __future__ import annotations

from dataclasses import dataclass

from .budget import WORK_PER_CHAR

__all__ = [
    "ReadOptions",
    "DEFAULT_MAX_FILE_BYTES",
    "DEFAULT_MAX_TEXT_CHARS",
    "DEFAULT_MAX_ARCHIVE_RATIO",
    "DEFAULT_MAX_ARCHIVE_BYTES",
    "DEFAULT_MAX_ARCHIVE_MEMBERS",
    "DEFAULT_MAX_RUN_MEMBERS",
    "file_too_large",
    "record_too_large",
]

DEFAULT_MAX_FILE_BYTES = 50_000_000
# Ten million characters is a long book several times over; a longer "document" is
# almost always a dump or a log, and comparing it whole would dominate the run.
DEFAULT_MAX_TEXT_CHARS = 10_000_000
# Text compresses 3-10x and very repetitive text (logs, padded tables) up to about
# 100x; far beyond that an archive is built to explode.
DEFAULT_MAX_ARCHIVE_RATIO = 200.0
DEFAULT_MAX_ARCHIVE_BYTES = 2_000_000_000
# Every member of an archive becomes a ledger entry (a few hundred bytes held until the
# end) and an archive's list of members is read whole before its first member: a zip of
# a million empty members took 96 s and 1.4 GB. Real archives of documents hold
# hundreds or thousands of files; these leave a wide margin.
DEFAULT_MAX_ARCHIVE_MEMBERS = 100_000
DEFAULT_MAX_RUN_MEMBERS = 1_000_000


def file_too_large(size: int, limit: int) -> str:
    """The reason a file of ``size`` bytes over the file limit is skipped."""
    return f"file too large: {size} bytes, limit {limit} (raise --max-file-bytes)"


def record_too_large(limit: int) -> str:
    """The reason a record (a line, row, item or message) over the limit is skipped, in a
    file read a record at a time. Characters are never more than the bytes that spell them,
    so a record of more than ``limit`` characters is also more than ``limit`` bytes."""
    return f"record too large: more than {limit:,} bytes (raise --max-file-bytes)"


@dataclass(frozen=True)
class ReadOptions:
    """Limits and choices of one reading run.

    Parameters
    ----------
    id_field : str or None
        Record field (JSONL, JSON, CSV, TSV, Parquet) holding the document id; without
        it records are named by their line, row or item number.
    text_fields : tuple of str
        Record fields holding the text; several are joined with a blank line.
    max_file_bytes : int
        Largest file (or archive member) read into memory; larger ones are skipped.
        Archives and Parquet files on disk are streamed, so for them the archive
        limits below apply instead. Record files (JSONL, CSV, TSV) larger than this,
        or compressed, are read a record at a time: the limit then applies to each
        record (a longer one is skipped with the reason), not to the file. A single
        compressed file (``.gz``, ``.bz2``, ``.xz``, ``.zst``) of another format may
        hold at most this many bytes once decompressed.
    max_text_chars : int
        Longest text kept per document; longer texts are cut and marked "truncated".
    max_archive_ratio : float
        An archive or compressed file may expand to at most this many times its own
        size (and at least `ARCHIVE_RATIO_FLOOR` bytes, so tiny archives of repetitive
        text still open).
    max_archive_bytes : int
        An archive, with the archives nested in it, or a compressed file may expand to
        at most this many bytes.
    html_keep_all : bool
        Keep the text of navigation, headers, footers and asides of HTML pages too
        (scripts and styles are never text).
    include, exclude : tuple of str
        ``fnmatch`` patterns on ids (``*`` also crosses ``/``); a pattern without
        ``/`` also matches a bare file or folder name at any depth. With ``include``,
        only matching files are read; folders and archives are always entered.
    include_hidden : bool
        Read hidden files and folders (names starting with a dot).
    include_vcs : bool
        Read version-control folders (``.git``, ``.hg``, ``.svn`` ...).
    follow_links : bool
        Read files that a link inside the given folders points to outside them (by
        default such links are recorded as skipped: a folder handed in for auditing
        should not make the audit read, say, a system file).
    max_archive_members : int
        Most members read from one archive (nested archives count on their own); the
        rest is recorded as refused, with this limit in the reason.
    max_run_members : int
        Most archive members read in the whole run, all archives together.
    work_per_char : int
        Steps a reader may take per character of a text (see `WorkBudget`); a file
        that needs more is skipped as too costly to read.
    keep_quote_marks : bool
        Keep the ``>`` that opens a Markdown block-quote line (the class check finds
        quotations by it); an audit leaves it out, as all other markup.
    """

    id_field: str | None = None
    text_fields: tuple[str, ...] = ("text",)
    max_file_bytes: int = DEFAULT_MAX_FILE_BYTES
    max_text_chars: int = DEFAULT_MAX_TEXT_CHARS
    max_archive_ratio: float = DEFAULT_MAX_ARCHIVE_RATIO
    max_archive_bytes: int = DEFAULT_MAX_ARCHIVE_BYTES
    html_keep_all: bool = False
    include: tuple[str, ...] = ()
    exclude: tuple[str, ...] = ()
    include_hidden: bool = False
    include_vcs: bool = False
    follow_links: bool = False
    max_archive_members: int = DEFAULT_MAX_ARCHIVE_MEMBERS
    max_run_members: int = DEFAULT_MAX_RUN_MEMBERS
    work_per_char: int = WORK_PER_CHAR
    keep_quote_marks: bool = False

    def __post_init__(self) -> None:
        # Callers pass lists or a single string; keep the object hashable and frozen.
        for name in ("text_fields", "include", "exclude"):
            value = getattr(self, name)
            object.__setattr__(self, name, (value,) if isinstance(value, str) else tuple(value))
        for name in (
            "max_file_bytes",
            "max_text_chars",
            "max_archive_bytes",
            "max_archive_members",
            "max_run_members",
            "work_per_char",
        ):
            value = getattr(self, name)
            if not isinstance(value, int) or isinstance(value, bool) or value < 1:
                raise ValueError(f"{name} must be a whole number of at least 1, got {value!r}")
        if not self.max_archive_ratio >= 1:
            raise ValueError(f"max_archive_ratio must be at least 1, got {self.max_archive_ratio!r}")
        if not self.text_fields:
            raise ValueError("text_fields needs at least one field name")
