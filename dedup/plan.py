"""The audit's plan: which stage runs on what, for any engine.

An audit is a fixed sequence of steps over plain arrays and tables. Each step is one of

- **map**: a pure function applied to one batch (of documents, texts or pairs) at a
  time, independent of every other batch;
- **reduce**: corpus-wide counters merged from the batches' parts (each has ``merge``);
- **shuffle**: data regrouped by a key (LSH band keys) so that pairs can be formed;
- **driver**: a step over the whole (small) result, on one machine.

::

    step            kind     stage function(s)
    normalize       map      normalize.batch.prepare_documents
    exact           driver   normalize.exact_groups (by content hash)
    templates       reduce   normalize.boilerplate.BoilerplateCounter (.add, .merge, .find)
    sketch          map      sketch_batch: features → MinHash → band keys, term counts
    frequencies     reduce   sketch.tfidf.DocumentFrequency (.add, .merge)
    candidates      shuffle  candidates.lsh_candidate_pairs, or candidates.exact_candidate_pairs
    verify          map      verify.may_reach, verify.score_pairs (over pairs)
    cluster         driver   cluster.build_clusters (components, keepers, actions as data)
    align           map      align.align_pairs over confirmed pairs and member-keeper pairs
    records         driver   engines.driver.assemble (pairs, actions, passages, summary, warnings)

`Plan` fixes the values every engine must agree on (bands and rows, the candidate
method once the corpus size is known), so the local engine (`dedup.engines.local`) and
any other engine give the same answers from the same settings.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from typing import NamedTuple

import numpy as np

from .candidates import band_keys, choose_bands
from .features.hashing import sort_unique_segments
from .features.shingles import features_with
from .settings import AuditSettings
from .sketch import signatures_with
from .sketch.tfidf import DocumentFrequency

__all__ = ["Plan", "SketchedBatch", "sketch_batch", "reading_keywords", "STEPS"]

STEPS = (
    ("normalize", "map"),
    ("exact", "driver"),
    ("templates", "reduce"),
    ("sketch", "map"),
    ("frequencies", "reduce"),
    ("candidates", "shuffle"),
    ("verify", "map"),
    ("cluster", "driver"),
    ("align", "map"),
    ("records", "driver"),
)


@dataclass(frozen=True)
class Plan:
    """The settings of one audit and the values derived from them once.

    Attributes
    ----------
    settings : AuditSettings
        Validated.
    bands, rows : int
        LSH banding: as set, else chosen for the candidate threshold (`choose_bands`).
    """

    settings: AuditSettings
    bands: int
    rows: int

    @classmethod
    def of(cls, settings: AuditSettings) -> Plan:
        """The plan of validated ``settings``."""
        if settings.bands is not None:
            return cls(settings, settings.bands, settings.rows)
        bands, rows = choose_bands(
            settings.effective_candidate_threshold, settings.num_perm, settings.false_positive_weight
        )
        return cls(settings, bands, rows)

    @property
    def lsh(self) -> tuple[int, int]:
        return self.bands, self.rows

    def candidate_method(self, distinct_texts: int) -> str:
        """``lsh`` or ``exhaustive`` (the measure's exact search, `dedup.candidates.exact`).

        ``auto`` searches containment and cosine exactly at any size — LSH catches pairs
        by Jaccard, which does not bound them — and Jaccard exactly up to
        ``exhaustive_max_docs`` distinct texts, by LSH beyond.
        """
        method = self.settings.candidates
        if method == "auto":
            if self.settings.measure != "jaccard":
                return "exhaustive"
            return "exhaustive" if distinct_texts <= self.settings.exhaustive_max_docs else "lsh"
        return method

    def may_need_lsh(self) -> bool:
        """Whether signatures may be needed before the corpus size is known."""
        s = self.settings
        return s.candidates == "lsh" or (s.candidates == "auto" and s.measure == "jaccard")


def reading_keywords(settings: AuditSettings) -> dict:
    """The settings that say which documents are read and how, as keywords of
    `dedup.ingest.iter_documents`: found by name, so a reading option declared on the
    settings and taken by the reader reaches every engine without a change here."""
    import inspect

    from .ingest import iter_documents

    taken = set(inspect.signature(iter_documents).parameters) - {
        "roots",
        "ledger",
        "stdin",
        "workers",
        "prepare",
    }
    return {f.name: getattr(settings, f.name) for f in dataclasses.fields(settings) if f.name in taken}


class SketchedBatch(NamedTuple):
    """What `sketch_batch` makes of a batch of texts."""

    text_bytes: int
    features: object  # FeatureSet: token hashes, shingles
    counts: object  # term counts (scipy.sparse CSR) when sets are kept, else None
    values: np.ndarray | None  # MinHash signatures
    keys: np.ndarray | None  # band keys
    shingles: np.ndarray | None  # sorted unique shingles when sets are kept
    shingle_offsets: np.ndarray | None


def sketch_batch(
    settings: AuditSettings,
    buf: np.ndarray,
    offsets: np.ndarray,
    *,
    lsh: tuple[int, int] | None,
    frequencies: DocumentFrequency,
    keep_sets: bool,
    release=None,
) -> SketchedBatch:
    """The sketch step (map) over texts ``buf[offsets[k]:offsets[k + 1]]``: features, then
    with ``lsh=(bands, rows)`` MinHash signatures and band keys, with ``keep_sets`` each
    text's term counts and sorted unique shingles. Pure: ``frequencies`` only supplies
    the hashed feature space (nothing is counted here). ``release`` is called once the
    bytes have been read (a mapped view's pages can go).

    Cost: O(bytes + shingles × log) for the batch; the signatures O(shingles) with the
    binned scheme.
    """
    features = features_with(settings, buf, offsets, distinct=False)
    if release is not None:
        release()
    counts = frequencies.counts(features.token_hashes, features.token_offsets) if keep_sets else None
    values = keys = None
    if lsh:
        values = signatures_with(settings, features).values
        keys = band_keys(values, lsh[0], lsh[1])
    shingles = shingle_offsets = None
    if keep_sets:
        # The shingles are sorted in place: MinHash has had them.
        shingles, shingle_offsets = sort_unique_segments(features.shingles, features.shingle_offsets)
    return SketchedBatch(
        int(offsets[-1] - offsets[0]), features, counts, values, keys, shingles, shingle_offsets
    )
