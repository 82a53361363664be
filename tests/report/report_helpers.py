"""Helpers of the report tests: texts that are hard to carry, and word lists to compare passages by."""

from __future__ import annotations

import dataclasses
import re
import unicodedata

# Texts that are hard to carry: characters beyond U+FFFF (two UTF-16 units) across piece
# boundaries, scripts without spaces, right-to-left overrides, combining marks, line and
# paragraph separators, markup, a NUL, an empty text, a lone surrogate.
SPECIAL_TEXTS = [
    "plain words of ascii text. " * 700,
    "emoji \U0001f600 and \U0001d518\U0001d52b\U0001d526\U0001d520\U0001d52c\U0001d521\U0001d522 letters "
    * 500,
    "中文文本，日本語のテキスト、한국어 텍스트。" * 400,
    "e\u0301 combining, \u202eright-to-left override\u202c, line\u2028separator\u2029 NUL \x00 end",
    "</script><img src=x onerror=alert(1)> <!-- <script>alert(2)</script> & &amp; \\u003c",
    "",
    "before a lone surrogate \ud800 after it",
    "\U0001f600" * 5000,
]

_WORD = re.compile(r"[^\W_]+")


def words_of(text: str) -> list[str]:
    """The words the audit compares: runs of letters and digits, each normalized on its own
    with NFKC and case folding (a reference written out plainly)."""
    return [
        part
        for match in _WORD.finditer(text)
        for part in _WORD.findall(unicodedata.normalize("NFKC", match.group()).casefold())
    ]


def expected_text(text: str, limit: int) -> str:
    """What the report carries of ``text``: cut at ``limit`` code points, a lone surrogate as "?"."""
    return text[:limit].encode("utf-8", "replace").decode("utf-8")


def with_special_texts(result):
    """``result`` with the texts of its clustered documents replaced, in turn, by `SPECIAL_TEXTS`
    (and no passages, which would point into the old texts)."""
    ids = [m["document_id"] for c in result.clusters for m in c["members"]]
    texts = {doc_id: SPECIAL_TEXTS[n % len(SPECIAL_TEXTS)] for n, doc_id in enumerate(ids)}
    return dataclasses.replace(result, texts=texts, passages=[], unique_runs=[])
