"""No silent loss: the text a member holds that its keeper lacks, and the action that follows.

A near-duplicate proposed for retirement must not take text with it that its keeper does
not hold. Shingle containment (``retire_coverage``) cannot tell: a member 91% contained
in its keeper may hold the only copy of a paragraph of notes. So every near-duplicate
member (role ``duplicate``) is read word by word against its keeper, and its **unique
runs** are found: maximal runs of its words that lie in no passage shared with the
keeper, of at least ``unique_min_words`` words (shorter runs are edits: a changed name,
a reworded sentence). Then its action is settled (`settle_actions`):

    mostly-unique   more than `MERGE_MAX_SHARE` of its words are in unique runs: review.
                    It is less a copy of the keeper than a document of its own that shares
                    a part with it; carrying more than half of one document into another
                    rewrites the keeper, which is an editor's decision, not a clean-up.
    not-covered     too little of its shingles in the keeper (below ``retire_coverage``):
                    review, as before; its unique runs are named in the reason
    unique-text     unique runs, at most half of it: merge-then-retire. The runs are listed
                    (`settle_actions` returns them; ``merge-worklist.csv``) to be carried
                    over to the keeper before the member is retired
    covered         no unique run: retire, as before

Exact copies have no words of their own and keep ``retire``; linked-through members are
reviewed anyway and are not read here.

How shared words are found (`align_members`): the member is aligned with its keeper by
`dedup.align` with a gap limit below ``unique_min_words``. The alignment of the
evidence (``passages.csv``) joins seeds up to 32 words apart, so a 20-word note inserted
in a copied page lies inside a shared passage there; with a gap limit of
``unique_min_words - 1`` an inserted or replaced run of ``unique_min_words`` words or
more splits the passage and is found. A run that occurs word for word elsewhere in the
keeper (a paragraph the member repeats) is not unique. Words on template lines (the
audit's boilerplate lines, when given) are in many documents: they neither count towards
a run nor split one.

Cost: one compiled alignment per near-duplicate member, O(words of both texts), as in
the align step; then O(words) numpy per member.
"""

from __future__ import annotations

from collections.abc import Collection, Mapping, Sequence
from dataclasses import dataclass
from typing import NamedTuple

import numpy as np

from ..align import AlignSettings, NamedWords, WordSpans, align_pairs
from ..normalize.lines import line_hashes
from ..normalize.text import canonical_text
from ..settings import AuditSettings
from .actions import count_retired, number_clusters

__all__ = [
    "MERGE_MAX_SHARE",
    "MemberWords",
    "Settled",
    "shared_mask",
    "unique_runs",
    "template_mask",
    "template_masks",
    "align_members",
    "settle_actions",
]

# Above this share of its words in unique runs, a member is reviewed, not merged (see the
# module notes).
MERGE_MAX_SHARE = 0.5


@dataclass(frozen=True)
class MemberWords:
    """A member's words, and which of them its keeper shares.

    Attributes
    ----------
    starts, ends : ndarray of int64
        Character span ``[start, end)`` of each word in the member's original text
        (`dedup.align.WordSpans`).
    shared : ndarray of bool
        True for a word in a passage shared with the keeper.
    template : ndarray of bool or None
        True for a word on a template line (`template_mask`). `align_members` looks only
        at the words of unshared stretches of at least ``unique_min_words`` words, the
        only ones a unique run can hold (`unique_runs` reads no other), and leaves the
        rest False. None: no template words.
    text : str or None
        The member's original text: with it, a run's span takes in the punctuation that
        touches its first and last words (the full stop of its last sentence).
    """

    starts: np.ndarray
    ends: np.ndarray
    shared: np.ndarray
    template: np.ndarray | None = None
    text: str | None = None

    @property
    def n_words(self) -> int:
        return int(self.shared.shape[0])


class Settled(NamedTuple):
    """What `settle_actions` returns: the clusters (numbered again), the roles (the same
    records, changed in place) and the unique runs of every settled member."""

    clusters: list[dict]
    roles: dict[int, dict]
    unique_runs: list[dict]


def shared_mask(n_words: int, ranges: Sequence[tuple[int, int]]) -> np.ndarray:
    """Words inside any of the word ranges ``[start, end)``; O(n_words + ranges).

    >>> shared_mask(5, [(0, 2), (3, 4)]).tolist()
    [True, True, False, True, False]
    """
    change = np.zeros(n_words + 1, dtype=np.int64)
    for start, end in ranges:
        change[start] += 1
        change[end] -= 1
    return np.cumsum(change[:-1]) > 0


def _free_stretches(shared: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Starts and ends of the maximal stretches of words not shared."""
    edges = np.diff(np.concatenate(([0], (~shared).astype(np.int8), [0])))
    return np.flatnonzero(edges == 1), np.flatnonzero(edges == -1)


def unique_runs(
    shared: np.ndarray, min_words: int, template: np.ndarray | None = None
) -> list[tuple[int, int, int]]:
    """The unique runs of a member: ``(word_start, word_end, words)`` of each, in order.

    A run is a maximal stretch of words not ``shared``; template words in it neither
    count nor split it, and are trimmed from its ends. ``words`` counts its other words;
    a run is kept when ``words >= min_words``. O(words).

    >>> unique_runs(np.array([True] + [False] * 4 + [True, False]), 3)
    [(1, 5, 4)]
    >>> unique_runs(np.array([False, False, True]), 2, template=np.array([True, False, False]))
    []
    """
    starts, ends = _free_stretches(np.asarray(shared, dtype=bool))
    runs = []
    for a, b in zip(starts.tolist(), ends.tolist()):
        if template is not None:
            own = np.flatnonzero(~template[a:b])
            if own.shape[0] < min_words:
                continue
            runs.append((a + int(own[0]), a + int(own[-1]) + 1, int(own.shape[0])))
        elif b - a >= min_words:
            runs.append((a, b, b - a))
    return runs


def _occurs_in(needle: np.ndarray, haystack: np.ndarray) -> bool:
    """Whether the word hashes ``needle`` occur one after another in ``haystack``; O(bytes)."""
    hay, pin = haystack.tobytes(), needle.tobytes()
    at = hay.find(pin)
    while at != -1 and at % 8:  # only a match at a word boundary counts
        at = hay.find(pin, at + 1)
    return at != -1


def _held_lines(text: str, word_starts: np.ndarray) -> tuple[np.ndarray, list[str]]:
    """The canonical form of every line of ``text`` that holds one of the words (by start
    character), and for each word the number of its line among them. Lines holding none
    are not read: O(characters of the held lines) Python, O(lines) to find them."""
    if not word_starts.shape[0]:
        return np.zeros(0, dtype=np.int64), []
    lines = text.splitlines(keepends=True)
    line_starts = np.zeros(len(lines), dtype=np.int64)
    np.cumsum([len(line) for line in lines[:-1]], out=line_starts[1:])
    held, which = np.unique(np.searchsorted(line_starts, word_starts, side="right") - 1, return_inverse=True)
    return which.astype(np.int64), [canonical_text(lines[k]) for k in held.tolist()]


def template_mask(text: str, word_starts: np.ndarray, template_lines: Collection[int]) -> np.ndarray:
    """Words of ``text`` (by their start characters) that lie on a template line.

    ``template_lines`` holds line hashes as the boilerplate stage keeps them (the keys of
    `dedup.normalize.boilerplate.Boilerplate.counts`): the hash of a line's canonical form
    (NFKC, case folded, whitespace collapsed, `dedup.normalize.lines.line_hashes`).
    O(characters of the lines holding the words) plus one compiled hash per such line;
    `template_masks` does many texts at once.
    """
    return template_masks([text], [word_starts], template_lines)[0]


def template_masks(
    texts: Sequence[str], word_starts: Sequence[np.ndarray], template_lines: Collection[int]
) -> list[np.ndarray]:
    """`template_mask` of every text of a batch, from one compiled hash call over the lines
    that hold the given words.

    One call, not one per text: the hashing is parallel, and each launch of a parallel
    kernel waits for its whole team of threads, which on a busy machine costs far more
    than hashing one text's lines (thousands of launches took minutes). Cost
    O(characters of the lines holding the words) Python, O(lines) numpy per text, one
    compiled pass over the held lines.
    """
    starts = [np.asarray(s, dtype=np.int64) for s in word_starts]
    if not template_lines:
        return [np.zeros(s.shape[0], dtype=bool) for s in starts]
    held = [_held_lines(text, s) for text, s in zip(texts, starts)]
    forms = [form for _, canonical in held for form in canonical]
    on_template = np.zeros(len(forms), dtype=bool)
    if forms:
        hashes = _form_hashes(forms).tolist()
        on_template[:] = [bool(form) and h in template_lines for form, h in zip(forms, hashes)]
    masks, first = [], 0
    for which, canonical in held:
        masks.append(on_template[first + which])
        first += len(canonical)
    return masks


def _form_hashes(forms: list[str]) -> np.ndarray:
    """`dedup.normalize.lines.line_hashes` of canonical lines, in one compiled call."""
    encoded = [form.encode("utf-8", "surrogatepass") for form in forms]
    lengths = np.fromiter((len(e) for e in encoded), dtype=np.int64, count=len(encoded))
    stops = np.cumsum(lengths + 1) - 1
    buf = np.frombuffer(b"\n".join(encoded), dtype=np.uint8)
    return line_hashes(buf, stops - lengths, stops)


def _loss_settings(settings: AuditSettings) -> AlignSettings:
    """Alignment whose gap limit never bridges a run of ``unique_min_words`` words."""
    bridge = min(settings.unique_min_words - 1, AlignSettings().max_gap)
    return AlignSettings(max_gap=bridge, min_words=settings.passage_min_words)


def _near_pairs(clusters: Sequence[dict]) -> list[tuple[str, str]]:
    """``(member, keeper)`` of every near-duplicate member, in cluster and member order."""
    return [
        (m["document_id"], c["keeper"]) for c in clusters for m in c["members"] if m["role"] == "duplicate"
    ]


def _member_words(
    words: WordSpans, member: int, keeper: int, ranges: list[tuple[int, int]], min_words: int
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Starts, ends and shared mask of a member; stretches found word for word in the
    keeper are shared."""
    hashes, starts, ends = words.of(member)
    shared = shared_mask(hashes.shape[0], ranges)
    keeper_hashes = words.of(keeper)[0]
    for a, b in zip(*(s.tolist() for s in _free_stretches(shared))):
        if b - a >= min_words and _occurs_in(hashes[a:b], keeper_hashes):
            shared[a:b] = True
    return starts, ends, shared


def align_members(
    clusters: Sequence[dict],
    texts: Mapping[str, str],
    settings: AuditSettings,
    template_lines: Collection[int] | None = None,
    workers: int = 1,
    words: NamedWords | None = None,
) -> dict[str, MemberWords]:
    """The words of every near-duplicate member (role ``duplicate``) and which of them its
    keeper shares, keyed by document id.

    Parameters
    ----------
    clusters : sequence of dict
        The clusters of `dedup.cluster.build_clusters` (their ``keeper`` and ``members``).
    texts : mapping
        Original text of every clustered document, by id (as the align step has them).
    template_lines : collection of int, optional
        Line hashes of the audit's boilerplate (``Boilerplate.counts``); their words are
        marked (`template_mask`).
    workers : int
        Threads for the alignment (the result is the same for any number).
    words : NamedWords, optional
        The words of (at least) every member and keeper, when another step found them
        already (the align step does); found here otherwise. The result is the same.

    Notes
    -----
    Cost: `dedup.align.word_spans` over the texts of the pairs (unless given), one compiled alignment
    per member (see the module notes), O(words) numpy per member; then the template words
    of all members in one batch (`template_masks`), over the lines that hold their long
    unshared stretches only.
    """
    pairs = _near_pairs(clusters)
    if words is None:
        words = NamedWords.of(texts, (doc for pair in pairs for doc in pair))
    left, right = words.numbers(m for m, _ in pairs), words.numbers(k for _, k in pairs)
    alignment = align_pairs(words.spans, left, right, _loss_settings(settings), workers=workers)
    found = []
    for p, (a, b) in enumerate(zip(left.tolist(), right.tolist())):
        rows = alignment.rows_of(p)
        ranges = list(zip(alignment.left_word_start[rows].tolist(), alignment.left_word_end[rows].tolist()))
        found.append(_member_words(words.spans, a, b, ranges, settings.unique_min_words))
    members = [member for member, _ in pairs]
    templates = (
        _member_templates([texts[m] for m in members], found, template_lines, settings.unique_min_words)
        if template_lines
        else [None] * len(members)
    )
    return {
        member: MemberWords(starts, ends, shared, template, texts[member])
        for member, (starts, ends, shared), template in zip(members, found, templates)
    }


def _long_free(shared: np.ndarray, min_words: int) -> np.ndarray:
    """Indices of the words in unshared stretches of at least ``min_words`` words."""
    starts, ends = _free_stretches(shared)
    long = ends - starts >= min_words
    if not long.any():
        return np.zeros(0, dtype=np.int64)
    return np.concatenate([np.arange(a, b) for a, b in zip(starts[long].tolist(), ends[long].tolist())])


def _member_templates(texts: list[str], found: list, template_lines, min_words: int) -> list[np.ndarray]:
    """Template masks of the members (`MemberWords.template`), in one `template_masks` batch
    over the words of their long unshared stretches: the only words a unique run can hold.
    A mask is False elsewhere."""
    looked = [_long_free(shared, min_words) for _, _, shared in found]
    masks = template_masks(texts, [starts[w] for (starts, _, _), w in zip(found, looked)], template_lines)
    templates = []
    for (_, _, shared), w, mask in zip(found, looked, masks):
        template = np.zeros(shared.shape[0], dtype=bool)
        template[w] = mask
        templates.append(template)
    return templates


def _settle_member(entry: dict, runs: list[tuple[int, int, int]], n_words: int, settings) -> None:
    """Action, keeper and reason of one near-duplicate from its unique runs, in place."""
    unique_words = sum(w for _, _, w in runs)
    share = unique_words / n_words if n_words else 0.0
    figures = entry["reason_figures"]
    figures.update(
        unique_words=unique_words,
        unique_runs=len(runs),
        unique_share=round(share, 6),
        unique_min_words=settings.unique_min_words,
    )
    keeper = figures["keeper"]
    if share > MERGE_MAX_SHARE:
        entry.update(action="review", in_favour_of=None, reason_code="mostly-unique")
        figures["max_merge_share"] = MERGE_MAX_SHARE
    elif entry["reason_code"] == "not-covered":
        entry.update(action="review", in_favour_of=None)
    elif runs:
        entry.update(action="merge-then-retire", in_favour_of=keeper, reason_code="unique-text")
    else:
        entry.update(action="retire", in_favour_of=keeper, reason_code="covered")


def _span(words: MemberWords, a: int, b: int) -> tuple[int, int]:
    """Characters of words ``a:b``, widened over the punctuation touching them (no space,
    no neighbouring word); O(characters added)."""
    start, end = int(words.starts[a]), int(words.ends[b - 1])
    text = words.text
    if text is None:
        return start, end
    floor = int(words.ends[a - 1]) if a > 0 else 0
    ceiling = int(words.starts[b]) if b < words.n_words else len(text)
    while start > floor and not text[start - 1].isspace():
        start -= 1
    while end < ceiling and not text[end].isspace():
        end += 1
    return start, end


def _run_records(entry: dict, keeper: str, runs: list, words: MemberWords) -> list[dict]:
    records = []
    for number, (a, b, count) in enumerate(runs, 1):
        start, end = _span(words, a, b)
        records.append(
            {
                "document_id": entry["document_id"],
                "keeper": keeper,
                "cluster_id": None,  # filled in once the clusters are numbered
                "action": entry["action"],
                "run": number,
                "start": start,
                "end": end,
                "words": count,
                "word_start": a,
                "word_end": b,
            }
        )
    return records


def settle_actions(
    clusters: list[dict],
    roles: dict[int, dict],
    words: Mapping[str, MemberWords],
    settings: AuditSettings,
    sizes: Sequence[int],
) -> Settled:
    """Settle the action of every near-duplicate member from its unique runs.

    Parameters
    ----------
    clusters, roles : list of dict, dict
        From `dedup.cluster.build_clusters`, reasons still as data (before
        `dedup.report.wording.describe_roles`). Member records are changed in place
        (``action``, ``in_favour_of``, ``reason_code``, ``reason_figures``).
    words : mapping
        `align_members` of the same clusters.
    sizes : sequence of int
        Bytes of each document, indexed like ``roles`` (for ``retire_bytes``, ``merge_bytes``).

    Returns
    -------
    Settled
        The clusters with their counts set again and numbered again (`number_clusters`:
        the same order unless a member left retirement), ``roles``, and one record per
        unique run -- ``document_id``, ``keeper``, ``cluster_id``, ``action`` (the
        member's), ``run`` (1-based), ``start``/``end`` (characters of the member's
        original text, end exclusive, from its first to its last word and the
        punctuation touching them), ``words``, ``word_start``/``word_end`` -- in
        cluster order, members in index order.

    Raises
    ------
    ValueError
        A near-duplicate has no words in ``words``, or the reasons are worded already.

    Notes
    -----
    The reason figures of a settled member gain ``unique_words``, ``unique_runs``,
    ``unique_share`` and ``unique_min_words`` (``mostly-unique`` also
    ``max_merge_share``). Cost O(words of the members).
    """
    index_of = {entry["document_id"]: i for i, entry in roles.items()}
    found: list[tuple[dict, list[dict]]] = []
    for cluster in clusters:
        for entry in cluster["members"]:
            if entry["role"] != "duplicate":
                continue
            if "reason_code" not in entry:
                raise ValueError("settle_actions needs the reasons as data: call it before describe_roles")
            doc = entry["document_id"]
            if doc not in words:
                raise ValueError(
                    f"no words of {doc!r} against its keeper: run align_members on these clusters"
                )
            runs = unique_runs(words[doc].shared, settings.unique_min_words, words[doc].template)
            _settle_member(entry, runs, words[doc].n_words, settings)
            found.append((entry, _run_records(entry, cluster["keeper"], runs, words[doc])))
        count_retired(cluster, [sizes[index_of[e["document_id"]]] for e in cluster["members"]])
    numbered = number_clusters(clusters)
    records = []
    for entry, runs in found:
        for run in runs:
            run["cluster_id"] = entry["cluster_id"]
        records.extend(runs)
    order = {c["id"]: i for i, c in enumerate(numbered)}
    records.sort(key=lambda r: (order[r["cluster_id"]], index_of[r["document_id"]], r["run"]))
    return Settled(numbered, roles, records)
