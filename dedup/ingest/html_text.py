"""Text and title of an HTML page, with a real parser (the standard library's).

Scripts, styles and other non-text elements are dropped; block elements end lines so
paragraphs stay apart; character references are decoded by the parser.
"""

from __future__ import annotations

from html.parser import HTMLParser

__all__ = ["html_to_text"]

_DROP = {"script", "style", "noscript", "template", "svg", "math", "head"}
_BLOCK = {
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
}


class _TextExtractor(HTMLParser):
    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.parts: list[str] = []
        self.title_parts: list[str] = []
        self._drop_depth = 0
        self._in_title = False

    def handle_starttag(self, tag: str, attrs) -> None:
        if tag == "title":
            self._in_title = True
        elif tag == "body":
            # A page that never closes <head> still has its body read.
            self._drop_depth = 0
        elif tag in _DROP:
            self._drop_depth += 1
        if tag in _BLOCK:
            self.parts.append("\n")

    def handle_startendtag(self, tag: str, attrs) -> None:
        if tag in _BLOCK:
            self.parts.append("\n")

    def handle_endtag(self, tag: str) -> None:
        if tag == "title":
            self._in_title = False
        elif tag in _DROP and self._drop_depth > 0:
            self._drop_depth -= 1
        if tag in _BLOCK:
            self.parts.append("\n")

    def handle_data(self, data: str) -> None:
        if self._in_title:
            self.title_parts.append(data)
        elif self._drop_depth == 0:
            self.parts.append(data)


def html_to_text(markup: str) -> tuple[str, str]:
    """``(text, title)`` of an HTML document.

    >>> html_to_text("<html><head><title>T</title><script>x()</script></head><body><p>a &amp; b</p></body></html>")
    ('\\na & b\\n', 'T')
    """
    parser = _TextExtractor()
    parser.feed(markup)
    parser.close()
    return "".join(parser.parts), " ".join("".join(parser.title_parts).split())
