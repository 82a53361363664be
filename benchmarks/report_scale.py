"""How the HTML report scales: size per 1,000 clusters and time to open in Chromium.

Builds a synthetic corpus of N base documents (~1 KB each, from the seeded synthetic source
in benchmarks.corpus), each with one lightly edited copy, so the audit finds N clusters;
then writes the report and opens it in headless Chromium (Debian's), timing until the first
page of clusters is drawn, and the time to open a cluster's evidence.

Run: ``python -m benchmarks.report_scale [--clusters 10000]``
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

from benchmarks.corpus import synthetic_documents


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--clusters", type=int, default=10_000)
    parser.add_argument("--doc-bytes", type=int, default=1000)
    args = parser.parse_args(argv)

    from playwright.sync_api import sync_playwright

    import dedup

    with tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp) / "corpus"
        root.mkdir()
        for n, (_, text) in enumerate(synthetic_documents(args.clusters, seed=11, doc_bytes=args.doc_bytes)):
            (root / f"{n:06d}-a.txt").write_text(text, encoding="utf-8")
            words = text.split()
            words[len(words) // 2] = "changed"
            (root / f"{n:06d}-b.txt").write_text(" ".join(words), encoding="utf-8")
        start = time.perf_counter()
        result = dedup.audit([str(root)], dedup.AuditSettings(threshold=0.8))
        audit_s = time.perf_counter() - start
        start = time.perf_counter()
        paths = result.write(str(Path(tmp) / "out"))
        write_s = time.perf_counter() - start
        report = Path(paths["report.html"])
        size_mb = report.stat().st_size / 1e6
        with sync_playwright() as p:
            browser = p.chromium.launch(
                executable_path="/usr/bin/chromium",
                args=["--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking"],
            )
            page = browser.new_page()
            start = time.perf_counter()
            page.goto(report.as_uri())
            page.wait_for_selector(".cluster")
            open_s = time.perf_counter() - start
            start = time.perf_counter()
            page.locator("button.evidence-open").first.click()
            page.wait_for_selector(".evidence mark")
            evidence_s = time.perf_counter() - start
            start = time.perf_counter()
            page.fill("#filter-text", "000123")
            page.wait_for_function("document.querySelectorAll('.cluster').length === 1")
            filter_s = time.perf_counter() - start
            browser.close()
    clusters = len(result.clusters)
    print(f"clusters: {clusters:,} ({2 * args.clusters:,} documents of ~{args.doc_bytes} bytes)")
    print(f"audit {audit_s:.1f} s, writing outputs (report included) {write_s:.1f} s")
    print(f"report.html: {size_mb:.1f} MB, {size_mb / clusters * 1000:.2f} MB per 1,000 clusters")
    print(
        f"Chromium: first page drawn {open_s:.2f} s, evidence opened {evidence_s:.2f} s, path filter {filter_s:.2f} s"
    )
    return 0


if __name__ == "__main__":
    sys.exit(main())
