"""Text and title of an HTML or XHTML page, with a real parser (the standard library's).

What a reader of the page would call its text is kept: the ``<main>`` element when the
page has one, else the body. Scripts, styles and other non-text elements are always
dropped; navigation, headers, footers and asides (by element or by ARIA role) are
dropped too unless ``keep_all`` is set, because they repeat on every page of a site and
would make unrelated pages look alike. Block elements end lines so paragraphs stay
apart; character references are decoded by the parser.
"""

from __future__ import annotations

import re
from html.parser import HTMLParser

__all__ = ["html_to_text", "declared_charset", "HtmlError"]

# Never text: code, embedded images and formulas, fallback content for plugins.
_NOT_TEXT = frozenset(
    {"script", "style", "noscript", "template", "svg", "math", "iframe", "object", "canvas"}
)
# Page furniture that repeats across a site.
_FURNITURE = frozenset({"nav", "header", "footer", "aside"})
_FURNITURE_ROLES = frozenset({"navigation", "banner", "contentinfo", "complementary", "search"})
_BLOCK = frozenset(
    [
        "p",
        "div",
        "br",
        "li",
        "ul",
        "ol",
        "h1",
        "h2",
        "h3",
        "h4",
        "h5",
        "h6",
        "tr",
        "table",
        "section",
        "article",
        "blockquote",
        "pre",
        "hr",
        "dd",
        "dt",
        "dl",
        "main",
        "nav",
        "header",
        "footer",
        "aside",
        "figure",
        "figcaption",
        "td",
        "th",
        "caption",
        "address",
        "details",
        "summary",
        "form",
        "fieldset",
        "legend",
        "option",
        "title",
        "body",
    ]
)
_WHITESPACE = re.compile(r"\s+")
# The HTML standard's prescan looks for a declared charset in the first 1024 bytes; a
# little more tolerates long <head> preambles.
_CHARSET_SCAN = 4096
_META_CHARSET = re.compile(rb"""<meta[^>]{0,500}?charset\s*=\s*["']?\s*([A-Za-z0-9._:-]{1,40})""", re.I)
_XML_ENCODING = re.compile(rb"""^\s*<\?xml[^>]{0,200}?encoding\s*=\s*["']([A-Za-z0-9._:-]{1,40})["']""")


class HtmlError(ValueError):
    """The page cannot be parsed; the message says where."""


class _TextExtractor(HTMLParser):
    def __init__(self, keep_all: bool) -> None:
        super().__init__(convert_charrefs=True)
        self.keep_all = keep_all
        self.parts: list[str] = []
        self.main_parts: list[str] = []
        self.title_parts: list[str] = []
        self.title_done = False
        # Open elements that change what is kept, innermost last: (tag, kind).
        self._open: list[tuple[str, str]] = []
        self._dropping = 0
        self._in_main = 0
        self._in_pre = 0
        self._in_head = False
        self._in_title = False

    # Which elements change what is kept -------------------------------------------------
    def _kind(self, tag: str, attrs: list[tuple[str, str | None]]) -> str:
        if tag in _NOT_TEXT:
            return "drop"
        role = next((value or "" for name, value in attrs if name == "role"), "").strip().lower()
        if not self.keep_all and (tag in _FURNITURE or role in _FURNITURE_ROLES):
            return "drop"
        if tag == "main" or role == "main":
            return "main"
        if tag == "pre":
            return "pre"
        return ""

    def _enter(self, kind: str) -> None:
        if kind == "drop":
            self._dropping += 1
        elif kind == "main":
            self._in_main += 1
        elif kind == "pre":
            self._in_pre += 1

    def _leave(self, kind: str) -> None:
        if kind == "drop":
            self._dropping -= 1
        elif kind == "main":
            self._in_main -= 1
        elif kind == "pre":
            self._in_pre -= 1

    def _emit(self, text: str) -> None:
        if self._dropping or self._in_head:
            return
        self.parts.append(text)
        if self._in_main:
            self.main_parts.append(text)

    # Parser callbacks -------------------------------------------------------------------
    def handle_starttag(self, tag: str, attrs) -> None:
        if tag == "head":
            self._in_head = True
        elif tag == "body":
            # A page that never closes <head> still has its body read.
            self._in_head = False
        if tag == "title" and not self._dropping and not self.title_done:
            self._in_title = True
        kind = self._kind(tag, attrs)
        if tag in _BLOCK:
            self._emit("\n")
        if kind:
            self._open.append((tag, kind))
            self._enter(kind)

    def handle_startendtag(self, tag: str, attrs) -> None:
        if tag in _BLOCK:
            self._emit("\n")

    def handle_endtag(self, tag: str) -> None:
        if tag == "head":
            self._in_head = False
        if tag == "title" and self._in_title:
            self._in_title = False
            self.title_done = True
        # Close the innermost open element of this name, and any left open inside it.
        for i in range(len(self._open) - 1, -1, -1):
            if self._open[i][0] == tag:
                for _, kind in self._open[i:]:
                    self._leave(kind)
                del self._open[i:]
                break
        if tag in _BLOCK:
            self._emit("\n")

    def handle_data(self, data: str) -> None:
        if self._in_title:
            self.title_parts.append(data)
            return
        self._emit(data if self._in_pre else _WHITESPACE.sub(" ", data))


def _tidy(parts: list[str]) -> str:
    lines: list[str] = []
    for line in "".join(parts).split("\n"):
        line = line.strip()
        if line or (lines and lines[-1]):
            lines.append(line)
    while lines and not lines[-1]:
        lines.pop()
    return "\n".join(lines)


def html_to_text(markup: str, *, keep_all: bool = False) -> tuple[str, str]:
    """``(text, title)`` of an HTML document.

    Parameters
    ----------
    markup : str
    keep_all : bool
        Keep navigation, headers, footers and asides, and the whole body even when the
        page has a ``<main>`` element.

    Raises
    ------
    HtmlError
        When the parser gives up on the markup.

    >>> html_to_text("<html><head><title>T</title><script>x()</script></head>"
    ...              "<body><nav>Home</nav><p>a &amp; b</p></body></html>")
    ('a & b', 'T')
    """
    parser = _TextExtractor(keep_all)
    try:
        parser.feed(markup)
        parser.close()
    except (AssertionError, ValueError, IndexError) as err:
        # The standard parser is lenient; these come from declarations it cannot place.
        line, column = parser.getpos()
        raise HtmlError(f"the HTML parser stopped at line {line}, column {column + 1}: {err}") from None
    main = _tidy(parser.main_parts) if not keep_all else ""
    text = main or _tidy(parser.parts)
    return text, " ".join("".join(parser.title_parts).split())


def declared_charset(data: bytes) -> str | None:
    """The charset a page declares in ``<meta charset>`` or its XML declaration, if any."""
    head = data[:_CHARSET_SCAN]
    found = _XML_ENCODING.match(head) or _META_CHARSET.search(head)
    return found.group(1).decode("ascii") if found else None
