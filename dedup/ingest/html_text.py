"""Text and title of an HTML or XHTML page, read by a tokenizer of our own that runs in linear time.

What a reader of the page would call its text is kept: the ``<main>`` element when the
page has one, else the body. Scripts, styles and other non-text elements are always
dropped; navigation, headers, footers and asides (by element or by ARIA role) are
dropped too unless ``keep_all`` is set, because they repeat on every page of a site and
would make unrelated pages look alike. Block elements end lines so paragraphs stay
apart; character references are decoded.

Why not the standard library's parser: on markup that never closes a tag
(``'<a ' * 33334``, ``'x<' * n``, ``'<!--' * n``) it searches for the tag's end from
every ``<`` to the end of the text again, so 100 KB took minutes. The tokenizer here
follows the tokenization of the HTML Living Standard
(https://html.spec.whatwg.org/multipage/parsing.html#tokenization) as far as text
extraction needs it: a tag, comment or declaration that is never closed runs to the end
of the text, as a browser reads it, and no character is examined more than a bounded
number of times. What it examines is counted against a `WorkBudget`: the count is the
evidence of linear time (see ``tests/ingest/test_html.py``), and the budget turns any
mistake into one skipped file instead of a stalled audit.
"""

from __future__ import annotations

import html
import re

from .budget import WorkBudget

__all__ = ["html_to_text", "html_work", "declared_charset", "HtmlError"]

# Never text: code, embedded images and formulas, fallback content for plugins.
_NOT_TEXT = frozenset(
    {"script", "style", "noscript", "template", "svg", "math", "iframe", "object", "canvas"}
)
# Page furniture that repeats across a site.
_FURNITURE = frozenset({"nav", "header", "footer", "aside"})
_FURNITURE_ROLES = frozenset({"navigation", "banner", "contentinfo", "complementary", "search"})
_BLOCK = frozenset(
    {
        *("p", "div", "br", "li", "ul", "ol", "h1", "h2", "h3", "h4", "h5", "h6", "tr", "table"),
        *("section", "article", "blockquote", "pre", "hr", "dd", "dt", "dl", "main", "nav"),
        *("header", "footer", "aside", "figure", "figcaption", "td", "th", "caption", "address"),
        *("details", "summary", "form", "fieldset", "legend", "option", "title", "body"),
    }
)
_WHITESPACE = re.compile(r"\s+")
# Raw text: no tags inside, up to the element's own end tag (the elements the standard
# library's parser treats so; the standard names a few more, all dropped here anyway).
_RAW_TEXT = frozenset({"script", "style"})
# The standard's ASCII white space, and runs of the characters that make up a tag. Each
# pattern is one character class, so a match examines exactly what it consumes plus the
# character that stops it: no backtracking.
_SPACE_CHARS = " \t\n\f\r"
_SPACE = re.compile(r"[ \t\n\f\r]*")
_GAP = re.compile(r"[ \t\n\f\r/]*")
_TAG_NAME = re.compile(r"[^ \t\n\f\r/>]*")
_ATTR_NAME = re.compile(r"[^ \t\n\f\r/>][^ \t\n\f\r/>=]*")
_UNQUOTED = re.compile(r"[^ \t\n\f\r>]*")
# The HTML standard's prescan looks for a declared charset in the first 1024 bytes; a
# little more tolerates long <head> preambles.
_CHARSET_SCAN = 4096
_META_CHARSET = re.compile(rb"""<meta[^>]{0,500}?charset\s*=\s*["']?\s*([A-Za-z0-9._:-]{1,40})""", re.I)
_XML_ENCODING = re.compile(rb"""^\s*<\?xml[^>]{0,200}?encoding\s*=\s*["']([A-Za-z0-9._:-]{1,40})["']""")


class HtmlError(ValueError):
    """Kept for callers that catch it: the tokenizer reads any text and never raises it."""


class _TextExtractor:
    """Keeps the text a reader sees, told of tags and text by `_Tokenizer`.

    ``steps`` counts the open elements examined when end tags close them (each open
    element is examined at most twice: once found, once closed).
    """

    def __init__(self, keep_all: bool) -> None:
        self.keep_all = keep_all
        self.parts: list[str] = []
        self.main_parts: list[str] = []
        self.title_parts: list[str] = []
        self.title_done = False
        # Open elements that change what is kept, innermost last: (tag, kind), and how
        # many of each tag are open, so that an end tag of none of them costs nothing.
        self._open: list[tuple[str, str]] = []
        self._open_count: dict[str, int] = {}
        self._dropping = 0
        self._in_main = 0
        self._in_pre = 0
        self._in_head = False
        self._in_title = False
        self.steps = 0

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

    def _count(self, kind: str, step: int) -> None:
        if kind == "drop":
            self._dropping += step
        elif kind == "main":
            self._in_main += step
        elif kind == "pre":
            self._in_pre += step

    def _emit(self, text: str) -> None:
        if self._dropping or self._in_head:
            return
        self.parts.append(text)
        if self._in_main:
            self.main_parts.append(text)

    # Tokens -----------------------------------------------------------------------------
    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
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
            self._open_count[tag] = self._open_count.get(tag, 0) + 1
            self._count(kind, 1)

    def handle_startendtag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        if tag in _BLOCK:
            self._emit("\n")

    def handle_endtag(self, tag: str) -> None:
        if tag == "head":
            self._in_head = False
        if tag == "title" and self._in_title:
            self._in_title = False
            self.title_done = True
        # Close the innermost open element of this name, and any left open inside it.
        if self._open_count.get(tag):
            i = len(self._open) - 1
            while self._open[i][0] != tag:
                i -= 1
            self.steps += 2 * (len(self._open) - i)
            for name, kind in self._open[i:]:
                self._count(kind, -1)
                self._open_count[name] -= 1
            del self._open[i:]
        if tag in _BLOCK:
            self._emit("\n")

    def handle_data(self, data: str) -> None:
        if self._in_title:
            self.title_parts.append(data)
            return
        self._emit(data if self._in_pre else _WHITESPACE.sub(" ", data))


class _Tokenizer:
    """Splits markup into text and tags for a `_TextExtractor`, in one pass.

    Every scan starts where the last one stopped and the position only moves forward;
    ``work`` is the number of characters examined (each scan's extent, plus the one
    that stopped it) and is charged to the budget as it grows.
    """

    def __init__(self, markup: str, sink: _TextExtractor, budget: WorkBudget | None) -> None:
        self.s, self.n, self.sink, self.budget = markup, len(markup), sink, budget
        self.work = 0

    # Scanning primitives, each counting what it examines --------------------------------
    def _charge(self, steps: int) -> None:
        self.work += steps
        if self.budget is not None:
            self.budget.spend(steps)

    def _find(self, needle: str, start: int) -> int:
        found = self.s.find(needle, start)
        self._charge((self.n if found < 0 else found + len(needle)) - start + 1)
        return found

    def _run(self, pattern: re.Pattern[str], start: int) -> int:
        """End of the run of ``pattern``'s characters at ``start`` (one class: never fails)."""
        end = pattern.match(self.s, start).end()
        self._charge(end - start + 1)
        return end

    # The main loop ----------------------------------------------------------------------
    def run(self) -> None:
        s, n, i = self.s, self.n, 0
        while i < n:
            j = self._find("<", i)
            if j < 0:
                j = n
            if j > i:
                self._text(s[i:j])
            if j >= n:
                break
            i = self._markup(j)

    def _text(self, text: str) -> None:
        self.sink.handle_data(html.unescape(text) if "&" in text else text)

    def _markup(self, i: int) -> int:
        """Read what starts with the ``<`` at ``i``; returns where the text goes on."""
        s = self.s
        after = s[i + 1 : i + 2]
        if after == "!":
            if s.startswith("<!--", i):
                return self._comment(i + 4)
            return self._bogus_comment(i + 2)  # <!DOCTYPE …>, <![CDATA[…]]> outside SVG/MathML
        if after == "?":
            return self._bogus_comment(i + 2)  # <?xml …?>
        if after == "/":
            return self._end_tag(i + 2)
        if after.isascii() and after.isalpha():
            return self._start_tag(i + 1)
        self._text("<")  # a "<" that starts nothing is text
        return i + 1

    def _comment(self, start: int) -> int:
        # "<!-->" and "<!--->" are complete (empty) comments; unclosed, it runs to the end.
        for short in (">", "->"):
            if self.s.startswith(short, start):
                return start + len(short)
        end = self._find("-->", start)
        return self.n if end < 0 else end + 3

    def _bogus_comment(self, start: int) -> int:
        end = self._find(">", start)
        return self.n if end < 0 else end + 1

    def _end_tag(self, start: int) -> int:
        s = self.s
        first = s[start : start + 1]
        if not first:
            self._text("</")  # "</" at the very end is text
            return self.n
        if first == ">":
            return start + 1  # "</>" is nothing
        if not (first.isascii() and first.isalpha()):
            return self._bogus_comment(start)
        name_end = self._run(_TAG_NAME, start)
        end = self._attributes(name_end, None)
        if end < 0:
            return self.n  # an end tag the text ends in is dropped, as the standard says
        self.sink.handle_endtag(s[start:name_end].lower())
        return end

    def _start_tag(self, start: int) -> int:
        s = self.s
        name_end = self._run(_TAG_NAME, start)
        attrs: list[tuple[str, str | None]] = []
        end = self._attributes(name_end, attrs)
        if end < 0:
            return self.n  # a tag the text ends in is dropped, as the standard says
        tag = s[start:name_end].lower()
        if tag in _RAW_TEXT:
            # Always a start tag: "<script/>" still opens raw text in a browser.
            self.sink.handle_starttag(tag, attrs)
            return self._raw_text(tag, end)
        if s[end - 2] == "/" and end - 2 >= name_end:
            self.sink.handle_startendtag(tag, attrs)
        else:
            self.sink.handle_starttag(tag, attrs)
        return end

    def _attributes(self, i: int, attrs: list[tuple[str, str | None]] | None) -> int:
        """Read attributes from ``i`` to the tag's ``>``; the position after it, or -1 when
        the text ends first. Values in quotes may hold ``>``; ``attrs`` (None: not wanted)
        receives ``(name, value)`` with the name in lower case and references decoded."""
        s, n = self.s, self.n
        while True:
            i = self._run(_GAP, i)
            if i >= n:
                return -1
            if s[i] == ">":
                return i + 1
            name_end = self._run(_ATTR_NAME, i)
            name = s[i:name_end]
            i = self._run(_SPACE, name_end)
            value: str | None = None
            if s[i : i + 1] == "=":
                i = self._run(_SPACE, i + 1)
                quote = s[i : i + 1]
                if quote in ("'", '"'):
                    close = self._find(quote, i + 1)
                    if close < 0:
                        return -1
                    value, i = s[i + 1 : close], close + 1
                else:
                    value_end = self._run(_UNQUOTED, i)
                    value, i = s[i:value_end], value_end
            if attrs is not None:
                if value is not None and "&" in value:
                    value = html.unescape(value)
                attrs.append((name.lower(), value))

    def _raw_text(self, tag: str, start: int) -> int:
        """Text up to ``</tag`` followed by white space, ``/`` or ``>``; then that end tag."""
        s, n = self.s, self.n
        at = start
        while True:
            at = self._find("</", at)
            if at < 0:
                self.sink.handle_data(s[start:])
                return n
            name_end = at + 2 + len(tag)
            self._charge(len(tag) + 1)
            if name_end < n and s[at + 2 : name_end].lower() == tag and s[name_end] in _SPACE_CHARS + "/>":
                self.sink.handle_data(s[start:at])
                return self._end_tag(at + 2)
            at += 2


def _tidy(parts: list[str]) -> str:
    lines: list[str] = []
    for line in "".join(parts).split("\n"):
        line = line.strip()
        if line or (lines and lines[-1]):
            lines.append(line)
    while lines and not lines[-1]:
        lines.pop()
    return "\n".join(lines)


def _extract(markup: str, keep_all: bool, budget: WorkBudget | None) -> tuple[_TextExtractor, int]:
    """The extractor after the whole markup, and the work it took (characters examined,
    tokens and open elements looked at)."""
    sink = _TextExtractor(keep_all)
    tokenizer = _Tokenizer(markup, sink, budget)
    tokenizer.run()
    if budget is not None:
        budget.spend(sink.steps)
    return sink, tokenizer.work + sink.steps


def html_to_text(markup: str, *, keep_all: bool = False, budget: WorkBudget | None = None) -> tuple[str, str]:
    """``(text, title)`` of an HTML document.

    Parameters
    ----------
    markup : str
    keep_all : bool
        Keep navigation, headers, footers and asides, and the whole body even when the
        page has a ``<main>`` element.
    budget : WorkBudget, optional
        Counts the steps taken; reading stops with `dedup.ingest.budget.TooCostly` past it.

    Cost: linear in the length of ``markup`` (each character is examined a bounded
    number of times; `html_work` counts them).

    >>> html_to_text("<html><head><title>T</title><script>x()</script></head>"
    ...              "<body><nav>Home</nav><p>a &amp; b</p></body></html>")
    ('a & b', 'T')
    """
    parser, _ = _extract(markup, keep_all, budget)
    main = _tidy(parser.main_parts) if not keep_all else ""
    text = main or _tidy(parser.parts)
    return text, " ".join("".join(parser.title_parts).split())


def html_work(markup: str, *, keep_all: bool = False) -> int:
    """Steps `html_to_text` takes on ``markup``: characters examined, plus open elements
    looked at when end tags close them. It grows in proportion to the length of the
    markup, whatever the markup; the tests hold it to that."""
    return _extract(markup, keep_all, None)[1]


def declared_charset(data: bytes) -> str | None:
    """The charset a page declares in ``<meta charset>`` or its XML declaration, if any."""
    head = data[:_CHARSET_SCAN]
    found = _XML_ENCODING.match(head) or _META_CHARSET.search(head)
    return found.group(1).decode("ascii") if found else None
