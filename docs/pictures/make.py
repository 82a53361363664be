"""Draw the README's pictures of the demo report with Debian's Chromium (no network).

    python docs/pictures/make.py

Audits the bundled demo with the README's demo command, opens the report and saves
``report-summary.png`` (the first screen) and ``report-reading.png`` (a near-copy read
with its keeper) next to this file.
"""

from __future__ import annotations

import subprocess
import sys
import tempfile
from pathlib import Path

from playwright.sync_api import expect, sync_playwright

HERE = Path(__file__).resolve().parent
ROOT = HERE.parents[1]
CHROMIUM = "/usr/bin/chromium"
DEMO = [
    "fixtures/demo/kb", "--measure", "containment", "--threshold", "0.9",
    "--prefer", "current/**", "--id-field", "id", "--text-field", "body", "--quiet",
]  # fmt: skip
KEEPER, MEMBER = "current/billing/payment-plans.md", "drafts/payment-plans-v2.md"


def main() -> None:
    with tempfile.TemporaryDirectory() as out:
        subprocess.run([sys.executable, "-m", "dedup", "audit", *DEMO, "--out", out], cwd=ROOT, check=True)
        with sync_playwright() as p:
            browser = p.chromium.launch(executable_path=CHROMIUM, args=["--no-sandbox"])
            page = browser.new_page(viewport={"width": 1200, "height": 820})
            page.goto((Path(out) / "report.html").as_uri())
            page.screenshot(path=str(HERE / "report-summary.png"))
            card = page.locator(".cluster").filter(has_text=KEEPER).first
            card.locator(".cluster-toggle").click()
            card.get_by_role("button", name=f"Read {MEMBER} with the keeper").click()
            reading = card.locator(".reading")
            expect(reading.locator(".walk")).to_be_visible()
            reading.scroll_into_view_if_needed()
            reading.screenshot(path=str(HERE / "report-reading.png"))
            browser.close()


if __name__ == "__main__":
    main()
