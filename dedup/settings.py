"""One frozen object that holds every knob of an audit, validated once.

The settings are echoed into every output (``audit.json``) so that an audit can be
reproduced exactly. The same parameter name means the same thing everywhere in the
package.

A setting the command line offers carries its `Option` (flag, help, help section, how
the words given become the value) in its field's metadata, so it is declared once:
`dedup.cli` generates the options and the mapping back to `AuditSettings` from
`setting_options`.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

__all__ = [
    "AuditSettings",
    "SettingsError",
    "Option",
    "setting_options",
    "GROUPS",
    "MEASURES",
    "KEEPER_POLICIES",
    "CANDIDATE_METHODS",
    "TFIDF_FEATURES_MAX",
    "AUDIT_TFIDF_FEATURES",
    "INDEX_TFIDF_FEATURES",
]

MEASURES = ("jaccard", "containment", "cosine")
KEEPER_POLICIES = ("longest", "newest", "oldest", "shortest-path", "first-seen")
CANDIDATE_METHODS = ("auto", "lsh", "exhaustive")
HASH_SCHEMES = ("stable64", "binned", "datasketch-sha1")
# Most hashed TF-IDF columns: column numbers are signed 64-bit integers (beyond 2**63 they
# overflow) and the token hashes have 64 bits. Nothing is sized by the feature space (rows are
# sparse; document frequencies are dense only up to `dedup.sketch.tfidf.DENSE_DF_LIMIT` columns),
# so any space up to this bound costs no more memory than the columns the texts use.
TFIDF_FEATURES_MAX = 2**62
# What a ``tfidf_features`` left unset (None) becomes. An audit fits its TF-IDF once, so it
# takes the exact vocabulary (one column per term, scikit-learn's cosine). An index adds
# texts run after run into the columns it recorded, so it keeps the number it records and
# a new one hashes into 2**20 columns, the space every index had before the setting could
# be left unset (an index built then records 2**20 and takes unset settings as they are).
AUDIT_TFIDF_FEATURES = 0
INDEX_TFIDF_FEATURES = 2**20

# Sections of the command-line help, in the order they are shown.
GROUPS = (
    "what counts as a duplicate",
    "candidate search (MinHash LSH)",
    "TF-IDF cosine",
    "what to keep",
    "boilerplate",
    "inputs",
)
DUPLICATE, CANDIDATES, TFIDF, KEEP, BOILERPLATE, INPUTS = GROUPS
# How the words given on the command line become the value of a setting (see `Option.form`).
FORMS = ("value", "many", "switch", "inverse")
_OPTION = "option"  # the metadata key of a field's `Option`


class SettingsError(ValueError):
    """A setting has a value the audit cannot work with; the message says which and why."""


@dataclass(frozen=True)
class Option:
    """How one setting is given on the command line, declared with the setting itself.

    Attributes
    ----------
    flags : tuple of str
        The option strings, e.g. ``("--keeper",)``: at least one long flag, and a short
        one (``"-t"``) only for an option used all the time.
    help : str
        What the option does, without its default (the command line adds that).
    group : str
        The help section (one of `GROUPS`).
    metavar : str or None
        Name of the value in the help; None lets the choices show.
    parse : callable or None
        Turns the words given into the value (``int``, ``float``); None keeps them as text.
    choices : tuple of str or None
        The only values accepted.
    form : {"value", "many", "switch", "inverse"}
        ``value``: one value. ``many``: repeatable, the values collected into a tuple in
        the order given. ``switch``: the flag alone sets True. ``inverse``: the flag alone
        sets False (``--keep-boilerplate`` turns ``boilerplate`` off).
    default_text : str or None
        Words for a default that is not a plain value ("chosen from the threshold");
        without them the help shows the default of a ``value`` option unless it is None.
    """

    flags: tuple[str, ...]
    help: str
    group: str
    metavar: str | None = None
    parse: Callable[[str], Any] | None = None
    choices: tuple[str, ...] | None = None
    form: str = "value"
    default_text: str | None = None

    def __post_init__(self) -> None:
        # Checked when the settings class is defined, so a mistyped declaration fails at import.
        if self.group not in GROUPS:
            raise ValueError(f"option group must be one of {GROUPS}, got {self.group!r}")
        if self.form not in FORMS:
            raise ValueError(f"option form must be one of {FORMS}, got {self.form!r}")
        short = [flag for flag in self.flags if not flag.startswith("--")]
        if not self.flags or len(short) == len(self.flags) or not all(_is_short_flag(f) for f in short):
            raise ValueError(
                f"option flags must start with '--' (or be one letter after '-'), got {self.flags!r}"
            )

    @property
    def long_flag(self) -> str:
        """The first ``--`` flag: the option's name in messages and in a config file."""
        return next(flag for flag in self.flags if flag.startswith("--"))


def _is_short_flag(flag: str) -> bool:
    return len(flag) == 2 and flag[0] == "-" and flag[1].isalpha()


def _setting(default: Any, *flags: str, **option: Any) -> Any:
    """A settings field with ``default`` whose command-line `Option` has ``flags`` and ``option``."""
    return dataclasses.field(default=default, metadata={_OPTION: Option(flags=flags, **option)})


def setting_options() -> tuple[tuple[str, Option], ...]:
    """``(field name, Option)`` of every setting the command line offers, in declaration order."""
    return tuple(
        (f.name, f.metadata[_OPTION]) for f in dataclasses.fields(AuditSettings) if _OPTION in f.metadata
    )


@dataclass(frozen=True)
class AuditSettings:
    """Every setting of an audit, with its default.

    Parameters
    ----------
    threshold : float
        Score on the deciding ``measure`` at or above which a pair counts as a
        near-duplicate (default 0.8).
    measure : {"jaccard", "containment", "cosine"}
        Which exact score decides. ``containment`` uses the larger of the two
        directions, so a short article fully included in a longer one is caught.
    candidate_threshold : float or None
        Jaccard level the LSH bands are tuned for. ``None`` means: ``threshold``
        when the measure is Jaccard, else 0.5 (containment and cosine pairs can have
        a much lower Jaccard than their own score).
    shingle_size : int
        Words per shingle (k of word k-shingles, default 5).
    char_ngrams : int or None
        Use character n-grams of this length instead of word shingles (for text
        written without spaces between words).
    num_perm : int
        MinHash permutations per signature (default 128).
    seed : int
        Seed of the MinHash permutations; signatures made with different seeds
        cannot be compared.
    hash_scheme : {"stable64", "binned", "datasketch-sha1"}
        ``stable64``: our 64-bit hash of the UTF-8 bytes, identical on every
        machine, and ``num_perm`` hash functions per shingle. ``binned`` (the
        default): the same shingle hashes, one hash function whose values fall
        into ``num_perm`` bins, with extra rounds for documents too short to fill
        every bin; the same accuracy, several times faster. ``datasketch-sha1``: a compatibility mode that hashes shingles as
        datasketch does by default (SHA-1, 32 bits, affine permutations), so our
        signatures equal ``datasketch.MinHash(num_perm, seed)``; slower.
    bands, rows : int or None
        LSH banding. ``None`` chooses them from ``candidate_threshold`` by
        minimising the weighted false-positive and false-negative areas.
    false_positive_weight : float
        Weight of the false-positive area when choosing bands (the false-negative
        weight is ``1 - false_positive_weight``). Default 0.05: every candidate is
        verified exactly, so a false positive only costs one comparison while a false
        negative is a duplicate never reported. With 128 permutations this gives about
        95% catch probability at the threshold and 99% at threshold + 0.05.
    bucket_limit : int
        A band bucket with more members than this (shared boilerplate) is recorded
        as a warning and only neighbouring members are paired, instead of all n².
    candidates : {"auto", "lsh", "exhaustive"}
        ``exhaustive`` finds every pair that reaches the threshold, none missed, by the
        measure's exact search (Jaccard: a sparse product; containment: an inverted
        index of shingles with prefix filtering; cosine: an all-pairs search of the
        TF-IDF rows, see `dedup.candidates.exact`). ``lsh``: MinHash LSH, which catches
        pairs by their Jaccard only. ``auto``: exhaustive for containment and cosine at
        any size, and for Jaccard up to ``exhaustive_max_docs`` distinct texts, else LSH.
    exhaustive_max_docs : int
        Size up to which ``auto`` searches Jaccard pairs exactly.
    tfidf_features : int or None
        TF-IDF columns. 0: the exact vocabulary, one column per term, so the cosine is
        exact (scikit-learn's on the same tokens). N > 0: the hashing trick into N
        columns (terms sharing a column raise the cosine; the share is reported in
        ``audit.json``); at most 2**62 (`TFIDF_FEATURES_MAX`). None (the default): the
        engine's choice — an audit takes 0 (`AUDIT_TFIDF_FEATURES`, see
        `audit_tfidf_features`), an index the number it records, or 2**20
        (`INDEX_TFIDF_FEATURES`) when new (`dedup.index.store.index_choices`).
    sublinear_tf : bool
        Use 1 + ln(tf) instead of raw term counts.
    keeper_policy : {"longest", "newest", "oldest", "shortest-path", "first-seen"}
        How the document to keep in each cluster is chosen (``first-seen``: the one read
        first, in the order of ``ledger.csv``; see `dedup.cluster.keeper`).
    prefer : tuple of str
        Ordered path globs that win before the policy applies
        (e.g. ``("current/**", "docs/**")``: a member under ``current/`` is kept
        over one under ``archive/``).
    date_field : str or None
        Metadata field (JSONL/CSV) holding a date for ``newest``/``oldest``;
        without it the file modification time is used.
    retire_coverage : float
        A member is proposed for retirement only when at least this share of its
        shingles is also in the keeper; otherwise it is sent to review, because
        retiring it would lose text the keeper lacks.
    unique_min_words : int
        Fewest words of a run of a member's text that its keeper lacks for the run to
        count as text of its own (default 10: a sentence of its own counts, a reworded phrase
        does not). A member with such
        a run is never proposed for plain retirement: its runs are listed to be merged
        into the keeper first (``merge-worklist.csv``), see `dedup.cluster.loss`.
    base_url : str or None
        Where the documents are published: ``redirects.csv`` and ``keep.csv`` give each
        document's URL as this followed by its path. None: no URLs.
    passage_min_words : int
        Fewest words (in each text) of a shared passage reported in ``passages.csv`` and
        the report (default 15: a few common phrases in a row match in unrelated texts).
    id_field, text_fields : str or None, tuple of str
        Record fields for ``.jsonl`` / ``.csv`` inputs. Several text fields are
        joined with a blank line.
    boilerplate : bool
        Leave lines shared by many documents (navigation, headers, footers, notices)
        out of the shingles; see `dedup.normalize.boilerplate`.
    boilerplate_share, boilerplate_min_texts : float, int
        A line is boilerplate when it appears in at least
        ``max(boilerplate_min_texts, boilerplate_share * n)`` of the n distinct texts.
    boilerplate_max_text_share : float
        A text that would lose more than this share of its characters to boilerplate is
        compared whole: shared lines that make up most of a text are its content.
    ignore_text_file : str or None
        A file whose lines are always treated as boilerplate (known shared text).
    max_file_bytes : int
        Files larger than this are skipped (recorded with the reason).
    max_text_chars : int
        Longer texts are cut to this many characters and marked ``truncated``.
    max_archive_ratio, max_archive_bytes : float, int
        Limits on archive expansion (ratio of unpacked to packed size, and total
        unpacked bytes) against archive bombs.
    html_keep_all : bool
        Keep navigation, headers, footers and asides of HTML pages.
    include, exclude : tuple of str
        Path globs a file must match / must not match to be read.
    include_hidden : bool
        Read hidden files and folders (names starting with a dot) too.
    include_vcs : bool
        Read version-control folders (.git, .hg, .svn, …) too.
    follow_links : bool
        Read files that a link inside the given folders points to outside them; by
        default such a link is recorded as skipped (a link to a folder is never followed).
    max_archive_members, max_run_members : int
        Most members read from one archive, and from all archives of the run together
        (against archives of a million empty members); the rest is recorded as refused.

    Every field but ``false_positive_weight`` holds its command-line `Option` in its
    metadata. When to exit with an error code is a choice of the command line
    (``--fail-on``), not a setting of the audit, so it is not here.
    """

    threshold: float = _setting(
        0.8,
        "-t",
        "--threshold",
        group=DUPLICATE,
        parse=float,
        metavar="THRESHOLD",
        help="score at or above which a pair is a near-duplicate",
    )
    measure: str = _setting(
        "jaccard", "--measure", group=DUPLICATE, choices=MEASURES, help="the exact score that decides"
    )
    candidate_threshold: float | None = _setting(
        None,
        "--candidate-threshold",
        group=CANDIDATES,
        parse=float,
        metavar="J",
        help="Jaccard level the LSH bands are tuned for",
        default_text="the threshold for jaccard, 0.5 otherwise",
    )
    shingle_size: int = _setting(
        5, "--shingle-size", group=DUPLICATE, parse=int, metavar="K", help="words per shingle"
    )
    char_ngrams: int | None = _setting(
        None,
        "--char-ngrams",
        group=DUPLICATE,
        parse=int,
        metavar="N",
        help="use character N-grams instead of word shingles (for text without spaces)",
    )
    num_perm: int = _setting(
        128, "--num-perm", group=CANDIDATES, parse=int, metavar="N", help="MinHash permutations"
    )
    seed: int = _setting(
        1, "--seed", group=CANDIDATES, parse=int, metavar="SEED", help="seed of the MinHash permutations"
    )
    hash_scheme: str = _setting(
        "binned",
        "--hash-scheme",
        group=CANDIDATES,
        choices=HASH_SCHEMES,
        help="MinHash hashing: stable64 (one hash function per permutation), binned "
        "(one hash split into bins, several times faster), datasketch-sha1 (reproduces datasketch's MinHash, slow)",
    )
    bands: int | None = _setting(
        None,
        "--bands",
        group=CANDIDATES,
        parse=int,
        metavar="BANDS",
        help="LSH bands (with --rows)",
        default_text="chosen from the threshold",
    )
    rows: int | None = _setting(
        None, "--rows", group=CANDIDATES, parse=int, metavar="ROWS", help="rows per LSH band (with --bands)"
    )
    false_positive_weight: float = 0.05  # not offered on the command line
    bucket_limit: int = _setting(
        200,
        "--bucket-limit",
        group=CANDIDATES,
        parse=int,
        metavar="N",
        help="band buckets larger than this are reported and only partly compared",
    )
    candidates: str = _setting(
        "auto",
        "--candidates",
        group=CANDIDATES,
        choices=CANDIDATE_METHODS,
        help="how candidate pairs are found: exhaustive finds every pair that reaches the threshold "
        "(exact search for the measure), lsh by MinHash (Jaccard); auto: exhaustive for containment and "
        "cosine, and for jaccard up to --exhaustive-max-docs texts",
    )
    exhaustive_max_docs: int = _setting(
        2000,
        "--exhaustive-max-docs",
        group=CANDIDATES,
        parse=int,
        metavar="N",
        help="largest number of distinct texts for which auto searches jaccard pairs exactly",
    )
    tfidf_features: int | None = _setting(
        None,
        "--tfidf-features",
        group=TFIDF,
        parse=int,
        metavar="N",
        help="TF-IDF columns: 0 = one column per term (exact vocabulary, exact cosine); N > 0 hashes the "
        "terms into N columns, terms sharing a column raise the cosine (the share is reported; at most 2**62)",
        default_text="0 for an audit, 2**20 for a new index",
    )
    sublinear_tf: bool = _setting(
        False, "--sublinear-tf", group=TFIDF, form="switch", help="use 1 + ln(tf) for term frequency"
    )
    keeper_policy: str = _setting(
        "longest",
        "--keeper",
        group=KEEP,
        choices=KEEPER_POLICIES,
        help="how the document to keep is chosen in each cluster",
    )
    prefer: tuple[str, ...] = _setting(
        (),
        "--prefer",
        group=KEEP,
        form="many",
        metavar="GLOB",
        help="path pattern that wins as keeper, in the order given (repeatable), e.g. 'current/**'",
    )
    date_field: str | None = _setting(
        None,
        "--date-field",
        group=KEEP,
        metavar="FIELD",
        help="record field with a date for --keeper newest/oldest (else file modification time)",
    )
    retire_coverage: float = _setting(
        0.8,
        "--retire-coverage",
        group=KEEP,
        parse=float,
        metavar="SHARE",
        help="propose retiring a near-duplicate only if this share of it is in the keeper",
    )
    unique_min_words: int = _setting(
        10,
        "--min-unique-words",
        group=KEEP,
        parse=int,
        metavar="N",
        help="fewest words of a member's text missing from its keeper that must be merged before "
        "retiring it (shorter runs are edits)",
    )
    base_url: str | None = _setting(
        None,
        "--base-url",
        group=KEEP,
        metavar="URL",
        help="URL where the documents are published: redirects.csv and keep.csv give base URL + path",
    )
    passage_min_words: int = _setting(
        15,
        "--min-passage-words",
        group=DUPLICATE,
        parse=int,
        metavar="N",
        help="fewest words of a shared passage reported as evidence (shorter shared runs are left out)",
    )
    id_field: str | None = _setting(
        None,
        "--id-field",
        group=INPUTS,
        metavar="FIELD",
        help="record field holding the document id (.jsonl/.csv)",
        default_text="the line or row number",
    )
    text_fields: tuple[str, ...] = _setting(
        ("text",),
        "--text-field",
        group=INPUTS,
        form="many",
        metavar="FIELD",
        help="record field(s) holding the text (repeatable; joined)",
        default_text="text",
    )
    boilerplate: bool = _setting(
        True,
        "--keep-boilerplate",
        group=BOILERPLATE,
        form="inverse",
        help="do not leave out lines shared by many documents",
    )
    boilerplate_share: float = _setting(
        0.05,
        "--boilerplate-share",
        group=BOILERPLATE,
        parse=float,
        metavar="SHARE",
        help="a line in at least this share of the distinct texts is boilerplate",
    )
    boilerplate_min_texts: int = _setting(
        3,
        "--boilerplate-min-texts",
        group=BOILERPLATE,
        parse=int,
        metavar="N",
        help="... and in at least this many",
    )
    boilerplate_max_text_share: float = _setting(
        0.5,
        "--boilerplate-max-text-share",
        group=BOILERPLATE,
        parse=float,
        metavar="SHARE",
        help="a text that would lose more than this share to boilerplate is compared whole",
    )
    ignore_text_file: str | None = _setting(
        None,
        "--ignore-text",
        group=BOILERPLATE,
        metavar="FILE",
        help="a file of known shared text (one line per notice, footer, …) always left out",
    )
    max_file_bytes: int = _setting(
        50_000_000,
        "--max-file-bytes",
        group=INPUTS,
        parse=int,
        metavar="N",
        help="skip files larger than this",
    )
    max_text_chars: int = _setting(
        10_000_000,
        "--max-text-chars",
        group=INPUTS,
        parse=int,
        metavar="N",
        help="cut longer texts to this many characters (marked truncated)",
    )
    max_archive_ratio: float = _setting(
        200.0,
        "--max-archive-ratio",
        group=INPUTS,
        parse=float,
        metavar="R",
        help="refuse archive members that expand more than R times",
    )
    max_archive_bytes: int = _setting(
        2_000_000_000,
        "--max-archive-bytes",
        group=INPUTS,
        parse=int,
        metavar="N",
        help="stop expanding an archive beyond N bytes in all",
    )
    html_keep_all: bool = _setting(
        False,
        "--html-keep-all",
        group=INPUTS,
        form="switch",
        help="keep navigation, headers, footers and asides of HTML pages",
    )
    include: tuple[str, ...] = _setting(
        (),
        "--include",
        group=INPUTS,
        form="many",
        metavar="GLOB",
        help="read only paths matching this glob (repeatable)",
    )
    exclude: tuple[str, ...] = _setting(
        (),
        "--exclude",
        group=INPUTS,
        form="many",
        metavar="GLOB",
        help="do not read paths matching this glob (repeatable)",
    )
    include_hidden: bool = _setting(
        False, "--include-hidden", group=INPUTS, form="switch", help="also read hidden files and folders"
    )
    include_vcs: bool = _setting(
        False,
        "--include-vcs",
        group=INPUTS,
        form="switch",
        help="also read version-control folders (.git, .hg, .svn, …)",
    )
    follow_links: bool = _setting(
        False,
        "--follow-links",
        group=INPUTS,
        form="switch",
        help="also read files that links in the given folders point to outside them",
    )
    max_archive_members: int = _setting(
        100_000,
        "--max-archive-members",
        group=INPUTS,
        parse=int,
        metavar="N",
        help="read at most N members of one archive (the rest is recorded as refused)",
    )
    max_run_members: int = _setting(
        1_000_000,
        "--max-run-members",
        group=INPUTS,
        parse=int,
        metavar="N",
        help="read at most N archive members in all, all archives together",
    )

    def __post_init__(self) -> None:
        # Lists given by callers become tuples so the object stays hashable and frozen.
        for name in ("prefer", "text_fields", "include", "exclude"):
            value = getattr(self, name)
            if isinstance(value, str):
                value = (value,)
            object.__setattr__(self, name, tuple(value))

    # -- derived values -------------------------------------------------------------
    @property
    def effective_candidate_threshold(self) -> float:
        """Jaccard level the LSH bands are tuned for (see ``candidate_threshold``)."""
        if self.candidate_threshold is not None:
            return self.candidate_threshold
        return self.threshold if self.measure == "jaccard" else 0.5

    @property
    def audit_tfidf_features(self) -> int:
        """TF-IDF columns of an audit: ``tfidf_features``, or `AUDIT_TFIDF_FEATURES` (0, the
        exact vocabulary) when it is left unset."""
        return AUDIT_TFIDF_FEATURES if self.tfidf_features is None else self.tfidf_features

    @property
    def feature_name(self) -> str:
        """Plain description of the features, e.g. ``word 5-shingles``."""
        if self.char_ngrams:
            return f"character {self.char_ngrams}-grams"
        return f"word {self.shingle_size}-shingles"

    def replace(self, **changes: Any) -> AuditSettings:
        """A copy with some settings changed."""
        return dataclasses.replace(self, **changes)

    def to_dict(self) -> dict[str, Any]:
        """All settings as plain JSON-ready values, in declaration order, as an audit runs
        them: an unset ``tfidf_features`` is written as the number the audit uses
        (`audit_tfidf_features`), so ``audit.json`` says which columns its cosines had."""
        out: dict[str, Any] = {}
        for f in dataclasses.fields(self):
            value = getattr(self, f.name)
            out[f.name] = list(value) if isinstance(value, tuple) else value
        out["tfidf_features"] = self.audit_tfidf_features
        return out

    def validate(self) -> AuditSettings:
        """Check every setting once, before any work; raise `SettingsError` if one is off."""

        def fail(message: str) -> None:
            raise SettingsError(message)

        def unit(name: str, value: float | None, *, allow_zero: bool = False) -> None:
            if value is None:
                return
            if not isinstance(value, (int, float)) or math.isnan(value):
                fail(f"{name} must be a number between 0 and 1, got {value!r}")
            low_ok = value >= 0 if allow_zero else value > 0
            if not (low_ok and value <= 1):
                fail(f"{name} must be {'at least 0' if allow_zero else 'above 0'} and at most 1, got {value}")

        unit("threshold", self.threshold)
        unit("candidate_threshold", self.candidate_threshold)
        unit("retire_coverage", self.retire_coverage, allow_zero=True)
        unit("false_positive_weight", self.false_positive_weight, allow_zero=True)
        unit("boilerplate_share", self.boilerplate_share)
        unit("boilerplate_max_text_share", self.boilerplate_max_text_share)
        if not isinstance(self.boilerplate_min_texts, int) or self.boilerplate_min_texts < 2:
            fail(
                f"boilerplate_min_texts must be a whole number of at least 2, got {self.boilerplate_min_texts!r}"
            )
        if self.measure not in MEASURES:
            fail(f"measure must be one of {', '.join(MEASURES)}, got {self.measure!r}")
        if self.keeper_policy not in KEEPER_POLICIES:
            fail(f"keeper_policy must be one of {', '.join(KEEPER_POLICIES)}, got {self.keeper_policy!r}")
        if self.candidates not in CANDIDATE_METHODS:
            fail(f"candidates must be one of {', '.join(CANDIDATE_METHODS)}, got {self.candidates!r}")
        if self.hash_scheme not in HASH_SCHEMES:
            fail(f"hash_scheme must be one of {', '.join(HASH_SCHEMES)}, got {self.hash_scheme!r}")
        positive = {
            "shingle_size": self.shingle_size,
            "passage_min_words": self.passage_min_words,
            "unique_min_words": self.unique_min_words,
            "num_perm": self.num_perm,
            "bucket_limit": self.bucket_limit,
            "max_file_bytes": self.max_file_bytes,
            "max_text_chars": self.max_text_chars,
            "max_archive_bytes": self.max_archive_bytes,
            "max_archive_members": self.max_archive_members,
            "max_run_members": self.max_run_members,
        }
        for name, value in positive.items():
            if not isinstance(value, int) or isinstance(value, bool) or value < 1:
                fail(f"{name} must be a whole number of at least 1, got {value!r}")
        self._validate_tfidf_features()
        if not isinstance(self.max_archive_ratio, (int, float)) or not self.max_archive_ratio >= 1:
            fail(f"max_archive_ratio must be a number of at least 1, got {self.max_archive_ratio!r}")
        if self.bucket_limit < 2:
            fail(f"bucket_limit must be at least 2, got {self.bucket_limit}")
        if self.char_ngrams is not None and (not isinstance(self.char_ngrams, int) or self.char_ngrams < 1):
            fail(f"char_ngrams must be a whole number of at least 1, got {self.char_ngrams!r}")
        if not isinstance(self.seed, int) or not 0 <= self.seed < 2**63:
            fail(f"seed must be a whole number from 0 to 2**63-1, got {self.seed!r}")
        if (self.bands is None) != (self.rows is None):
            fail("bands and rows go together: give both, or neither to choose them from the threshold")
        if self.bands is not None:
            if self.bands < 1 or self.rows < 1:
                fail(f"bands and rows must be at least 1, got bands={self.bands} rows={self.rows}")
            if self.bands * self.rows > self.num_perm:
                fail(
                    f"bands x rows = {self.bands * self.rows} exceeds num_perm = {self.num_perm}: "
                    "each band needs its own rows of the signature"
                )
        if self.hash_scheme == "datasketch-sha1" and self.seed >= 2**32:
            fail("the datasketch-sha1 scheme takes a seed below 2**32 (numpy RandomState's range)")
        if not self.text_fields:
            fail("text_fields needs at least one field name")
        if self.base_url is not None and (not isinstance(self.base_url, str) or not self.base_url.strip()):
            fail(
                f"base_url must be a non-empty URL such as 'https://wiki.example.org/', got {self.base_url!r}"
            )
        return self

    def _validate_tfidf_features(self) -> None:
        """Refuse a feature space that is no whole number of columns, or whose column numbers
        would overflow (see `TFIDF_FEATURES_MAX`); None (the engine's choice) is fine."""
        n = self.tfidf_features
        if n is None:
            return
        if not isinstance(n, int) or isinstance(n, bool) or n < 0:
            raise SettingsError(
                f"tfidf_features must be 0 (one column per term) or a number of columns, got {n!r}"
            )
        if n > TFIDF_FEATURES_MAX:
            raise SettingsError(
                f"tfidf_features must be at most 2**62 = {TFIDF_FEATURES_MAX} (column numbers are 64-bit "
                f"integers; more columns than that only stay empty), got {n}"
            )
