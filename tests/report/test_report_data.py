"""The report's data: what is embedded, how it is packed, and that it holds what the audit found."""

from __future__ import annotations

import copy
import json
import re

import pytest
from report_helpers import SPECIAL_TEXTS, expected_text, with_special_texts, words_of

from benchmarks.report_scale import big_cluster_result
from dedup.report import html
from dedup.report.html import embed_json, render_html, report_data, unpack_blob, unpack_texts


def _details(data: dict) -> dict[str, dict]:
    """Every cluster's unpacked details, by cluster id."""
    out = {}
    for row in data["clusters"]:
        out[row[0]] = json.loads(unpack_blob(data["blobs"][row[9]]))[row[10]]
    return out


def _texts(data: dict) -> dict[int, str]:
    """Every embedded text, by document index, rebuilt from the text blobs."""
    texts: dict[int, str] = {}
    for blob in sorted({d[4] for detail in _details(data).values() for d in detail["docs"]}):
        texts.update(unpack_texts(data["blobs"][blob]))
    return texts


def test_every_clustered_document_is_embedded_once_keeper_first(demo_result):
    data = report_data(demo_result)
    documents = data["documents"]
    assert len(documents) == len(set(documents)) == sum(c["size"] for c in demo_result.clusters)
    for c, row in zip(demo_result.clusters, data["clusters"]):
        first, size = row[3], row[1]
        assert row[0] == c["id"] and size == c["size"]
        assert documents[first] == c["keeper"]
        assert set(documents[first : first + size]) == {m["document_id"] for m in c["members"]}
    texts = _texts(data)
    assert sorted(texts) == list(range(len(documents)))
    for i, doc_id in enumerate(documents):
        assert texts[i] == demo_result.texts[doc_id]


def test_member_rows_and_documents_follow_the_cluster(demo_result):
    data = report_data(demo_result)
    details = _details(data)
    hashes = {d["id"]: d["content_hash"] for d in demo_result.documents}
    for c, row in zip(demo_result.clusters, data["clusters"]):
        detail = details[c["id"]]
        by_id = {m["document_id"]: m for m in c["members"]}
        for k, (member, doc) in enumerate(zip(detail["members"], detail["docs"])):
            m = by_id[data["documents"][row[3] + k]]
            assert member[0] == m["role"] and member[8] == m["reason"]
            assert member[5] == (None if m["deciding_score"] is None else round(m["deciding_score"], 6))
            assert doc[1] == hashes[m["document_id"]]
            if k == 0:
                assert member[9] == -1
            else:
                # Each member's pair with the keeper is embedded and points back at both.
                pair = detail["pairs"][member[9]]
                assert {pair[0], pair[1]} == {row[3], row[3] + k}


def test_passages_are_numbers_that_point_at_the_same_words_in_both_texts(demo_result):
    data = report_data(demo_result)
    texts = _texts(data)
    seen = 0
    for detail in _details(data).values():
        for a, b, _kind, _score, _ac, _bc, flat, _whole, _left_out in detail["pairs"]:
            assert isinstance(flat, list) and all(isinstance(x, int) for x in flat)
            assert len(flat) % len(html.PASSAGE_FIELDS) == 0
            for i in range(0, len(flat), 7):
                a0, a1, b0, b1, words, similarity, moved = flat[i : i + 7]
                left, right = words_of(texts[a][a0:a1]), words_of(texts[b][b0:b1])
                assert words == len(left) > 0 and 0 < similarity <= 1000 and moved in (0, 1)
                # A passage starts and ends on words both texts have there; verbatim, it is all alike.
                assert left[0] == right[0] and left[-1] == right[-1]
                if similarity == 1000:
                    assert left == right
                seen += 1
    assert seen == len(demo_result.passages) > 0


def test_covered_shares_come_from_the_pairs(demo_result):
    data = report_data(demo_result)
    records = {(p["left"], p["right"]): p for p in demo_result.pairs}
    checked = 0
    for detail in _details(data).values():
        for a, b, _kind, _score, a_covered, b_covered, _flat, whole, left_out in detail["pairs"]:
            record = records.get((data["documents"][a], data["documents"][b]))
            if record is not None and "left_covered" in record:
                assert a_covered == round(record["left_covered"], 4)
                assert b_covered == round(record["right_covered"], 4)
                assert whole == round(record["whole_text_jaccard"], 6)
                assert left_out == record["templates_left_out"]
                checked += 1
    assert checked > 0


def test_passages_given_the_other_way_round_orient_the_pair(demo_result):
    for p in demo_result.passages:
        p["left"], p["right"] = p["right"], p["left"]
        p["left_start"], p["left_end"], p["right_start"], p["right_end"] = (
            p["right_start"], p["right_end"], p["left_start"], p["left_end"],
        )  # fmt: skip
        p["words"], p["right_words"] = p["right_words"], p["words"]
    data = report_data(demo_result)
    texts = _texts(data)
    lefts = {(p["left"], p["right"]) for p in demo_result.passages}
    for detail in _details(data).values():
        for a, b, _kind, _score, _ac, _bc, flat, *_rest in detail["pairs"]:
            if flat:
                assert (data["documents"][a], data["documents"][b]) in lefts
                assert flat[4] == len(words_of(texts[a][flat[0] : flat[1]]))


def test_without_passages_every_pair_says_so(demo_without_passages):
    data = report_data(demo_without_passages)
    given = demo_without_passages.passages is not None
    assert data["passages"]["available"] is given
    pairs = [p for detail in _details(data).values() for p in detail["pairs"]]
    assert pairs and all(p[6] == ([] if given else None) and p[4] is None for p in pairs)


def test_a_cut_text_is_marked_and_its_passages_end_at_the_cut(demo_result, monkeypatch):
    monkeypatch.setattr(html, "MAX_TEXT_CHARS", 300)
    data = report_data(demo_result)
    texts = _texts(data)
    assert data["text_limit"] == 300
    docs = [d for detail in _details(data).values() for d in detail["docs"]]
    assert any(d[3] == 1 and d[2] > 300 for d in docs)
    assert all(len(t) <= 300 for t in texts.values())
    for detail in _details(data).values():
        for a, b, _kind, _score, _ac, _bc, flat, *_rest in detail["pairs"]:
            for i in range(0, len(flat), 7):
                assert flat[i] < flat[i + 1] <= len(texts[a]) and flat[i + 2] < flat[i + 3] <= len(texts[b])


def test_hard_texts_survive_the_packing(demo_audit, monkeypatch):
    monkeypatch.setattr(html, "MAX_TEXT_CHARS", 9_000)
    result = with_special_texts(demo_audit)
    data = report_data(result)
    texts = _texts(data)
    for i, doc_id in enumerate(data["documents"]):
        assert texts[i] == expected_text(result.texts[doc_id], 9_000), doc_id
    assert {expected_text(t, 9_000) for t in SPECIAL_TEXTS} <= set(texts.values())


def test_document_text_never_reaches_the_page_as_markup(demo_audit):
    result = with_special_texts(demo_audit)
    page = render_html(result)
    assert "<img src=x" not in page and "alert(" not in page
    # Nothing inside the data block or the packed blobs can end its element early.
    for body in re.findall(
        r'<script type="application/(?:json|octet-stream)"[^>]*>(.*?)</script>', page, re.S
    ):
        assert "<" not in body
    blobs = re.findall(
        r'<script type="application/octet-stream" id="blob-(\d+)">([A-Za-z0-9+/=]*)</script>', page
    )
    assert [int(n) for n, _ in blobs] == list(range(len(blobs))) and blobs


def test_the_page_is_the_same_every_time(demo_result):
    assert render_html(demo_result) == render_html(copy.deepcopy(demo_result))


def test_other_pairs_beyond_the_budget_are_counted_not_embedded(demo_result, monkeypatch):
    monkeypatch.setattr(html, "MAX_OTHER_PAIRS", 0)
    data = report_data(demo_result)
    member_pairs = sum(c["size"] - 1 for c in demo_result.clusters)
    embedded = sum(len(d["pairs"]) for d in _details(data).values())
    assert embedded == member_pairs == data["passages"]["pairs"]
    assert data["passages"]["other_pairs_left_out"] > 0


def test_a_large_cluster_is_split_into_several_text_blobs(demo_audit):
    result = big_cluster_result(demo_audit, 2_000)
    data = report_data(result)
    (row,) = data["clusters"]
    detail = _details(data)[row[0]]
    assert row[1] == len(detail["members"]) == len(detail["docs"]) == 2_000
    assert len(detail["pairs"]) == 1_999 and all(len(p[6]) == 7 for p in detail["pairs"])
    assert len({d[4] for d in detail["docs"]}) > 1
    texts = _texts(data)
    assert all(texts[i] == result.texts[doc_id] for i, doc_id in enumerate(data["documents"]))
    # Copies pack to a small share of their text.
    packed = sum(len(data["blobs"][b]) for b in {d[4] for d in detail["docs"]})
    assert packed < 0.1 * sum(len(t) for t in result.texts.values())


@pytest.mark.parametrize("n", [0, 1, 2])
def test_pair_rows_keep_the_passage_layout_for_any_count(demo_result, n):
    for key in list({(p["left"], p["right"]) for p in demo_result.passages}):
        rows = [p for p in demo_result.passages if (p["left"], p["right"]) == key]
        for extra in rows[n:]:
            demo_result.passages.remove(extra)
    data = report_data(demo_result)
    assert all(
        len(p[6]) <= 7 * n and len(p[6]) % 7 == 0
        for detail in _details(data).values()
        for p in detail["pairs"]
    )


def test_embedded_json_cannot_close_its_script_block():
    hostile = {"t": "</script><script>alert(1)</script> & \u2028"}
    text = embed_json(hostile)
    assert "<" not in text and ">" not in text and "&" not in text and "\u2028" not in text
    assert json.loads(text) == hostile


@pytest.mark.parametrize("line", ["\u0000audit-data\u0000", "<dedup-audit-data/>", "<dedup-audit-blobs/>"])
def test_a_text_shown_on_the_page_cannot_split_it(demo_result, line):
    # Boilerplate lines are shown as text in the page around the data block.
    demo_result.boilerplate = {**demo_result.boilerplate, "lines": 1, "top": [{"text": line, "texts": 9}]}
    page = render_html(demo_result)
    assert page.count('id="audit-data"') == 1 and page.rstrip().endswith("</html>")
    if line.startswith("<"):
        assert line.replace("<", "&lt;").replace(">", "&gt;") in page


def test_the_feature_space_line_names_the_exact_vocabulary_or_the_hashed_columns(demo_result):
    exact = copy.deepcopy(demo_result)
    exact.tfidf = {**exact.tfidf, "n_features": 0, "vocabulary_size": 2604}
    page = render_html(exact)
    assert "exact vocabulary: one column per term, 2,604 terms" in page and "0 columns for" not in page
    hashed = copy.deepcopy(demo_result)
    hashed.tfidf = {**hashed.tfidf, "n_features": 4096}
    assert "4,096 columns for" in render_html(hashed)


def test_the_lsh_catch_curve_is_drawn_only_when_lsh_found_the_candidates(demo_result):
    exact = copy.deepcopy(demo_result)
    exact.candidates = {**exact.candidates, "method": "exhaustive"}
    assert "Chance a pair is compared" not in render_html(exact)
    lsh = copy.deepcopy(demo_result)
    lsh.candidates = {**lsh.candidates, "method": "lsh"}
    assert "Chance a pair is compared" in render_html(lsh)
