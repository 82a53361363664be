"""No silent loss: unique runs of near-duplicates, and the actions they settle.

Checked three ways: the run finder against plain Python on generated masks; the settled
actions on generated clusters (no member with a unique run of ``unique_min_words`` words
is ever proposed for plain retirement); and the whole path -- real alignment included --
on copies of pages with planted notes, generated and from the demo corpus.
"""

from __future__ import annotations

import random
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from dedup import AuditSettings
from dedup.align import word_spans
from dedup.cluster import MERGE_MAX_SHARE, align_members, build_clusters, settle_actions, unique_runs
from dedup.cluster.actions import ClusterInputs
from dedup.cluster.loss import MemberWords, shared_mask, template_mask, template_masks
from dedup.normalize.boilerplate import BoilerplateCounter, canonical_lines
from dedup.report.wording import describe_roles
from dedup.verify import PairScores

DEMO = Path(__file__).resolve().parents[2] / "fixtures" / "demo" / "kb"


# -- the run finder against plain Python ------------------------------------------------


def reference_runs(shared: list[bool], min_words: int, template: list[bool] | None) -> list[tuple]:
    """Maximal stretches of words not shared; template words skipped, not counted, trimmed."""
    template = template or [False] * len(shared)
    runs, stretch = [], []
    for i, is_shared in enumerate([*shared, True]):
        if not is_shared:
            stretch.append(i)
            continue
        own = [j for j in stretch if not template[j]]
        if len(own) >= min_words:
            runs.append((own[0], own[-1] + 1, len(own)))
        stretch = []
    return runs


@given(
    st.lists(st.tuples(st.booleans(), st.booleans()), max_size=80),
    st.integers(1, 8),
    st.booleans(),
)
def test_unique_runs_equal_plain_python(words, min_words, with_template):
    shared = [s for s, _ in words]
    template = [t for _, t in words] if with_template else None
    got = unique_runs(
        np.array(shared, dtype=bool), min_words, None if template is None else np.array(template)
    )
    assert got == reference_runs(shared, min_words, template)


@given(
    st.integers(0, 60).flatmap(
        lambda n: st.tuples(st.just(n), st.lists(st.tuples(st.integers(0, n), st.integers(0, n))))
    )
)
def test_shared_mask_equals_plain_python(case):
    n, spans = case
    ranges = [(min(a, b), max(a, b)) for a, b in spans]
    assert shared_mask(n, ranges).tolist() == [any(a <= i < b for a, b in ranges) for i in range(n)]


def test_template_words_neither_count_nor_split_a_run():
    # 8 own words, a 3-word template line, 8 own words: one run of 16 words.
    shared = np.array([True] + [False] * 19 + [True])
    template = np.zeros(21, dtype=bool)
    template[9:12] = True
    assert unique_runs(shared, 15, template) == [(1, 20, 16)]
    template[1:4] = True  # template words at the edge are trimmed off the run
    assert unique_runs(shared, 13, template) == [(4, 20, 13)]


def test_template_mask_marks_the_words_of_boilerplate_lines():
    footer = "Confidential: for Orrin Basin staff only. Do not share."
    texts = [f"Article {n} body text here.\n{footer}\n" for n in range(4)]
    counter = BoilerplateCounter()
    packed = ["\n".join(canonical_lines(t)).encode() for t in texts]
    offsets = np.cumsum([0, *[len(p) for p in packed]])
    counter.add(np.frombuffer(b"".join(packed), dtype=np.uint8), offsets)
    template = counter.find(share=0.5, min_texts=3).counts
    text = "Some  UNIQUE words\r\n\n  CONFIDENTIAL: for orrin basin staff only.  Do not share.\nEnd."
    starts = np.array([text.index(w) for w in ("Some", "UNIQUE", "CONFIDENTIAL", "orrin", "share", "End")])
    assert template_mask(text, starts, template).tolist() == [False, False, True, True, True, False]
    assert not template_mask(text, starts, set()).any()


FOOTERS = ["Confidential: for Orrin Basin staff only.", "Printed copies are not controlled."]


def template_hashes(lines: list[str]) -> dict[int, int]:
    """Line hashes of ``lines`` as the boilerplate stage keeps them: each line in four texts."""
    texts = [f"Article {n} body text here.\n" + "\n".join(lines) for n in range(4)]
    counter = BoilerplateCounter()
    packed = ["\n".join(canonical_lines(t)).encode() for t in texts]
    offsets = np.cumsum([0, *[len(p) for p in packed]])
    counter.add(np.frombuffer(b"".join(packed), dtype=np.uint8), offsets)
    return counter.find(share=0.5, min_texts=3).counts


def reference_template(text: str, word_starts: list[int], forms: set[str]) -> list[bool]:
    """Plain Python: each word's line (as ``str.splitlines`` cuts it), canonical form in ``forms``."""
    found = []
    for start in word_starts:
        at = 0
        for line in text.splitlines(keepends=True):
            if at <= start < at + len(line):
                found.append(bool(set(canonical_lines(line)) & forms))
                break
            at += len(line)
    return found


LINE_PIECES = [
    *FOOTERS,
    "CONFIDENTIAL:   for orrin BASIN staff only.",
    "  printed copies are NOT controlled.  ",
    "Straße ﬁle ½ notes",
    "Reset the pump controller",
    "",
    "   ",
]
BREAKS = ["\n", "\r\n", "\r", "\x0b", "\x0c", "\x85", "\u2028", "\n\n"]


@settings(max_examples=60, deadline=None)
@given(
    st.lists(
        st.lists(st.tuples(st.sampled_from(LINE_PIECES), st.sampled_from(BREAKS)), max_size=8),
        min_size=1,
        max_size=4,
    ),
    st.data(),
)
def test_template_masks_of_a_batch_equal_plain_python(texts, data):
    """Any text, any subset of its words: the mask of each word is its line's, batch or not."""
    texts = ["".join(line + end for line, end in pieces) for pieces in texts]
    lines = template_hashes(FOOTERS)
    forms = {form for footer in FOOTERS for form in canonical_lines(footer)}
    words = word_spans(texts)
    chosen = []
    for d in range(len(texts)):
        starts = words.of(d)[1]
        keep = data.draw(st.lists(st.booleans(), min_size=len(starts), max_size=len(starts)))
        chosen.append(starts[np.asarray(keep, dtype=bool)])
    masks = template_masks(texts, chosen, lines)
    for text, starts, mask in zip(texts, chosen, masks):
        assert mask.tolist() == reference_template(text, starts.tolist(), forms)
        assert template_mask(text, starts, lines).tolist() == mask.tolist()


# -- settled actions on generated clusters ------------------------------------------------

UNIQUE_MIN = 15


def scores_of(containment: dict[int, float]):
    def score_against(members: np.ndarray, keepers: np.ndarray) -> PairScores:
        n = len(members)
        contained = np.array([containment[m] for m in members.tolist()], dtype=np.float64)
        return PairScores(
            members, keepers, np.zeros(n, np.int64), contained, contained, np.ones(n), contained
        )

    return score_against


def star_clusters(sizes: list[int], containment: dict[int, float], settings: AuditSettings):
    """Clusters of ``sizes`` members, each member joined to its cluster's first member."""
    ids, left, right, edge, start = [], [], [], {}, 0
    for size in sizes:
        for m in range(size):
            ids.append(f"c{start}/m{m}.md")
            if m:
                left.append(start)
                right.append(start + m)
                edge[(start, start + m)] = 0.9
        start += size
    n = len(ids)
    inputs = ClusterInputs(
        ids=ids,
        lengths=[1000 if "/m0." in i else 10 for i in ids],  # the first member keeps
        sizes=list(range(100, 100 + n)),
        dates=[None] * n,
        representative=np.arange(n),
    )
    clusters, roles = build_clusters(
        inputs, np.array(left, np.int64), np.array(right, np.int64), edge, scores_of(containment), settings
    )
    return inputs, clusters, roles


member_masks = st.lists(st.booleans(), min_size=1, max_size=120)


@settings(max_examples=150, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(st.integers(2, 5), min_size=1, max_size=4), st.data())
def test_no_member_with_a_unique_run_is_proposed_for_plain_retirement(sizes, data):
    n = sum(sizes)
    containment = {m: data.draw(st.sampled_from([0.5, 0.85, 1.0])) for m in range(n)}
    config = AuditSettings(threshold=0.5, retire_coverage=0.8, unique_min_words=UNIQUE_MIN)
    inputs, clusters, roles = star_clusters(sizes, containment, config)
    masks = {}
    for entry in roles.values():
        if entry["role"] == "duplicate":
            # Mostly shared, with stretches of unshared words of any length.
            shared = np.array(data.draw(st.lists(st.sampled_from([True] * 6 + [False]), max_size=200)), bool)
            for _ in range(data.draw(st.integers(0, 2))):
                if shared.shape[0]:
                    a = data.draw(st.integers(0, shared.shape[0] - 1))
                    shared[a : a + data.draw(st.integers(1, 40))] = False
            masks[entry["document_id"]] = shared
    words = {
        doc: MemberWords(np.arange(m.shape[0]), np.arange(m.shape[0]) + 1, m) for doc, m in masks.items()
    }
    before = {e["document_id"]: (e["role"], e["action"], e["reason_code"]) for e in roles.values()}
    settled = settle_actions(clusters, roles, words, config, inputs.sizes)

    runs_of: dict[str, list] = {}
    for run in settled.unique_runs:
        runs_of.setdefault(run["document_id"], []).append(run)
    for entry in roles.values():
        doc = entry["document_id"]
        if doc not in masks:  # keepers and exact copies: untouched
            assert (entry["role"], entry["action"], entry["reason_code"]) == before[doc]
            continue
        shared = masks[doc].tolist()
        longest = max((b - a for a, b, _ in reference_runs(shared, 1, None)), default=0)
        has_unique = longest >= UNIQUE_MIN
        # The property: a member with a unique run is never proposed for plain retirement.
        assert entry["action"] != "retire" or not has_unique
        assert [(r["word_start"], r["word_end"]) for r in runs_of.get(doc, [])] == [
            (a, b) for a, b, _ in reference_runs(shared, UNIQUE_MIN, None)
        ]
        share = (
            sum(b - a for a, b, _ in reference_runs(shared, UNIQUE_MIN, None)) / len(shared) if shared else 0
        )
        if share > MERGE_MAX_SHARE:
            expected = ("review", "mostly-unique")
        elif containment[inputs.ids.index(doc)] < 0.8:
            expected = ("review", "not-covered")
        elif has_unique:
            expected = ("merge-then-retire", "unique-text")
        else:
            expected = ("retire", "covered")
        assert (entry["action"], entry["reason_code"]) == expected
        assert entry["in_favour_of"] == (
            entry["reason_figures"]["keeper"] if expected[0] != "review" else None
        )
    size_of = dict(zip(inputs.ids, inputs.sizes))
    for cluster in settled.clusters:
        for action, prefix in (("retire", "retire"), ("merge-then-retire", "merge")):
            chosen = [m["document_id"] for m in cluster["members"] if m["action"] == action]
            assert cluster[f"{prefix}_documents"] == len(chosen)
            assert cluster[f"{prefix}_bytes"] == sum(size_of[d] for d in chosen)
        assert all(m["cluster_id"] == cluster["id"] for m in cluster["members"])
    keys = [(-c["size"], -(c["retire_bytes"] + c["merge_bytes"]), c["keeper"]) for c in settled.clusters]
    assert keys == sorted(keys)
    assert [c["id"] for c in settled.clusters] == [f"C{i:05d}" for i in range(1, len(settled.clusters) + 1)]
    describe_roles(roles)  # every settled reason can be worded


def test_a_member_that_leaves_retirement_changes_the_cluster_order():
    config = AuditSettings(threshold=0.5, unique_min_words=UNIQUE_MIN)
    # Two clusters of two; the second has more bytes to retire, so it comes first.
    inputs, clusters, roles = star_clusters([2, 2], {1: 1.0, 3: 1.0}, config)
    assert [c["keeper"] for c in clusters] == ["c2/m0.md", "c0/m0.md"]
    unique = np.zeros(40, dtype=bool)  # all of member 3's words are its own
    words = {
        "c0/m1.md": MemberWords(np.arange(40), np.arange(40) + 1, np.ones(40, dtype=bool)),
        "c2/m1.md": MemberWords(np.arange(40), np.arange(40) + 1, unique),
    }
    settled = settle_actions(clusters, roles, words, config, inputs.sizes)
    assert [c["keeper"] for c in settled.clusters] == ["c0/m0.md", "c2/m0.md"]
    assert [c["retire_bytes"] for c in settled.clusters] == [101, 0]
    assert roles[3]["cluster_id"] == "C00002" and roles[3]["reason_code"] == "mostly-unique"
    assert settled.unique_runs[0]["cluster_id"] == "C00002"


def test_settling_refuses_worded_reasons_and_members_without_words():
    config = AuditSettings(threshold=0.5)
    inputs, clusters, roles = star_clusters([2], {1: 1.0}, config)
    with pytest.raises(ValueError, match="no words of 'c0/m1.md'"):
        settle_actions(clusters, roles, {}, config, inputs.sizes)
    describe_roles(roles)
    with pytest.raises(ValueError, match="before describe_roles"):
        settle_actions(clusters, roles, {}, config, inputs.sizes)


# -- the whole path, real alignment included ---------------------------------------------

KEEPER = "current/page.md"


def settle_texts(texts: dict[str, str], config: AuditSettings, containment: float = 0.95):
    """Cluster ``texts`` around KEEPER (scores given), align, settle; returns roles by id and runs."""
    clusters, roles, inputs = cluster_texts(texts, config, containment)
    settled = settle_actions(clusters, roles, align_members(clusters, texts, config), config, inputs.sizes)
    return {e["document_id"]: e for e in roles.values()}, settled.unique_runs


def cluster_texts(texts: dict[str, str], config: AuditSettings, containment: float = 0.95):
    """Clusters and roles of ``texts`` around KEEPER (scores given), and the cluster inputs."""
    ids = sorted(texts)
    k = ids.index(KEEPER)
    others = [i for i in range(len(ids)) if i != k]
    inputs = ClusterInputs(
        ids=ids,
        lengths=[len(texts[d]) for d in ids],
        sizes=[len(texts[d].encode()) for d in ids],
        dates=[None] * len(ids),
        representative=np.arange(len(ids)),
    )
    clusters, roles = build_clusters(
        inputs,
        np.array(others, np.int64),
        np.full(len(others), k, np.int64),
        {(min(i, k), max(i, k)): 0.95 for i in others},
        scores_of(dict.fromkeys(range(len(ids)), containment)),
        config.replace(prefer=("current/**",)),
    )
    return clusters, roles, inputs


def words_from(vocabulary: list[str], rng: random.Random, n: int) -> list[str]:
    return [rng.choice(vocabulary) for _ in range(n)]


PAGE_WORDS = [f"w{i}" for i in range(300)]
NOTE_WORDS = [f"n{i}" for i in range(300)]  # found nowhere else: the keeper has none of them
NOTE_SET = set(NOTE_WORDS)


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    seed=st.integers(0, 2**32 - 1),
    page_words=st.integers(60, 400),
    copies=st.lists(
        st.tuples(st.lists(st.integers(15, 60), max_size=3), st.integers(0, 4), st.booleans()),
        min_size=1,
        max_size=3,
    ),
)
def test_copies_with_planted_notes_are_never_proposed_for_plain_retirement(seed, page_words, copies):
    """Each copy: the page with notes of 15 to 60 words planted (inserted, or replacing as
    many words of the page), and a few one-word edits; the notes must all be found."""
    rng = random.Random(seed)
    page = words_from(PAGE_WORDS, rng, page_words)
    texts, notes = {KEEPER: " ".join(page)}, {}
    for c, (note_lengths, edits, replace) in enumerate(copies):
        words = list(page)
        for at in sorted(rng.sample(range(5, page_words - 5, 6), edits)):  # one-word edits, spaced out
            words[at] = rng.choice(PAGE_WORDS)
        for length in note_lengths:
            at = rng.randrange(len(words) + 1)
            words[at : at + (length if replace else 0)] = words_from(NOTE_WORDS, rng, length)
        doc = f"archive/copy{c}.md"
        texts[doc] = " ".join(words)
        notes[doc] = [w for w in words if w in NOTE_SET]
    roles, runs = settle_texts(texts, AuditSettings(unique_min_words=15))
    for doc, planted in notes.items():
        found = " ".join(texts[doc][r["start"] : r["end"]] for r in runs if r["document_id"] == doc)
        if planted:
            assert roles[doc]["action"] != "retire", roles[doc]["reason_figures"]
            assert all(word in found.split() for word in planted)  # every note word is listed
        else:
            assert roles[doc]["action"] == "retire" and not found  # edits alone lose nothing


def test_template_lines_in_a_note_are_read_as_on_the_whole_text():
    """align_members reads the template lines of long unshared stretches only: the unique
    runs are those of the mask of every word. A 12-word note split by a footer line is too
    short once the footer's words are left out; a 16-word one is not."""
    rng = random.Random(11)
    page = words_from(PAGE_WORDS, rng, 200)
    footer = FOOTERS[0]
    texts = {KEEPER: " ".join(page[:100]) + "\n" + footer + "\n" + " ".join(page[100:])}
    for doc, half in (("archive/short.md", 6), ("archive/long.md", 8)):
        note = words_from(NOTE_WORDS, rng, 2 * half)
        texts[doc] = "\n".join(
            [" ".join(page[:60] + note[:half]), footer, " ".join(note[half:] + page[60:]), footer]
        )
    config = AuditSettings(unique_min_words=15)
    lines = template_hashes(FOOTERS)
    clusters, _, _ = cluster_texts(texts, config)
    found = align_members(clusters, texts, config, template_lines=lines)
    runs = {}
    for doc, words in found.items():
        full = template_mask(texts[doc], words.starts, lines)
        assert full.sum() > words.template.sum() > 0  # the footer outside the note is not read
        runs[doc] = unique_runs(words.shared, 15, words.template)
        assert runs[doc] == unique_runs(words.shared, 15, full)
    assert runs["archive/short.md"] == [] and [w for _, _, w in runs["archive/long.md"]] == [16]


def test_words_found_by_another_step_give_the_same_members():
    """The align step hands its words on (of more texts, numbered its own way): every
    member's words, shared mask and template mask are the same as when found here."""
    from dedup.align import NamedWords

    rng = random.Random(13)
    page = words_from(PAGE_WORDS, rng, 200)
    footer = FOOTERS[0]
    texts = {KEEPER: " ".join(page) + "\n" + footer}
    for k in range(3):
        note = words_from(NOTE_WORDS, rng, 20 + 5 * k)
        texts[f"archive/{k}.md"] = " ".join(page[: 50 * k] + note + page[50 * k :]) + "\n" + footer
    config = AuditSettings(unique_min_words=15)
    lines = template_hashes(FOOTERS)
    clusters, _, _ = cluster_texts(texts, config)
    own = align_members(clusters, texts, config, template_lines=lines)
    more = {"aaa/unclustered.md": " ".join(words_from(NOTE_WORDS, rng, 80)), **texts}
    given = align_members(clusters, texts, config, template_lines=lines, words=NamedWords.of(more, more))
    assert sorted(own) == sorted(given) == [f"archive/{k}.md" for k in range(3)]
    for doc, words in own.items():
        other = given[doc]
        for field in ("starts", "ends", "shared", "template"):
            assert np.array_equal(getattr(words, field), getattr(other, field)), (doc, field)
        assert unique_runs(words.shared, 15, words.template)  # each note is found


def test_a_paragraph_the_member_repeats_is_not_unique():
    rng = random.Random(5)
    page = words_from(PAGE_WORDS, rng, 200)
    member = page + page[50:80]  # the member repeats 30 words of the page at its end
    roles, runs = settle_texts({KEEPER: " ".join(page), "archive/a.md": " ".join(member)}, AuditSettings())
    assert roles["archive/a.md"]["action"] == "retire" and runs == []


def test_an_insert_the_evidence_alignment_bridges_is_found():
    # 20 words inserted: passages.csv shows one passage over them (the gap limit there is
    # 32 words); the loss alignment splits at them.
    from dedup.align import align_texts

    rng = random.Random(9)
    page = words_from(PAGE_WORDS, rng, 300)
    member = " ".join(page[:150] + words_from(NOTE_WORDS, rng, 20) + page[150:])
    evidence = align_texts(member, " ".join(page))
    assert evidence.left_word_start.tolist() == [0] and evidence.left_word_end.tolist() == [320]
    roles, runs = settle_texts({KEEPER: " ".join(page), "archive/a.md": member}, AuditSettings())
    assert roles["archive/a.md"]["action"] == "merge-then-retire"
    assert [(r["word_start"], r["word_end"], r["words"]) for r in runs] == [(150, 170, 20)]


# -- the demo corpus: real pages, real notes -----------------------------------------------


def demo_text(path: str) -> str:
    if not DEMO.is_dir():
        pytest.skip(f"demo corpus missing at {DEMO}")
    return (DEMO / path).read_text(encoding="utf-8")


OPERATIONS_NOTE = (
    "Operations note: when the Duskwater booster station trips, reset the pump controller from the "
    "panel in the east room before calling the duty engineer."
)


def test_an_archived_page_with_the_only_copy_of_operations_notes_is_merged_not_retired():
    """The case of the issue: with containment 1.0 and a preferred current page, the
    archived copy holding notes found nowhere else must be merged first."""
    current = demo_text("current/hr/expense-claims.md")
    archived = demo_text("archive/2021/expense-claims.md")
    paragraph = archived.index("\n\n", len(archived) // 2)
    with_notes = archived[:paragraph] + "\n\n" + OPERATIONS_NOTE + archived[paragraph:]
    texts = {KEEPER: current, "archive/2021/expense-claims.md": with_notes}
    roles, runs = settle_texts(texts, AuditSettings(measure="containment"), containment=1.0)
    entry = roles["archive/2021/expense-claims.md"]
    assert entry["action"] == "merge-then-retire" and entry["in_favour_of"] == KEEPER
    assert [with_notes[r["start"] : r["end"]] for r in runs] == [OPERATIONS_NOTE]
    describe_roles({0: entry})
    assert entry["reason"].endswith(f"merge them into {KEEPER} before retiring it")
    # Without the notes, the archived copy (edits, and a sentence fewer) is retired.
    roles, runs = settle_texts({KEEPER: current, "archive/2021/expense-claims.md": archived}, AuditSettings())
    assert roles["archive/2021/expense-claims.md"]["action"] == "retire" and runs == []


@pytest.mark.parametrize("min_words, action", [(15, "retire"), (10, "merge-then-retire")])
def test_an_added_sentence_is_an_edit_or_text_of_its_own_by_the_setting(min_words, action):
    # The draft adds one sentence of 13 words to the current page.
    texts = {
        KEEPER: demo_text("current/billing/payment-plans.md"),
        "drafts/v2.md": demo_text("drafts/payment-plans-v2.md"),
    }
    roles, runs = settle_texts(texts, AuditSettings(unique_min_words=min_words))
    assert roles["drafts/v2.md"]["action"] == action
    added = "Customers on the water support discount can have a plan whatever their balance."
    assert [texts["drafts/v2.md"][r["start"] : r["end"]] for r in runs] == (
        [] if min_words == 15 else [added]
    )
