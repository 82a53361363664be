"""The HTML report in a real browser: Debian's Chromium driven by Playwright.

Screenshots of the summary and of a pair being read are saved under test-output/.
"""

from __future__ import annotations

import json
import os
import re
import shutil
from pathlib import Path

import pytest
from report_helpers import SPECIAL_TEXTS, expected_text, with_special_texts

import dedup
from benchmarks.corpus import synthetic_documents
from benchmarks.report_scale import big_cluster_result
from dedup.report import html
from dedup.report.decisions import validate_decisions

playwright_api = pytest.importorskip("playwright.sync_api")
expect = playwright_api.expect

CHROMIUM = "/usr/bin/chromium"
FLAGS = [
    "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
    "--disable-background-networking", "--disable-component-update", "--disable-sync",
]  # fmt: skip
OUTPUT = Path(__file__).resolve().parents[2] / "test-output"

if not os.path.exists(CHROMIUM):
    if os.environ.get("CI"):
        raise RuntimeError(f"{CHROMIUM} is missing: .ci/run installs Debian's chromium before the tests")
    pytest.skip(f"{CHROMIUM} not installed (apt-get install chromium)", allow_module_level=True)


@pytest.fixture(scope="module")
def browser():
    with playwright_api.sync_playwright() as p:
        b = p.chromium.launch(executable_path=CHROMIUM, args=FLAGS)
        yield b
        b.close()


@pytest.fixture
def page(browser):
    context = browser.new_context(viewport={"width": 1280, "height": 1000})
    page = context.new_page()
    page.problems = []
    page.on(
        "console",
        lambda m: (
            page.problems.append(f"console {m.type}: {m.text}") if m.type in ("error", "warning") else None
        ),
    )
    page.on("pageerror", lambda e: page.problems.append(f"page error: {e}"))
    page.on("dialog", lambda d: (page.problems.append(f"dialog: {d.message}"), d.dismiss()))
    page.on(
        "request",
        lambda r: (
            None
            if r.url.startswith(("file:", "data:", "blob:"))
            else page.problems.append(f"request: {r.url}")
        ),
    )
    yield page
    context.close()


@pytest.fixture(scope="module")
def demo_report(demo_audit, tmp_path_factory):
    out = tmp_path_factory.mktemp("demo-report")
    paths = demo_audit.write(str(out))
    return demo_audit, Path(paths["report.html"]), json.loads(Path(paths["audit.json"]).read_text())


def _open_cluster(page, cluster_id: str):
    card = page.locator(f"#cluster-{cluster_id}")
    if card.locator(".cluster-body").count() == 0:
        card.locator(".cluster-toggle").click()
    card = page.locator(f"#cluster-{cluster_id}")
    expect(card.locator(".cluster-body .members tbody tr").first).to_be_visible()
    return card


def _read_with_keeper(page, cluster_id: str, member: str):
    card = _open_cluster(page, cluster_id)
    card.get_by_role("button", name=f"Read {member} with the keeper").click()
    reading = card.locator(".reading")
    expect(reading.locator(".walk")).to_be_visible()
    return card, reading


def _share(line: str) -> int:
    return int(re.search(r"\((\d+)%\)", line).group(1))


def test_summary_counts_equal_audit_json(page, demo_report):
    _, report, data = demo_report
    page.goto(report.as_uri())
    summary = data["summary"]
    expected = {
        "inputs": summary["inputs"]["entries"],
        "read": summary["inputs"]["read"],
        "skipped": summary["inputs"]["skipped"],
        "empty": summary["inputs"]["empty"],
        "exact_groups": summary["exact_groups"],
        "clusters": summary["clusters"],
        "documents_in_clusters": summary["documents_in_clusters"],
        "retire_documents": summary["retire_documents"],
        "review_documents": summary["review_documents"],
    }
    for key, value in expected.items():
        shown = page.locator(f'[data-count="{key}"]').inner_text().replace(",", "")
        assert int(shown) == value, key
    assert page.locator(".cluster").count() == min(summary["clusters"], 25)
    assert "not a verdict" in page.locator(".caution").inner_text()
    assert "Nothing has been changed" in page.locator(".caution").inner_text()
    OUTPUT.mkdir(exist_ok=True)
    page.screenshot(path=str(OUTPUT / "report-summary.png"))
    assert page.problems == []


def test_a_pair_reads_in_order_with_what_each_text_alone_has(page, demo_report):
    result, report, _ = demo_report
    page.goto(report.as_uri())
    merged = next(c for c in result.clusters if c["keeper"] == "current/hr/new-starter-handbook.md")
    card = _open_cluster(page, merged["id"])
    assert card.locator(".graph svg circle").count() == merged["size"]
    card, reading = _read_with_keeper(page, merged["id"], "current/hr/onboarding-checklist.md")
    legend = reading.locator(".legend").inner_text()
    assert legend.index("onboarding-checklist") < legend.index("new-starter-handbook")
    # The checklist is almost wholly in the handbook; the handbook only partly in the checklist.
    a_line, b_line = reading.locator(".coverage").all_inner_texts()
    assert _share(a_line) >= 90 and _share(b_line) < 60
    # Nothing reworded here: the folded lines hold exactly the words said to be shared.
    shared = int(re.search(r"; ([\d,]+) \(\d+%\) lie inside", a_line).group(1).replace(",", ""))
    folded = reading.locator(".run-both .run-size").all_inner_texts()
    assert reading.locator(".run-reworded").count() == 0
    assert sum(int(size.split()[0].replace(",", "")) for size in folded) == shared
    assert reading.locator("svg.minimap").count() == 2
    assert reading.locator("svg.minimap rect[data-target]").count() >= 2
    assert reading.locator(".run-both").count() >= 1 and reading.locator(".run-only.run-b").count() >= 1
    # A shared run is one folded line until it is opened, and its text is the document's.
    toggle = reading.locator(".run-both .run-toggle").first
    assert toggle.get_attribute("aria-expanded") == "false"
    assert not reading.locator(".run-both .run-body").first.is_visible()
    toggle.click()
    assert toggle.get_attribute("aria-expanded") == "true"
    body = reading.locator(".run-both .run-body").first.inner_text()
    assert " ".join(body.split()) in " ".join(result.texts["current/hr/onboarding-checklist.md"].split())
    reading.scroll_into_view_if_needed()
    OUTPUT.mkdir(exist_ok=True)
    page.screenshot(path=str(OUTPUT / "report-reading.png"))
    assert page.problems == []


def test_reworded_stretches_show_both_wordings(page, demo_report):
    result, report, _ = demo_report
    page.goto(report.as_uri())
    plans = next(c for c in result.clusters if c["keeper"] == "current/billing/payment-plans.md")
    _, reading = _read_with_keeper(page, plans["id"], "drafts/payment-plans-v2.md")
    reworded = reading.locator(".run-reworded").filter(has_text="$75")
    expect(reworded).to_have_count(1)
    assert reworded.locator("mark.w-a").first.inner_text().strip() == "$75"
    assert reworded.locator("mark.w-b").first.inner_text().strip() == "$60"
    assert "reworded" in reading.locator(".walk-summary").inner_text()
    assert page.problems == []


def test_keyboard_reads_a_pair_and_steps_through_its_differences(page, demo_report):
    result, report, _ = demo_report
    page.goto(report.as_uri())
    plans = next(c for c in result.clusters if c["keeper"] == "current/billing/payment-plans.md")
    card = _open_cluster(page, plans["id"])
    card.get_by_role("button", name="Read drafts/payment-plans-v2.md with the keeper").focus()
    page.keyboard.press("Enter")
    expect(card.locator(".reading .walk")).to_be_visible()
    assert page.evaluate("document.activeElement.tagName") == "H4"
    card.get_by_role("button", name="Next difference").focus()
    page.keyboard.press("Enter")
    first = page.evaluate("[document.activeElement.className, document.activeElement.dataset.kind]")
    assert first[0].startswith("run ") and first[1] in ("reworded", "only", "moved")
    card.get_by_role("button", name="Next difference").focus()
    page.keyboard.press("Enter")
    second = page.evaluate("document.activeElement.textContent")
    assert second and page.evaluate("document.activeElement.dataset.kind") != "both"
    toggle = card.locator(".run-both .run-toggle").first
    toggle.focus()
    page.keyboard.press("Enter")
    assert toggle.get_attribute("aria-expanded") == "true"
    page.keyboard.press("Space")
    assert toggle.get_attribute("aria-expanded") == "false"
    assert page.problems == []


def test_filter_and_slider_change_what_is_shown(page, demo_report):
    result, report, _ = demo_report
    page.goto(report.as_uri())
    total = len(result.clusters)
    page.fill("#filter-text", "refund")
    assert page.locator(".cluster").count() == 1
    assert "1 of" in page.locator("#cluster-count").inner_text()
    page.fill("#filter-text", "")
    assert page.locator(".cluster").count() == total
    page.locator("#threshold").fill("0.99")
    shown = page.locator(".cluster").count()
    assert 0 < shown < total  # only the exact copies and near-exact pairs remain
    assert page.locator("#threshold-value").inner_text() == "0.99"
    assert page.problems == []


def test_decisions_export_and_survive_reload(page, demo_report):
    result, report, _ = demo_report
    page.goto(report.as_uri())
    first = page.locator(".cluster").first
    first.locator('.cluster-body > .decide input[value="not-duplicate"]').check()
    first.locator(".cluster-body > .decide textarea").fill("same template, different services")
    first.locator(".cluster-body > .decide textarea").dispatch_event("change")
    member = next(m["document_id"] for m in result.clusters[0]["members"] if m["role"] != "keeper")
    _, reading = _read_with_keeper(page, result.clusters[0]["id"], member)
    reading.locator('.decide input[value="confirmed-duplicate"]').check()
    page.reload()
    first = _open_cluster(page, result.clusters[0]["id"])
    assert first.locator('.cluster-body > .decide input[value="not-duplicate"]').is_checked()
    assert (
        first.locator(".cluster-body > .decide textarea").input_value() == "same template, different services"
    )
    with page.expect_download() as download:
        page.click("#export-decisions")
    exported = json.loads(Path(download.value.path()).read_text())
    assert exported == json.loads(page.locator("#decisions-json").input_value()) | {
        "exported_at": exported["exported_at"]
    }
    assert validate_decisions(exported) == []
    assert exported["audit_id"] == result.audit_id
    by_kind = {d["kind"]: d for d in exported["decisions"]}
    assert sorted(by_kind) == ["cluster", "pair"] and len(exported["decisions"]) == 2
    cluster, pair = by_kind["cluster"], by_kind["pair"]
    assert cluster["decision"] == "not-duplicate" and pair["decision"] == "confirmed-duplicate"
    members = {m["document_id"] for m in result.clusters[0]["members"]}
    assert {d["id"] for d in cluster["documents"]} == members
    assert {d["id"] for d in pair["documents"]} == {member, result.clusters[0]["keeper"]}
    hashes = {d["id"]: d["content_hash"] for d in result.documents}
    for d in cluster["documents"] + pair["documents"]:
        assert d["content_hash"] == hashes[d["id"]]
    assert page.problems == []


def test_keyboard_opens_a_cluster(page, demo_report):
    result, report, _ = demo_report
    page.goto(report.as_uri())
    last = result.clusters[-1]["id"]
    toggle = page.locator(f"#cluster-{last} .cluster-toggle")
    toggle.focus()
    page.keyboard.press("Enter")
    assert page.locator(f"#cluster-{last} .cluster-body").count() == 1
    assert page.locator(f"#cluster-{last} .cluster-toggle").get_attribute("aria-expanded") == "true"


HOSTILE = [
    "<script>window.__pwned = 1</script>",
    "</script><script>window.__pwned = 2</script>",
    '<img src=x onerror="window.__pwned = 3">',
    '<a href="javascript:window.__pwned = 4">click</a>',
    '<iframe src="javascript:window.__pwned = 5"></iframe>',
    "</script><img src=x onerror=alert(1)>",
    "<b><i>unbalanced <div",
    "\u202eright-to-left override\u202c",
]


def test_hostile_documents_run_no_script_and_still_render(page, tmp_path):
    body = (
        "The service desk resets passwords for every staff account after checking the caller's identity "
        "against the directory and the manager's approval. "
    ) * 3
    root = tmp_path / "hostile"
    root.mkdir()
    names = ["<script>x<\\script>.txt", 'onerror="alert(1)".txt', "javascript:alert(1).txt", "\u202etxt.txt"]
    for n, name in enumerate(names):
        (root / name).write_text(
            f"{HOSTILE[n % len(HOSTILE)]} {body} {' '.join(HOSTILE)} {'x' * 5000}\n", encoding="utf-8"
        )
    (root / "<iframe>.bin").write_bytes(b"\x00")
    result = dedup.audit([str(root)])
    assert len(result.clusters) == 1 and result.clusters[0]["size"] == len(names)
    report = Path(result.write(str(tmp_path / "out"))["report.html"])
    page.goto(report.as_uri())
    card = page.locator(".cluster").first
    card.locator("button.evidence-open").first.click()
    reading = card.locator(".reading")
    reading.get_by_role("button", name="Open all passages").click()
    assert page.evaluate("typeof window.__pwned") == "undefined"
    assert page.locator("iframe").count() == 0 and page.locator("main img").count() == 0
    text = page.locator("main").inner_text()
    for member in result.clusters[0]["members"]:
        assert member["document_id"] in text, member["document_id"]
    shown = reading.locator(".walk").inner_text()
    for snippet in HOSTILE[:6]:
        assert snippet in shown, snippet
    assert "<iframe>.bin" in page.locator("#inputs").inner_text()
    assert page.problems == []


def test_report_is_one_file_that_loads_nothing(demo_report):
    _, report, _ = demo_report
    page_text = report.read_text(encoding="utf-8")
    assert "<link" not in page_text and "src=" not in page_text.split('<script type="application/json"')[0]
    assert "default-src 'none'" in page_text
    assert shutil.which("chromium") or os.path.exists(CHROMIUM)


def test_the_page_reads_a_pair_without_passages(page, demo_without_passages, tmp_path):
    result = demo_without_passages
    report = tmp_path / "report.html"
    report.write_text(html.render_html(result), encoding="utf-8")
    page.goto(report.as_uri())
    plans = next(c for c in result.clusters if c["keeper"] == "current/billing/payment-plans.md")
    _, reading = _read_with_keeper(page, plans["id"], "drafts/payment-plans-v2.md")
    note = reading.locator(".note").inner_text()
    assert ("no passages" in note) if result.passages is None else ("No shared passage" in note)
    # Both texts follow each other whole, each as what only it has.
    assert reading.locator(".run-only.run-a").count() == 1 and reading.locator(".run-only.run-b").count() == 1
    assert reading.locator(".run-both").count() == 0
    assert all(
        " 0 of its" in line and "; 0 (0%) lie inside" in line
        for line in reading.locator(".coverage").all_inner_texts()
    )
    # An exact copy still reads as one text both hold.
    exact = next(c for c in result.clusters if c["kind"] == "exact")
    member = next(m["document_id"] for m in exact["members"] if m["role"] == "exact-copy")
    _, reading = _read_with_keeper(page, exact["id"], member)
    assert "same after normalization" in reading.locator(".note").inner_text()
    assert reading.locator(".run-both").count() == 1
    assert page.problems == []


def test_packed_texts_come_back_whole_in_the_browser(page, demo_audit, tmp_path, monkeypatch):
    monkeypatch.setattr(html, "MAX_TEXT_CHARS", 9_000)
    result = with_special_texts(demo_audit)
    report = Path(result.write(str(tmp_path / "out"))["report.html"])
    page.goto(report.as_uri())
    ids = [m["document_id"] for c in result.clusters for m in c["members"]]
    shown = page.evaluate("ids => Promise.all(ids.map(id => window.dedupReport.documentText(id)))", ids)
    for doc_id, text in zip(ids, shown):
        assert text == expected_text(result.texts[doc_id], 9_000), doc_id
    assert {expected_text(t, 9_000) for t in SPECIAL_TEXTS} <= set(shown)
    # A cut text says so where it is read.
    cut = next(
        c for c in result.clusters for m in c["members"] if len(result.texts[m["document_id"]]) > 9_000
    )
    card = _open_cluster(page, cut["id"])
    for button in card.locator("button.evidence-open").all():
        button.click()
        expect(card.locator(".reading .walk")).to_be_visible()
        if "first 9,000 of" in card.locator(".reading").inner_text():
            break
    else:
        pytest.fail("no reading view said its text was cut")
    assert page.problems == []


def test_a_cluster_of_2000_members_is_drawn_a_page_at_a_time(page, demo_audit, tmp_path):
    result = big_cluster_result(demo_audit, 2_000)
    report = Path(result.write(str(tmp_path / "out"))["report.html"])
    page.goto(report.as_uri())
    card = _open_cluster(page, "C00001")
    rows = card.locator(".members tbody tr")
    assert rows.count() == 50
    assert page.locator("#clusters tr").count() <= 60
    assert card.locator(".pairs table").count() == 0 and card.locator(".graph").count() == 0
    members = card.locator(".members")
    assert "rows 1–50 of 2,000" in members.locator(".pager").inner_text()
    members.get_by_role("button", name="Next rows").click()
    assert "rows 51–100 of 2,000" in members.locator(".pager").inner_text()
    assert rows.first.locator("td").first.inner_text() == "51"
    members.get_by_role("button", name="Size (bytes)").click()
    assert members.locator("th", has_text="Size").get_attribute("aria-sort") == "descending"
    largest = max(d["bytes"] for d in result.documents)
    assert rows.first.locator("td").nth(3).inner_text().replace(",", "") == str(largest)
    members.get_by_role("button", name="Role").click()
    assert rows.first.locator("td").nth(2).inner_text() == "keeper"
    members.get_by_role("searchbox").fill("01999")
    expect(rows).to_have_count(1)
    card.get_by_role("button", name="List the 1,999 pairs").click()
    pairs = card.locator(".pairs tbody tr")
    expect(pairs).to_have_count(50)
    pairs.first.get_by_role("button").click()
    expect(card.locator(".reading .run-both")).to_have_count(1)
    assert card.locator(".reading .run-only").count() == 2
    assert page.locator("#clusters tr").count() <= 110
    assert page.problems == []


def test_a_moved_passage_is_shown_at_its_place_in_each_text(page, tmp_path):
    paragraphs = [text for _, text in synthetic_documents(5, seed=7, doc_bytes=700)]
    root = tmp_path / "moved"
    root.mkdir()
    (root / "a.txt").write_text("\n\n".join(paragraphs), encoding="utf-8")
    order = [paragraphs[0], paragraphs[2], paragraphs[3], paragraphs[1], "A closing line only this copy has."]
    (root / "b.txt").write_text("\n\n".join(order), encoding="utf-8")
    result = dedup.audit([str(root)], dedup.AuditSettings(threshold=0.5))
    assert any(p["moved"] for p in result.passages)
    report = Path(result.write(str(tmp_path / "out"))["report.html"])
    page.goto(report.as_uri())
    card = page.locator(".cluster").first
    card.locator("button.evidence-open").first.click()
    reading = card.locator(".reading")
    moved = reading.locator(".run-moved")
    expect(moved).to_have_count(2)
    assert sorted(m.get_attribute("class").split()[-1] for m in moved.all()) == ["run-a", "run-b"]
    moved.first.get_by_role("button", name=re.compile("^Go to")).click()
    assert page.evaluate("document.activeElement.id") == moved.nth(1).get_attribute("id")
    assert "1 passage moved" in reading.locator(".walk-summary").inner_text()
    for line in reading.locator(".coverage").all_inner_texts():
        assert re.search(
            r"[\d,]+ of its [\d,]+ words \(\d+%\) read word for word in [AB]; [\d,]+ \(\d+%\) lie inside the passages",
            line,
        )
    closing = reading.locator(".run-only").filter(has_text="closing line")
    assert closing.locator(".doc-text").inner_text().startswith("A closing line")
    assert page.problems == []
