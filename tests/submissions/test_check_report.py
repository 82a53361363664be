"""check.html: escaped text, a strict policy, and what a reader sees in Chromium."""

from __future__ import annotations

import os
import re
from pathlib import Path

import pytest

from dedup.check import CheckSettings, check
from dedup.check.html import reading_segments

HOSTILE = '<script>alert("x")</script> <img src=x onerror=alert(1)> & </blockquote> "quoted" words'
OUTPUT = Path(__file__).resolve().parents[2] / "test-output"


@pytest.fixture(scope="module")
def demo_report(demo_class, tmp_path_factory):
    out = tmp_path_factory.mktemp("demo-check")
    result = check(
        [str(demo_class / "submissions")],
        against=[str(demo_class / "references")],
        settings=CheckSettings(templates=(str(demo_class / "assignment.txt"),)),
    )
    return result, Path(result.write(str(out))["check.html"])


def test_document_text_is_escaped_and_nothing_loads_from_outside(tmp_path):
    shared = "a long shared stretch of words that two invented students both wrote in their answers today "
    subs = [("<b>odd id</b>", HOSTILE + " " + shared * 2), ("plain", shared * 2 + " end")]
    html = (Path(check(subs).write(str(tmp_path))["check.html"])).read_text(encoding="utf-8")
    body = html.split("<body>", 1)[1].rsplit("<script>", 1)[0]
    assert "<script>alert" not in body and "<img src=x" not in body and "<b>odd id</b>" not in body
    assert (
        "&lt;script&gt;alert(" in body
        and "&lt;img src=x onerror=alert(1)&gt; &amp; &lt;/blockquote&gt;" in body
    )
    assert "&lt;b&gt;odd id&lt;/b&gt;" in body
    csp = re.search(r'http-equiv="Content-Security-Policy" content="([^"]+)"', html).group(1)
    assert "default-src 'none'" in csp and "'unsafe-inline'" not in csp and "sha256-" in csp
    assert not re.search(r"(src|href)=\"(https?:)?//", html)


def test_reading_segments_mark_each_stretch_once():
    segments = reading_segments("one two three four", [(4, 13, "R"), (8, 18, "S")], [])
    assert "".join(s["text"] for s in segments) == "one two three four"
    assert [(s["text"], s["sources"]) for s in segments] == [
        ("one ", []), ("two ", ["R"]), ("three", ["R", "S"]), (" four", ["S"]),
    ]  # fmt: skip
    assert [s["tag"] for s in segments] == [[], [], ["R", "S"], ["S"]]


def test_the_first_screen_carries_the_caution(demo_report):
    html = demo_report[1].read_text(encoding="utf-8")
    first = html.index('id="caution"')
    assert first < html.index('id="overview"')
    for word in ("plagiarism", "cheating", "keeper", "retire", "duplicate"):
        assert word not in html.lower(), word


playwright_api = pytest.importorskip("playwright.sync_api")
CHROMIUM = "/usr/bin/chromium"
FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking", "--no-first-run"]


@pytest.fixture(scope="module")
def page():
    if not os.path.exists(CHROMIUM):
        pytest.skip(f"{CHROMIUM} not installed")
    with playwright_api.sync_playwright() as p:
        browser = p.chromium.launch(executable_path=CHROMIUM, args=FLAGS)
        context = browser.new_context(viewport={"width": 1280, "height": 1000})
        pg = context.new_page()
        pg.problems = []
        pg.on("console", lambda m: pg.problems.append(m.text) if m.type in ("error", "warning") else None)
        pg.on("pageerror", lambda e: pg.problems.append(str(e)))
        pg.on("request", lambda r: None if r.url.startswith("file:") else pg.problems.append(r.url))
        yield pg
        browser.close()


def test_a_reader_opens_the_class_then_a_submission(demo_report, page):
    result, path = demo_report
    page.goto(path.as_uri())
    expect = playwright_api.expect
    expect(page.locator("#caution")).to_be_visible()
    rows = page.locator(".class-table tbody tr")
    expect(rows).to_have_count(len(result.submissions))
    # Sorted by the share of text found elsewhere.
    first = rows.nth(0).locator("td.name").inner_text()
    assert first == max(result.submissions, key=lambda r: r["share_matched"])["submission"]
    page.fill("#filter", "gwen")
    expect(page.locator(".class-table tbody tr:visible")).to_have_count(1)
    page.fill("#filter", "")
    page.locator(".class-table a", has_text="ada-finch.txt").click()
    article = page.locator("article.submission:target")
    expect(article).to_be_visible()
    expect(page.locator("#overview")).to_be_hidden()
    marked = article.locator(".reading mark.match")
    assert marked.count() >= 1
    assert marked.first.inner_text().startswith("The rule that made the difference was simple.")
    expect(article.locator(".reading .tag").first).to_contain_text("hollis-2019-shared-harvests.txt")
    OUTPUT.mkdir(exist_ok=True)
    page.screenshot(path=str(OUTPUT / "check-submission.png"), full_page=True)
    page.locator("article.submission:target .back a").click()
    expect(page.locator("#overview")).to_be_visible()
    assert page.problems == []
