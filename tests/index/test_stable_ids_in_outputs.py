"""Stable cluster ids reach the files a scheduled audit is tracked with: clusters.csv and the report."""

from __future__ import annotations

import csv
from pathlib import Path

import dedup
from dedup import AuditSettings

TEXT = (
    "Water meters are read every quarter by a field officer; when a reading cannot be taken the bill is "
    "estimated from the same quarter of the previous year and corrected at the next actual reading."
)


def test_clusters_csv_and_report_carry_the_stable_ids(tmp_path):
    folder = tmp_path / "kb"
    folder.mkdir()
    (folder / "meters.txt").write_text(TEXT, encoding="utf-8")
    (folder / "meters-copy.txt").write_text(TEXT + " Ask the office.", encoding="utf-8")
    (folder / "other.txt").write_text(
        "Opening hours of the front office change in December.", encoding="utf-8"
    )
    index = dedup.Index(tmp_path / "kb.index")
    result = index.audit([folder], AuditSettings(threshold=0.5), accept=True)
    written = result.write(str(tmp_path / "out"))
    with open(written["clusters.csv"], newline="", encoding="utf-8") as handle:
        rows = list(csv.DictReader(handle))
    stable = {c["id"]: c["stable_id"] for c in result.clusters}
    assert rows and all(stable[row["cluster_id"]] == row["stable_id"] for row in rows)
    assert all(row["stable_id"].startswith("S-") for row in rows)
    without_index = dedup.audit([str(folder)], AuditSettings(threshold=0.5)).write(str(tmp_path / "plain"))
    with open(without_index["clusters.csv"], newline="", encoding="utf-8") as handle:
        assert {row["stable_id"] for row in csv.DictReader(handle)} == {""}


def test_the_report_names_a_new_cluster_by_its_stable_id(tmp_path):
    folder = tmp_path / "kb"
    folder.mkdir()
    (folder / "meters.txt").write_text(TEXT, encoding="utf-8")
    index = dedup.Index(tmp_path / "kb.index")
    index.audit([folder], AuditSettings(threshold=0.5), accept=True)
    (folder / "meters-copy.txt").write_text(TEXT + " Ask the office.", encoding="utf-8")
    result = index.audit([folder], AuditSettings(threshold=0.5))
    (new,) = [c for c in result.delta["clusters"] if c["status"] == "new"]
    report = Path(result.write(str(tmp_path / "out"))["report.html"]).read_text(encoding="utf-8")
    since = report[report.index('id="since"') : report.index('id="clusters"')]
    assert f"<code>{new['stable_id']}</code>" in since
