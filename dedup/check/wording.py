"""The words a class check puts before its findings, in check.json, the report and the help.

Matching text is evidence for a person to read, never a finding about a student; the
notice says so first, wherever the results are shown.
"""

from __future__ import annotations

__all__ = ["CAUTION", "CAUTION_TEXT", "STATUS_WORDS", "REASON_WORDS"]

CAUTION = (
    "Matching text is not proof of misconduct. Quotations, shared sources, the assignment's "
    "template, common phrases and permitted collaboration all produce matching text.",
    "A person decides: read every passage in context, and follow your institution's "
    "academic-integrity procedure before drawing any conclusion or contacting a student.",
    "This report contains students' work. Protect it as you protect the work itself: keep it "
    "where the submissions are kept and share it only with those entitled to see them.",
    "dedup only reads its inputs; no file has been changed.",
)
CAUTION_TEXT = " ".join(CAUTION)

STATUS_WORDS = {"counted": "counted", "excluded": "excluded"}
# What each reason for leaving a passage out means, for a reader.
REASON_WORDS = {
    "quoted": "inside quotation marks or a block quote",
    "reference list": "in the reference list",
    "template": "matches the assignment's template",
    "same source": "both submissions took it from the same reference",
    "short": "shorter than the passage length that counts",
}
