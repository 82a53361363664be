"""How the HTML report scales: its size, the time to write it, and the time to open it in Chromium.

Three scenarios (``--scenario``, default all):

* ``clusters``: N synthetic base documents (~1 KB each, from the seeded synthetic source in
  benchmarks.corpus), each with one lightly edited copy, so the audit finds N clusters
  (default 10,000);
* ``manpages``: a man-pages-sized audit, real Debian man pages of this machine with planted
  edited copies (``--families`` bases, default 1,000, each with one copy per edit rate, 5
  rates: about 5,000 clustered documents and 10,000 pairs at containment 0.8); synthetic
  8 KB documents when the machine has too few man pages;
* ``big``: one cluster of ``--members`` documents (default 13,560), built directly as an
  audit result around a small real audit (the audit itself is not what is measured here).

The audit finds the shared passages (its align step). Then the report is written and opened
in headless Chromium (Debian's), timing the first screen (cluster list drawn), the first
cluster's tables, reading its first pair, filtering the list by path, opening the largest
cluster and sorting its members.

Run: ``python -m benchmarks.report_scale [--scenario manpages] [--clusters 10000]``
"""

from __future__ import annotations

import argparse
import dataclasses
import hashlib
import sys
import tempfile
import time
from pathlib import Path

from benchmarks.corpus import available_manpages, make_planted_corpus, synthetic_documents

CHROMIUM = "/usr/bin/chromium"
FLAGS = [
    "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
    "--disable-background-networking", "--disable-component-update", "--disable-sync",
]  # fmt: skip


def big_cluster_result(template, members: int, seed: int = 5):
    """``template`` (an `AuditResult`) holding instead one cluster of ``members`` documents:
    each a shared ~1.5 KB body with a line of its own before it, so every member's one
    passage with the keeper is the body. Passages included, in the report's layout."""
    (_, body), *_ = synthetic_documents(1, seed=seed, doc_bytes=1500)
    ids = [f"big/{n:05d}.txt" for n in range(members)]
    texts = {d: f"Note {n}: only this note says {n * 7919 % 10007}.\n\n{body}" for n, d in enumerate(ids)}
    documents = [
        {"id": d, "title": d, "bytes": len(t.encode()), "characters": len(t), "status": "read",
         "content_hash": hashlib.blake2b(t.encode(), digest_size=16).hexdigest()}
        for d, t in texts.items()
    ]  # fmt: skip
    keeper = ids[0]
    rows, pairs, passages = [_big_member(keeper, keeper, None)], [], []
    for n, d in enumerate(ids[1:], 1):
        score = 0.8 + (n * 37 % 200) / 1000
        rows.append(_big_member(d, keeper, score))
        pairs.append({"left": d, "right": keeper, "kind": "near", "deciding_score": score, "jaccard": score,
                      "containment_left_in_right": score, "containment_right_in_left": score, "cosine": score,
                      "shared_shingles": 200, "left_covered": 0.9, "right_covered": 0.9})  # fmt: skip
        a, b = len(texts[d]) - len(body), len(texts[keeper]) - len(body)
        passages.append({"left": d, "right": keeper, "left_start": a, "left_end": len(texts[d]), "right_start": b,
                         "right_end": len(texts[keeper]), "words": len(body.split()), "similarity": 1.0,
                         "moved": False})  # fmt: skip
    cluster = {"id": "C00001", "keeper": keeper, "size": members, "kind": "near", "retire_documents": members - 1,
               "retire_bytes": sum(x["bytes"] for x in documents[1:]), "lowest_similarity_to_keeper": 0.8,
               "members": rows}  # fmt: skip
    result = dataclasses.replace(
        template, documents=documents, clusters=[cluster], pairs=pairs, texts=texts, unique_runs=[]
    )
    result.passages = sorted(passages, key=lambda p: (p["left"], p["right"], p["left_start"]))
    return result


def _big_member(doc_id: str, keeper: str, score: float | None) -> dict:
    sim = None if score is None else dict.fromkeys(
        ("jaccard", "containment_in_keeper", "keeper_containment", "cosine"), score
    )  # fmt: skip
    return {"document_id": doc_id, "role": "keeper" if score is None else "duplicate", "similarity_to_keeper": sim,
            "deciding_score": score, "linked_through": None, "action": "keep" if score is None else "retire",
            "in_favour_of": None if score is None else keeper, "cluster_id": "C00001",
            "reason": "keeper" if score is None else f"near-duplicate of {keeper}"}  # fmt: skip


def _pair_corpus(root: Path, n: int, doc_bytes: int) -> None:
    for k, (_, text) in enumerate(synthetic_documents(n, seed=11, doc_bytes=doc_bytes)):
        (root / f"{k:06d}-a.txt").write_text(text, encoding="utf-8")
        words = text.split()
        words[len(words) // 2] = "changed"
        (root / f"{k:06d}-b.txt").write_text(" ".join(words), encoding="utf-8")


def build(scenario: str, args, tmp: Path):
    """The audit result of a scenario, and what to say about how it was made."""
    import dedup

    if scenario == "clusters":
        root = tmp / "corpus"
        root.mkdir()
        _pair_corpus(root, args.clusters, args.doc_bytes)
        about = f"{2 * args.clusters:,} synthetic documents of ~{args.doc_bytes} bytes in pairs"
        return dedup.audit([str(root)], dedup.AuditSettings(threshold=0.8)), about
    if scenario == "manpages":
        source = "manpages" if available_manpages(args.families) else "synthetic"
        rates = (0.01, 0.02, 0.03, 0.04, 0.05)
        make_planted_corpus(tmp / "planted", args.families, args.families, seed=3, edit_rates=rates,
                            source=source, doc_bytes=8000, structural_prob=0.2)  # fmt: skip
        about = f"{args.families:,} {source} bases, each with {len(rates)} edited copies, containment 0.8"
        settings = dedup.AuditSettings(threshold=0.8, measure="containment")
        return dedup.audit([str(tmp / "planted")], settings), about
    root = tmp / "pair"
    root.mkdir()
    _pair_corpus(root, 1, 1000)
    template = dedup.audit([str(root)], dedup.AuditSettings(threshold=0.8))
    return big_cluster_result(template, args.members), f"one cluster of {args.members:,} documents (built)"


def measure(report: Path, biggest: str) -> dict[str, float]:
    """Seconds, in headless Chromium, from navigation to each step drawn."""
    from playwright.sync_api import sync_playwright

    times: dict[str, float] = {}
    with sync_playwright() as p:
        browser = p.chromium.launch(executable_path=CHROMIUM, args=FLAGS)
        page = browser.new_page(viewport={"width": 1280, "height": 1000})
        start = time.perf_counter()
        page.goto(report.as_uri(), wait_until="commit")
        page.wait_for_selector(".cluster")
        times["first screen"] = time.perf_counter() - start
        page.wait_for_selector(".cluster-body table")
        times["first cluster's tables"] = time.perf_counter() - start
        start = time.perf_counter()
        page.locator(".cluster-body button.evidence-open").first.click()
        page.wait_for_selector(".walk .run")
        times["pair read"] = time.perf_counter() - start
        start = time.perf_counter()
        page.fill("#filter-text", biggest)
        page.locator(".cluster").first.wait_for()  # a script of our own would break the page's CSP
        times["path filter"] = time.perf_counter() - start
        card = page.locator(".cluster").first
        start = time.perf_counter()
        if card.locator(".cluster-body").count() == 0:
            card.locator(".cluster-toggle").click()
        page.wait_for_selector(".cluster-body .members tbody tr")
        times["largest cluster opened"] = time.perf_counter() - start
        start = time.perf_counter()
        page.locator(".members th button.sort", has_text="Size").click()
        page.wait_for_selector('.members th[aria-sort="descending"]')
        times["its members sorted by size"] = time.perf_counter() - start
        times["member rows in the page"] = page.locator(".members tbody tr").count()
        browser.close()
    return times


def run(scenario: str, args) -> None:
    """Build, write and open one scenario's report; print its figures."""
    from dedup.report.html import iter_html

    with tempfile.TemporaryDirectory() as tmp:
        start = time.perf_counter()
        result, about = build(scenario, args, Path(tmp))
        audit_s = time.perf_counter() - start
        start = time.perf_counter()
        paths = result.write(str(Path(tmp) / "out"))
        write_s = time.perf_counter() - start
        start = time.perf_counter()
        for _ in iter_html(result):
            pass
        report_s = time.perf_counter() - start
        report = Path(paths["report.html"])
        size_mb = report.stat().st_size / 1e6
        largest = max(result.clusters, key=lambda c: c["size"])
        times = measure(report, largest["keeper"])
    clustered = sum(c["size"] for c in result.clusters)
    pairs = len({(p["left"], p["right"]) for p in result.passages})
    print(f"[{scenario}] {about}")
    print(
        f"  clusters {len(result.clusters):,}, clustered documents {clustered:,}, pairs {len(result.pairs):,}"
    )
    print(f"  shared passages {len(result.passages):,} in {pairs:,} pairs")
    print(
        f"  audit (or build) {audit_s:.1f} s; writing all outputs {write_s:.1f} s, of which report.html {report_s:.1f} s"
    )
    print(
        f"  report.html {size_mb:.1f} MB ({size_mb / max(1, clustered) * 1000:.2f} MB per 1,000 clustered documents)"
    )
    print("  Chromium: " + ", ".join(f"{k} {v:.2f} s" for k, v in times.items() if "rows" not in k))
    print(
        f"  largest cluster: {largest['size']:,} members, {times['member rows in the page']:.0f} member rows in the page"
    )


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--scenario", choices=["clusters", "manpages", "big", "all"], default="all")
    parser.add_argument("--clusters", type=int, default=10_000)
    parser.add_argument("--doc-bytes", type=int, default=1000)
    parser.add_argument("--families", type=int, default=1000)
    parser.add_argument("--members", type=int, default=13_560)
    args = parser.parse_args(argv)
    for scenario in ("manpages", "clusters", "big") if args.scenario == "all" else (args.scenario,):
        run(scenario, args)
    return 0


if __name__ == "__main__":
    sys.exit(main())
