"""Template lines over the indexed corpus: found with the audit's rule, counted incrementally.

An audit leaves out of the text it shingles the lines shared by many of its distinct texts
(`dedup.normalize.boilerplate`: navigation, headers, footers, notices). The index does
the same over the distinct texts of its present documents, with the same counter and the
same rule (``boilerplate_share``, ``boilerplate_min_texts``, the lines of
``ignore_text_file``; ``boilerplate`` off finds none):

* each stored text keeps its set of distinct line hashes (``text_lines``): its part of
  a `BoilerplateCounter`. A run counts only the texts it adds, and merges that part with
  the stored parts (`BoilerplateCounter.merge`) before `BoilerplateCounter.find`
  decides over the whole indexed corpus;
* when texts come or go (or the rule changes), lines may become template lines or stop
  being ones. Every stored text holding such a line (`changed_lines`: the symmetric
  difference of the old and new template lines; every template line, old or new, when
  ``boilerplate_max_text_share`` changed) is stripped again from its stored canonical
  form, and the texts whose stripped form differs from what was sketched are sketched
  again in the same run, under a new text id (`dedup.index.texts.renumber`).

So the stored sketches always equal those a fresh build of the present corpus makes.

Cost per run that adds or removes texts: reading every stored line set (8 bytes per
distinct line of each text) and one sort of them, as an audit's count; decompressing and
stripping the texts that hold a changed line; sketching the few whose stripped form
changed. Nothing when no text came or went and the rule is unchanged.
"""

from __future__ import annotations

import hashlib
import json
from dataclasses import dataclass

import numpy as np

from ..features.hashing import sort_unique_segments
from ..normalize.boilerplate import Boilerplate, BoilerplateCounter, read_ignore_text
from ..normalize.lines import line_hashes, line_spans
from .blobs import pack_array, pack_uints, unpack_array, unpack_uints

__all__ = [
    "TemplateRule",
    "LineCounter",
    "CorpusLines",
    "StoredTemplates",
    "line_sets",
    "read_ignore_text",
    "load_templates",
    "store_templates",
    "changed_lines",
]


@dataclass(frozen=True)
class TemplateRule:
    """What decides the template lines, and how much of a text they may take away."""

    enabled: bool
    share: float
    min_texts: int
    max_text_share: float
    known: tuple[str, ...]

    @classmethod
    def of(cls, settings) -> TemplateRule:
        """The rule of validated settings; reads ``ignore_text_file`` (an `InputError` when
        it cannot be read), so a bad file fails before anything is written."""
        known = read_ignore_text(settings.ignore_text_file) if settings.boilerplate else ()
        return cls(
            bool(settings.boilerplate),
            float(settings.boilerplate_share),
            int(settings.boilerplate_min_texts),
            float(settings.boilerplate_max_text_share),
            known,
        )

    def key(self) -> str:
        """The rule as stored: equal keys find equal template lines in equal corpora."""
        known = hashlib.blake2b("\n".join(self.known).encode("utf-8"), digest_size=16).hexdigest()
        values = {"enabled": self.enabled, "share": self.share, "min_texts": self.min_texts}
        return json.dumps({**values, "max_text_share": self.max_text_share, "known": known}, sort_keys=True)

    def find(self, counter: BoilerplateCounter) -> Boilerplate:
        """The template lines of the counted texts (none when templates are off)."""
        if not self.enabled:
            return Boilerplate({}, 0)
        return counter.find(share=self.share, min_texts=self.min_texts, known=self.known)


def line_sets(buf: np.ndarray, offsets: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Each text's sorted distinct line hashes, ``(values, offsets)``, for texts packed as
    canonical lines joined by LF: what `BoilerplateCounter.add` counts of them. O(bytes)."""
    starts, stops, per_text = line_spans(buf, offsets)
    return sort_unique_segments(line_hashes(buf, starts, stops), per_text)


class LineCounter(BoilerplateCounter):
    """A `BoilerplateCounter` that also takes line sets already made (stored, or made
    once for storing), so no text is read twice to be counted."""

    def add_sets(self, values: np.ndarray, texts: int) -> None:
        """Count ``texts`` texts whose distinct line hashes are ``values``, laid end to end."""
        self._sets.append(values)
        self.texts += int(texts)


@dataclass
class CorpusLines:
    """The line sets of the stored texts: ``values[offsets[k]:offsets[k + 1]]`` are those of
    text ``text_ids[k]``."""

    text_ids: np.ndarray
    values: np.ndarray
    offsets: np.ndarray

    @classmethod
    def load(cls, connection, below: int) -> CorpusLines:
        """The line sets of the texts with ids below ``below``. O(stored lines)."""
        rows = connection.execute(
            "SELECT text_id, lines FROM text_lines WHERE text_id < ? ORDER BY text_id", (int(below),)
        ).fetchall()
        ids = np.fromiter((r[0] for r in rows), dtype=np.int64, count=len(rows))
        sizes = np.fromiter((len(r[1]) // 8 for r in rows), dtype=np.int64, count=len(rows))
        offsets = np.zeros(len(rows) + 1, dtype=np.int64)
        np.cumsum(sizes, out=offsets[1:])
        values = unpack_array(b"".join(r[1] for r in rows), "<u8", int(offsets[-1]))
        return cls(ids, values, offsets)

    def counter(self) -> LineCounter:
        """A counter of these texts (sharing the values, not copying them)."""
        counter = LineCounter()
        counter.add_sets(self.values, self.text_ids.shape[0])
        return counter

    def touching(self, lines: np.ndarray) -> np.ndarray:
        """Ids of the texts holding any of ``lines`` (sorted uint64). O(stored lines)."""
        if not lines.size or not self.values.size:
            return np.zeros(0, np.int64)
        where = np.minimum(np.searchsorted(lines, self.values), lines.shape[0] - 1)
        hit = lines[where] == self.values
        text_of = np.repeat(np.arange(self.text_ids.shape[0]), np.diff(self.offsets))
        return self.text_ids[np.unique(text_of[hit])]


@dataclass(frozen=True)
class StoredTemplates:
    """The template lines the stored sketches left out, and the rule that chose them."""

    rule: str
    max_text_share: float
    texts: int
    threshold: int
    line_hashes: np.ndarray  # sorted uint64
    counts: np.ndarray

    def boilerplate(self) -> Boilerplate:
        """The lines as a `Boilerplate`, to strip a text as the stored ones were."""
        return Boilerplate(dict(zip(self.line_hashes.tolist(), self.counts.tolist())), self.threshold)


def load_templates(connection) -> StoredTemplates | None:
    """The stored template lines, or None before the first run."""
    row = connection.execute(
        "SELECT rule, max_text_share, texts, threshold, line_hashes, counts FROM templates WHERE id = 1"
    ).fetchone()
    if row is None:
        return None
    rule, share, texts, threshold, hashes, counts = row
    lines = unpack_array(hashes, "<u8")
    return StoredTemplates(rule, float(share), int(texts), int(threshold), lines, unpack_uints(counts))


def _sorted_lines(boilerplate: Boilerplate) -> tuple[np.ndarray, np.ndarray]:
    hashes = np.fromiter(boilerplate.counts, dtype=np.uint64, count=len(boilerplate.counts))
    counts = np.fromiter(boilerplate.counts.values(), dtype=np.int64, count=len(boilerplate.counts))
    order = np.argsort(hashes)
    return hashes[order], counts[order]


def store_templates(connection, rule: TemplateRule, boilerplate: Boilerplate, texts: int) -> None:
    """Record the template lines of this run (inside its write transaction)."""
    hashes, counts = _sorted_lines(boilerplate)
    connection.execute(
        "INSERT OR REPLACE INTO templates (id, rule, max_text_share, texts, threshold, line_hashes, counts) "
        "VALUES (1, ?, ?, ?, ?, ?, ?)",
        (
            rule.key(),
            rule.max_text_share,
            int(texts),
            int(boilerplate.limit),
            pack_array(hashes, "<u8"),
            pack_uints(counts),
        ),
    )


def changed_lines(before: StoredTemplates | None, now: Boilerplate, rule: TemplateRule) -> np.ndarray:
    """The lines (sorted hashes) whose texts may be stripped otherwise than when sketched:
    those that became or stopped being template lines, or every template line, old and new,
    when the share a text may lose changed."""
    lines, _ = _sorted_lines(now)
    if before is None:
        return lines
    if before.max_text_share != rule.max_text_share:
        return np.union1d(before.line_hashes, lines)
    return np.setxor1d(before.line_hashes, lines)
