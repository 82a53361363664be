"""Word-processor documents: ``.docx`` (python-docx, from the extra) and ``.odt`` (zip and XML).

Both are zip packages, so their declared expansion is checked against the archive
limits before any part is read. Paragraphs, headings, list items and table cells are
kept in document order; page headers, footers and comments are left out, like a
page's navigation.
"""

from __future__ import annotations

import io
import zipfile
from collections.abc import Iterator
from xml.etree import ElementTree

from .archives import read_bounded
from .budget import ExpansionBudget
from .document import Item, Outcome
from .markup import first_line_title
from .optional import load
from .options import ReadOptions

__all__ = ["read_docx", "read_odt"]

_TEXT = "{urn:oasis:names:tc:opendocument:xmlns:text:1.0}"
_OFFICE = "{urn:oasis:names:tc:opendocument:xmlns:office:1.0}"
_DC = "{http://purl.org/dc/elements/1.1/}"
_MAX_SPACES = 1000


def _package_problem(package: zipfile.ZipFile, size: int, opts: ReadOptions) -> str:
    """Why a zip package must not be opened (it would expand too far), or ``""``."""
    budget = ExpansionBudget(size, opts)
    declared = sum(info.file_size for info in package.infolist())
    return "" if declared <= budget.remaining() else f"archive limit: {budget.why()}"


def _docx_table_lines(table) -> Iterator[str]:
    for row in table.rows:
        cells, seen = [], set()
        for cell in row.cells:
            # A merged cell is returned once per grid column it spans.
            if id(cell._tc) not in seen:
                seen.add(id(cell._tc))
                cells.append(cell.text.strip())
        yield "\t".join(c for c in cells if c)


def read_docx(data: bytes, item: Item, opts: ReadOptions) -> Iterator[Outcome]:
    """One document from a ``.docx`` file."""
    docx = load("docx", ".docx")
    with zipfile.ZipFile(io.BytesIO(data)) as package:
        problem = _package_problem(package, len(data), opts)
    if problem:
        yield None, item.entry("refused", problem)
        return
    document = docx.Document(io.BytesIO(data))
    lines: list[str] = []
    title = (document.core_properties.title or "").strip()
    for block in document.iter_inner_content():
        if hasattr(block, "rows"):
            lines.extend(_docx_table_lines(block))
            continue
        text = block.text
        lines.append(text)
        style = getattr(block.style, "name", "") or ""
        if not title and text.strip() and (style.startswith("Heading") or style == "Title"):
            title = text.strip()
    body = "\n".join(lines).strip()
    yield item.document(body, title=(title or first_line_title(body))[:200])


def _odt_inline(element: ElementTree.Element, out: list[str]) -> None:
    """Text of a paragraph or heading, with ODF's encoded spaces, tabs and breaks."""
    if element.text:
        out.append(element.text)
    for child in element:
        tag = child.tag
        if tag == _TEXT + "s":
            try:
                count = int(child.get(_TEXT + "c", "1"))
            except ValueError:
                count = 1
            out.append(" " * max(1, min(count, _MAX_SPACES)))
        elif tag == _TEXT + "tab":
            out.append("\t")
        elif tag == _TEXT + "line-break":
            out.append("\n")
        elif tag in (_TEXT + "note", _OFFICE + "annotation", _TEXT + "note-citation"):
            pass  # notes are their own paragraphs (found by the walk); comments are not text
        else:
            _odt_inline(child, out)
        if child.tail:
            out.append(child.tail)


def _odt_title(package: zipfile.ZipFile, opts: ReadOptions) -> str:
    if "meta.xml" not in package.namelist():
        return ""
    try:
        with package.open("meta.xml") as stream:
            meta = ElementTree.fromstring(read_bounded(stream, opts.max_file_bytes))
    except Exception:  # a broken meta.xml costs only the title
        return ""
    found = meta.find(f".//{_DC}title")
    return " ".join((found.text or "").split()) if found is not None else ""


def read_odt(data: bytes, item: Item, opts: ReadOptions) -> Iterator[Outcome]:
    """One document from an OpenDocument text (``.odt``)."""
    with zipfile.ZipFile(io.BytesIO(data)) as package:
        problem = _package_problem(package, len(data), opts)
        names = set(package.namelist())
        if problem:
            yield None, item.entry("refused", problem)
            return
        if "content.xml" not in names:
            yield None, item.entry("skipped", "not an OpenDocument text: it has no content.xml")
            return
        if "META-INF/manifest.xml" in names:
            with package.open("META-INF/manifest.xml") as stream:
                if b"encryption-data" in read_bounded(stream, opts.max_file_bytes):
                    yield None, item.entry("skipped", "encrypted document: needs a password")
                    return
        with package.open("content.xml") as stream:
            content = read_bounded(stream, opts.max_file_bytes)
        title = _odt_title(package, opts)
    root = ElementTree.fromstring(content)
    lines = []
    for element in root.iter():
        if element.tag not in (_TEXT + "h", _TEXT + "p"):
            continue
        parts: list[str] = []
        _odt_inline(element, parts)
        line = "".join(parts)
        lines.append(line)
        if not title and element.tag == _TEXT + "h" and line.strip():
            title = line.strip()
    body = "\n".join(lines).strip()
    yield item.document(body, title=(title or first_line_title(body))[:200])
