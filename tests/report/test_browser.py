"""The HTML report in a real browser: Debian's Chromium driven by Playwright.

Screenshots of the summary and of an evidence view are saved under test-output/.
"""

from __future__ import annotations

import json
import os
import shutil
from pathlib import Path

import pytest

import dedup
from dedup import AuditSettings
from dedup.report.decisions import validate_decisions

playwright_api = pytest.importorskip("playwright.sync_api")

CHROMIUM = "/usr/bin/chromium"
FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking"]
OUTPUT = Path(__file__).resolve().parents[2] / "test-output"
DEMO_SETTINGS = AuditSettings(
    measure="containment", threshold=0.9, prefer=("current/**",), id_field="id", text_fields=("body",)
)

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
def demo_report(demo_path, tmp_path_factory):
    out = tmp_path_factory.mktemp("demo-report")
    result = dedup.audit([str(demo_path)], DEMO_SETTINGS)
    paths = result.write(str(out))
    return result, Path(paths["report.html"]), json.loads(Path(paths["audit.json"]).read_text())


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
    OUTPUT.mkdir(exist_ok=True)
    page.screenshot(path=str(OUTPUT / "report-summary.png"))
    assert page.problems == []


def test_cluster_opens_with_highlighted_evidence(page, demo_report):
    result, report, _ = demo_report
    page.goto(report.as_uri())
    merged = next(c for c in result.clusters if c["keeper"] == "current/hr/new-starter-handbook.md")
    card = page.locator(f"#cluster-{merged['id']}")
    if card.locator(".cluster-body").count() == 0:
        card.locator(".cluster-toggle").click()
        card = page.locator(f"#cluster-{merged['id']}")
    assert card.locator(".graph svg circle").count() == merged["size"]
    card.locator("button.evidence-open").first.click()
    evidence = card.locator(".evidence")
    assert evidence.count() == 1
    marks = evidence.locator("mark")
    assert marks.count() >= 2
    # The source article is almost wholly contained in the merged one; the merged one only partly.
    coverages = evidence.locator(".coverage").all_inner_texts()
    assert coverages[0].startswith(("9", "100")) and not coverages[1].startswith("100")
    evidence.scroll_into_view_if_needed()
    page.screenshot(path=str(OUTPUT / "report-evidence.png"))
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
    first.locator('input[value="not-duplicate"]').first.check()
    first.locator("textarea").first.fill("same template, different services")
    first.locator("textarea").first.dispatch_event("change")
    page.reload()
    first = page.locator(".cluster").first
    assert first.locator('input[value="not-duplicate"]').first.is_checked()
    assert first.locator("textarea").first.input_value() == "same template, different services"
    with page.expect_download() as download:
        page.click("#export-decisions")
    exported = json.loads(Path(download.value.path()).read_text())
    assert exported == json.loads(page.locator("#decisions-json").input_value()) | {
        "exported_at": exported["exported_at"]
    }
    assert validate_decisions(exported) == []
    assert exported["audit_id"] == result.audit_id
    (decision,) = exported["decisions"]
    assert decision["decision"] == "not-duplicate" and decision["kind"] == "cluster"
    members = {m["document_id"] for m in result.clusters[0]["members"]}
    assert {d["id"] for d in decision["documents"]} == members
    hashes = {d["id"]: d["content_hash"] for d in result.documents}
    assert all(d["content_hash"] == hashes[d["id"]] for d in decision["documents"])
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
    assert page.evaluate("typeof window.__pwned") == "undefined"
    assert page.locator("iframe").count() == 0 and page.locator("main img").count() == 0
    text = page.locator("main").inner_text()
    for name in names:
        assert name in text, name
    evidence_text = card.locator(".evidence").inner_text()
    for snippet in HOSTILE[:5]:
        assert snippet in evidence_text
    assert "<iframe>.bin" in page.locator("#inputs").inner_text()
    assert page.problems == []


def test_report_is_one_file_that_loads_nothing(demo_report):
    _, report, _ = demo_report
    html = report.read_text(encoding="utf-8")
    assert "<link" not in html and "src=" not in html.split('<script type="application/json"')[0]
    assert "default-src 'none'" in html
    assert shutil.which("chromium") or os.path.exists(CHROMIUM)
