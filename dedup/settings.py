"""One frozen object that holds every knob of an audit, validated once.

The settings are echoed into every output (``audit.json``) so that an audit can be
reproduced exactly. The same parameter name means the same thing everywhere in the
package.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass, field
from typing import Any

__all__ = ["AuditSettings", "SettingsError", "MEASURES", "KEEPER_POLICIES", "CANDIDATE_METHODS"]

MEASURES = ("jaccard", "containment", "cosine")
KEEPER_POLICIES = ("longest", "newest", "oldest", "shortest-path")
CANDIDATE_METHODS = ("auto", "lsh", "exhaustive")
HASH_SCHEMES = ("stable64", "binned", "datasketch-sha1")


class SettingsError(ValueError):
    """A setting has a value the audit cannot work with; the message says which and why."""


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
        ``exhaustive`` compares every pair exactly (sparse matrix product);
        ``auto`` does so up to ``exhaustive_max_docs`` documents, else uses LSH.
    exhaustive_max_docs : int
        Size up to which ``auto`` compares all pairs exactly.
    tfidf_features : int
        Size of the hashed TF-IDF feature space (default 2**20).
    sublinear_tf : bool
        Use 1 + ln(tf) instead of raw term counts.
    keeper_policy : {"longest", "newest", "oldest", "shortest-path"}
        How the document to keep in each cluster is chosen.
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
    fail_on : {"none", "any", "new", "grown"}
        ``any``: the CLI exits with code 1 when any cluster is found; ``new`` / ``grown``
        (with an index): when a cluster is new, or new or grown, since the last audit.
    """

    threshold: float = 0.8
    measure: str = "jaccard"
    candidate_threshold: float | None = None
    shingle_size: int = 5
    char_ngrams: int | None = None
    num_perm: int = 128
    seed: int = 1
    hash_scheme: str = "binned"
    bands: int | None = None
    rows: int | None = None
    false_positive_weight: float = 0.05
    bucket_limit: int = 200
    candidates: str = "auto"
    exhaustive_max_docs: int = 2000
    tfidf_features: int = 2**20
    sublinear_tf: bool = False
    keeper_policy: str = "longest"
    prefer: tuple[str, ...] = field(default_factory=tuple)
    date_field: str | None = None
    retire_coverage: float = 0.8
    id_field: str | None = None
    text_fields: tuple[str, ...] = ("text",)
    boilerplate: bool = True
    boilerplate_share: float = 0.05
    boilerplate_min_texts: int = 3
    boilerplate_max_text_share: float = 0.5
    ignore_text_file: str | None = None
    max_file_bytes: int = 50_000_000
    max_text_chars: int = 10_000_000
    max_archive_ratio: float = 200.0
    max_archive_bytes: int = 2_000_000_000
    html_keep_all: bool = False
    include: tuple[str, ...] = field(default_factory=tuple)
    exclude: tuple[str, ...] = field(default_factory=tuple)
    include_hidden: bool = False
    include_vcs: bool = False
    fail_on: str = "none"

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
    def feature_name(self) -> str:
        """Plain description of the features, e.g. ``word 5-shingles``."""
        if self.char_ngrams:
            return f"character {self.char_ngrams}-grams"
        return f"word {self.shingle_size}-shingles"

    def replace(self, **changes: Any) -> AuditSettings:
        """A copy with some settings changed."""
        return dataclasses.replace(self, **changes)

    def to_dict(self) -> dict[str, Any]:
        """All settings as plain JSON-ready values, in declaration order."""
        out: dict[str, Any] = {}
        for f in dataclasses.fields(self):
            value = getattr(self, f.name)
            out[f.name] = list(value) if isinstance(value, tuple) else value
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
        if self.fail_on not in ("none", "any", "new", "grown"):
            fail(f"fail_on must be one of none, any, new, grown, got {self.fail_on!r}")
        positive = {
            "shingle_size": self.shingle_size,
            "num_perm": self.num_perm,
            "bucket_limit": self.bucket_limit,
            "tfidf_features": self.tfidf_features,
            "max_file_bytes": self.max_file_bytes,
            "max_text_chars": self.max_text_chars,
            "max_archive_bytes": self.max_archive_bytes,
        }
        for name, value in positive.items():
            if not isinstance(value, int) or isinstance(value, bool) or value < 1:
                fail(f"{name} must be a whole number of at least 1, got {value!r}")
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
        return self
