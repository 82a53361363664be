"""PDF text layers, with pypdf (from the ``dedup[docs]`` extra).

A PDF made by scanning paper has pages but no text layer: it is recorded as skipped
with "no text layer — scanned?" so a person knows it needs text recognition first. A
page that cannot be decoded costs only that page; the entry says how many were lost.
"""

from __future__ import annotations

import contextlib
import io
import logging
import warnings
from collections.abc import Iterator

from .document import Item, Outcome
from .markup import first_line_title
from .optional import load
from .options import ReadOptions

__all__ = ["read_pdf"]


@contextlib.contextmanager
def _quiet():
    """Keep pypdf's warnings about damaged files off the user's terminal while reading."""
    logger = logging.getLogger("pypdf")
    level = logger.level
    logger.setLevel(logging.ERROR + 10)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            yield
    finally:
        logger.setLevel(level)


def _title(reader) -> str:
    try:
        metadata = reader.metadata
        title = metadata.title if metadata is not None else ""
    except Exception:  # damaged metadata costs only the title
        return ""
    return " ".join(str(title or "").split())[:200]


def read_pdf(data: bytes, item: Item, opts: ReadOptions) -> Iterator[Outcome]:
    """One document from the text layer of a PDF."""
    pypdf = load("pypdf", ".pdf")
    with _quiet():
        reader = pypdf.PdfReader(io.BytesIO(data), strict=False)
        if reader.is_encrypted:
            try:
                opened = reader.decrypt("")
            except Exception as err:  # e.g. AES without a cryptography package
                yield None, item.entry("skipped", f"encrypted PDF: cannot be opened ({err})")
                return
            if not opened:
                yield None, item.entry("skipped", "encrypted PDF: needs a password")
                return
        pages = len(reader.pages)
        if pages == 0:
            yield None, item.entry("skipped", "PDF has no pages")
            return
        texts, failed, last_error = [], 0, ""
        for page in reader.pages:
            try:
                texts.append(page.extract_text() or "")
            except Exception as err:  # one damaged page, not the whole file
                failed += 1
                last_error = " ".join(str(err).split())[:200] or type(err).__name__
        title = _title(reader)
    body = "\n\n".join(t.strip() for t in texts if t.strip())
    if failed == pages:
        yield None, item.entry("skipped", f"no page of the PDF can be read ({last_error})")
        return
    if not body:
        yield (
            None,
            item.entry("skipped", f"no text layer — scanned? ({pages} page{'s' if pages != 1 else ''})"),
        )
        return
    note = f"{failed} of {pages} pages could not be read ({last_error})" if failed else ""
    yield item.document(body, title=title or first_line_title(body), reason=note)
