"""Boilerplate: lines shared by many documents (navigation, headers, footers, notices).

A line that appears in at least ``max(min_texts, share * n)`` of the n distinct texts is
boilerplate, and so is every line of a user's ``--ignore-text`` file. Boilerplate lines are
left out of the text that is shingled (the exact-duplicate pass still sees the whole
text), so two articles that share only a footer do not look alike, and two copies that
differ only in their footer look identical. Counting is over distinct texts, so exact
copies of one article never make its lines boilerplate. Boilerplate surrounds a text; it
is not the text: when the shared lines would take away more than ``max_text_share`` of a
text's characters (a family of generated pages, or many near-copies of one article), the
text is shingled whole, so near-copies are still compared on all they share.

`BoilerplateCounter` and `Boilerplate` do the same over packed texts (canonical lines
joined by ``\n``) by line hash in compiled code, so an audit can count a corpus of any
size as it streams by and strip the found lines chunk by chunk. `find_boilerplate` and
`without_boilerplate` are the same rules over Python strings (and the reference the
tests hold the compiled path to).

Cost O(lines): a dictionary for strings, a sort of line hashes for packed texts.
"""

from __future__ import annotations

import math
import unicodedata
from collections import Counter
from collections.abc import Iterable
from dataclasses import dataclass, field

import numpy as np

from ..features.hashing import sort_unique_segments
from .lines import join_kept_lines, line_characters, line_hashes, line_spans

__all__ = [
    "read_ignore_text",
    "canonical_lines",
    "find_boilerplate",
    "without_boilerplate",
    "BoilerplateCounter",
    "Boilerplate",
]


def canonical_lines(text: str) -> list[str]:
    """The non-empty lines of a text, each normalized like the whole text.

    Joined by single spaces they give the canonical text of the whole:

    >>> from dedup.normalize import canonical_text
    >>> " ".join(canonical_lines("A  b\\n\\n C\\n")) == canonical_text("A  b\\n\\n C\\n")
    True
    """
    # Normalize the whole text once, then split: NFKC and case folding never join or create lines.
    folded = unicodedata.normalize("NFKC", text).casefold()
    return [line for line in (" ".join(raw.split()) for raw in folded.splitlines()) if line]


def find_boilerplate(
    line_lists: Iterable[list[str]], *, share: float, min_texts: int, known: Iterable[str] = ()
) -> tuple[dict[str, int], int]:
    """Boilerplate lines with the number of distinct texts each appears in, and the limit used.

    >>> lines = [["notice", "a"], ["notice", "b"], ["notice", "c"], ["d"]]
    >>> find_boilerplate(lines, share=0.5, min_texts=2)
    ({'notice': 3}, 2)
    """
    frequency: Counter[str] = Counter()
    n = 0
    for lines in line_lists:
        n += 1
        frequency.update(set(lines))
    limit = max(min_texts, math.ceil(share * n))
    found = {line: count for line, count in frequency.items() if count >= limit}
    for line in known:
        found.setdefault(line, frequency.get(line, 0))
    return found, limit


def without_boilerplate(
    lines: list[str], boilerplate: dict[str, int] | set[str], max_text_share: float = 0.5
) -> tuple[str, bool]:
    """The text to shingle and whether boilerplate was left out of it.

    >>> without_boilerplate(["a long body line here", "notice"], {"notice"})
    ('a long body line here', True)
    >>> without_boilerplate(["short", "a long shared notice"], {"a long shared notice"})
    ('short a long shared notice', False)
    """
    kept = [line for line in lines if line not in boilerplate]
    if len(kept) == len(lines):
        return " ".join(lines), False
    removed = sum(len(line) for line in lines) - sum(len(line) for line in kept)
    if not kept or removed > max_text_share * sum(len(line) for line in lines):
        return " ".join(lines), False
    return " ".join(kept), True


class BoilerplateCounter:
    """Counts, over distinct texts, how many texts each line appears in (by line hash).

    Feed it packed texts (canonical lines joined by ``\n``), chunk after chunk, then
    call `find`.
    """

    def __init__(self) -> None:
        self._sets: list[np.ndarray] = []
        self.texts = 0

    def add(self, buf: np.ndarray, offsets: np.ndarray) -> None:
        starts, stops, per_text = line_spans(buf, offsets)
        hashes = line_hashes(buf, starts, stops)
        distinct, _ = sort_unique_segments(hashes, per_text)
        self._sets.append(distinct)
        self.texts += int(offsets.shape[0] - 1)

    def merge(self, other: BoilerplateCounter) -> BoilerplateCounter:
        """Add the counts of ``other`` (texts counted elsewhere, e.g. another partition);
        returns self. The texts of the two must be distinct from each other. O(1): the
        parts are joined only by `find`."""
        self._sets.extend(other._sets)
        self.texts += other.texts
        return self

    def find(self, *, share: float, min_texts: int, known: Iterable[str] = ()) -> Boilerplate:
        """The boilerplate: lines in at least ``max(min_texts, ceil(share * n))`` texts, and
        every known line (as `find_boilerplate` does for strings)."""
        everything = np.concatenate(self._sets) if self._sets else np.zeros(0, np.uint64)
        self._sets = []
        values, counts = np.unique(everything, return_counts=True)
        del everything
        limit = max(min_texts, math.ceil(share * self.texts))
        chosen = counts >= limit
        found = dict(zip(values[chosen].tolist(), counts[chosen].tolist()))
        texts: dict[int, str] = {}
        known = [line for line in known if line]
        if known:
            buf = np.frombuffer("\n".join(known).encode("utf-8"), dtype=np.uint8)
            starts, stops, _ = line_spans(buf, np.array([0, buf.shape[0]], dtype=np.int64))
            for line, h in zip(known, line_hashes(buf, starts, stops).tolist()):
                where = int(np.searchsorted(values, np.uint64(h)))
                seen = where < values.shape[0] and int(values[where]) == h
                found.setdefault(h, int(counts[where]) if seen else 0)
                texts.setdefault(h, line)
        return Boilerplate(found, limit, texts)


@dataclass
class Boilerplate:
    """Boilerplate lines found by a `BoilerplateCounter`: line hash → number of texts.

    ``texts`` maps line hashes to their text as lines are met while stripping (the
    report shows the most common ones).
    """

    counts: dict[int, int]
    limit: int
    texts: dict[int, str] = field(default_factory=dict)

    def __len__(self) -> int:
        return len(self.counts)

    def left_out(
        self, buf: np.ndarray, offsets: np.ndarray, max_text_share: float = 0.5
    ) -> tuple[np.ndarray, np.ndarray]:
        """Per text, whether its template lines are left out of what is shingled
        (``discounted``), or it has some but is kept whole because they would take more
        than ``max_text_share`` of its characters (``protected``) — the rule of
        `without_boilerplate`. Pure: no line text is recorded."""
        return self._decide(buf, offsets, max_text_share)[:2]

    def _decide(self, buf, offsets, max_text_share):
        starts, stops, per_text = line_spans(buf, offsets)
        n = per_text.shape[0] - 1
        if not self.counts:
            nothing = np.zeros(n, bool)
            return nothing, nothing, (starts, stops, per_text, None, None)
        hashes = line_hashes(buf, starts, stops)
        known = np.fromiter(self.counts, dtype=np.uint64, count=len(self.counts))
        known.sort()
        where = np.minimum(np.searchsorted(known, hashes), known.shape[0] - 1)
        shared = known[where] == hashes
        chars = line_characters(buf, starts, stops)

        def per(values: np.ndarray) -> np.ndarray:
            total = np.concatenate(([0], np.cumsum(values)))
            return total[per_text[1:]] - total[per_text[:-1]]

        lines, shared_lines = np.diff(per_text), per(shared.astype(np.int64))
        total_chars, removed_chars = per(chars), per(np.where(shared, chars, 0))
        has = shared_lines > 0
        discounted = has & (shared_lines < lines) & (removed_chars <= max_text_share * total_chars)
        return discounted, has & ~discounted, (starts, stops, per_text, hashes, shared)

    def strip(
        self, buf: np.ndarray, offsets: np.ndarray, max_text_share: float = 0.5
    ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """The texts to shingle (lines joined by spaces, boilerplate left out where the
        rule of `without_boilerplate` allows), and per text whether boilerplate was left
        out (``discounted``) or the text kept whole despite having some (``protected``).
        """
        discounted, protected, (starts, stops, per_text, hashes, shared) = self._decide(
            buf, offsets, max_text_share
        )
        if hashes is None:
            out = buf.copy()
            out[out == 0x0A] = 0x20
            return out, np.asarray(offsets, dtype=np.int64), discounted, protected
        text_of_line = np.repeat(np.arange(discounted.shape[0]), np.diff(per_text))
        keep = ~(shared & discounted[text_of_line])
        # The text of each boilerplate line, from its first occurrence met.
        met, first = np.unique(hashes[shared], return_index=True)
        where_shared = np.flatnonzero(shared)
        for h, k in zip(met.tolist(), where_shared[first].tolist()):
            if h not in self.texts:
                self.texts[h] = buf[starts[k] : stops[k]].tobytes().decode("utf-8", "surrogatepass")
        out, out_offsets = join_kept_lines(buf, starts, stops, per_text, keep)
        return out, out_offsets, discounted, protected

    def top(self, n: int = 100) -> list[dict]:
        """The ``n`` most common lines with the number of texts each is in."""
        rows = [(count, self.texts.get(h, "")) for h, count in self.counts.items()]
        rows.sort(key=lambda r: (-r[0], r[1]))
        return [{"text": text[:300], "texts": count} for count, text in rows[:n]]


def read_ignore_text(path: str | None) -> tuple[str, ...]:
    from ..ingest import InputError, decode_text  # the reader's decoding; imported late (ingest is large)

    """The canonical lines of a file of known shared text (as `dedup.audit` reads it).

    Raises
    ------
    dedup.InputError
        The file cannot be read or decoded.
    """
    if not path:
        return ()
    try:
        with open(path, "rb") as handle:
            data = handle.read()
    except OSError as err:
        raise InputError(f"cannot read the ignore-text file {path}: {err.strerror}") from None
    text, _, problem = decode_text(data)
    if text is None:
        raise InputError(f"cannot read the ignore-text file {path}: {problem}")
    return tuple(canonical_lines(text))
