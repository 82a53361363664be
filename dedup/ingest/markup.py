"""Lightweight markup (Markdown, reStructuredText, AsciiDoc) reduced to its text.

Headings, list items, table cells, link texts and code stay as text; markers, link
targets, directives, attributes and comments go, so that two copies of one article
compare on their words and not on how they were marked up.

The reduction works line by line. Inline patterns are bounded by a character class
that excludes their closing delimiter and by a length, and lines longer than
`_INLINE_MAX` (data, not prose) keep their inline markup, so no pattern can backtrack
across a long hostile line.
"""

from __future__ import annotations

import re
from collections.abc import Callable, Iterator

__all__ = ["reduce_markup", "MARKUP_FORMATS", "first_line_title"]

_TITLE_CHARS = 200
_TITLE_SCAN = 8192
# White space as str.strip and str.isspace see it (both and re use Py_UNICODE_ISSPACE).
_NOT_SPACE = re.compile(r"\S")
# Lines longer than this keep their inline markup: no prose line is that long, and it
# bounds the work of every inline pattern on a hostile line (a megabyte of "[a:" ...).
_INLINE_MAX = 20_000


def first_line_title(text: str) -> str:
    """The first non-blank line (without ``#`` markers), as a fallback title.

    Lines end where `str.splitlines` ends them; every such line end is also white space,
    so the first non-blank line starts where the leading white space ends, and only that
    line needs cutting out (no copy of the text before or after it).
    """
    first = _NOT_SPACE.search(text, 0, _TITLE_SCAN)
    if first is None:
        return ""
    # "\n" is by far the most common line end: cut there first, then split the short rest.
    start = first.start()
    stop = text.find("\n", start, _TITLE_SCAN)
    line = text[start : stop if stop >= 0 else _TITLE_SCAN].splitlines()[0]
    return line.strip().lstrip("#").strip()[:_TITLE_CHARS]


def _lines(text: str) -> Iterator[str]:
    # str.splitlines would also split on form feeds and U+2028, which are text here.
    for line in text.split("\n"):
        yield line[:-1] if line.endswith("\r") else line


def _tidy(lines: list[str]) -> str:
    """Join lines, dropping trailing spaces and runs of blank lines."""
    out: list[str] = []
    for line in lines:
        line = line.rstrip()
        if line or (out and out[-1]):
            out.append(line)
    while out and not out[-1]:
        out.pop()
    return "\n".join(out)


# -- Markdown ----------------------------------------------------------------------------
_MD_FENCE = re.compile(r"^\s{0,3}(`{3,}|~{3,})")
_MD_ATX = re.compile(r"^\s{0,3}#{1,6}(?:\s+|$)")
_MD_ATX_CLOSE = re.compile(r"\s+#+\s*$")
_MD_RULE = re.compile(r"^\s{0,3}(?:(?:-\s*){3,}|(?:\*\s*){3,}|(?:_\s*){3,}|=+\s*)$")
_MD_QUOTE = re.compile(r"^\s{0,3}(?:>\s?)+")
_MD_LIST = re.compile(r"^\s*(?:[-*+]|\d{1,9}[.)])\s+(?:\[[ xX]\]\s+)?")
_MD_TABLE_RULE = re.compile(r"^\s*\|?\s*:?-{2,}:?\s*(?:\|\s*:?-{2,}:?\s*)*\|?\s*$")
_MD_REF_DEF = re.compile(r"^\s{0,3}\[[^\[\]\n]{1,300}\]:\s+\S")
_MD_INLINE = (
    (re.compile(r"!\[([^\[\]\n]{0,300})\]\([^()\n]{0,500}\)"), r"\1", "!"),
    (re.compile(r"\[([^\[\]\n]{0,300})\]\([^()\n]{0,500}\)"), r"\1", "["),
    (re.compile(r"\[([^\[\]\n]{1,300})\]\[[^\[\]\n]{0,100}\]"), r"\1", "["),
    (re.compile(r"<((?:https?|mailto|ftp):[^<>\s]{1,500})>"), r"\1", "<"),
    (re.compile(r"</?[A-Za-z][A-Za-z0-9-]{0,30}(?:\s[^<>\n]{0,300})?/?>"), "", "<"),
    (re.compile(r"`+([^`\n]{1,1000})`+"), r"\1", "`"),
    (re.compile(r"(\*\*|__)(?=[^\s*_])([^*_\n]{1,1000})(?<=\S)\1"), r"\2", "*_"),
    (re.compile(r"(?<![\w*])\*(?=[^\s*])([^*\n]{1,1000})(?<=\S)\*(?![\w*])"), r"\1", "*"),
    (re.compile(r"(?<![\w_])_(?=[^\s_])([^_\n]{1,1000})(?<=\S)_(?![\w_])"), r"\1", "_"),
    (re.compile(r"~~(?=\S)([^~\n]{1,1000})(?<=\S)~~"), r"\1", "~"),
)
# A backslash-escaped character is literal text: it is set aside (as a private-use
# character of plane 15) before the inline patterns run and put back after.
_MD_ESCAPE = re.compile(r"\\([\\`*_{}\[\]()#+\-.!|>~<])")
_MD_ESCAPED = re.compile("[\U000f0000-\U000f007f]")


def _inline(line: str, patterns: tuple) -> str:
    if len(line) > _INLINE_MAX:
        return line
    for pattern, replacement, trigger in patterns:
        # Most lines hold none of a pattern's characters; a substring test is far cheaper.
        if any(ch in line for ch in trigger):
            line = pattern.sub(replacement, line)
    return line


def _front_matter_end(lines: list[str]) -> int:
    """Index after a leading YAML front-matter block (``---`` ... ``---``), or 0."""
    if not lines or lines[0].strip() != "---":
        return 0
    for i in range(1, min(len(lines), 200)):
        if lines[i].strip() in ("---", "..."):
            return i + 1
    return 0


def _markdown(text: str, keep_quote_marks: bool = False) -> tuple[str, str]:
    lines = list(_lines(text))
    start = _front_matter_end(lines)
    title = ""
    for line in lines[1 : max(start - 1, 1)]:
        if line.startswith("title:"):
            title = line[6:].strip().strip("\"'")
    out: list[str] = []
    fence = ""
    for line in lines[start:]:
        opening = _MD_FENCE.match(line)
        if fence:
            if opening and opening.group(1)[0] == fence[0] and len(opening.group(1)) >= len(fence):
                fence = ""
            else:
                out.append(line)  # code is text too: copies share it
            continue
        if opening:
            fence = opening.group(1)
            continue
        if _MD_RULE.match(line):
            # A setext underline makes the line above a heading.
            if not title and out and out[-1].strip() and line.strip()[0] in "=-":
                title = out[-1].strip()
            continue
        if _MD_TABLE_RULE.match(line) or _MD_REF_DEF.match(line):
            continue
        quote = _MD_QUOTE.match(line)
        if quote:
            line = line[quote.end() :]
        heading = _MD_ATX.match(line)
        line = _MD_ATX_CLOSE.sub("", line[heading.end() :]) if heading else _MD_LIST.sub("", line)
        if "|" in line and line.count("|") >= 2:
            line = " ".join(cell.strip() for cell in line.strip().strip("|").split("|"))
        if "\\" in line:
            line = _MD_ESCAPE.sub(lambda m: chr(0xF0000 + ord(m.group(1))), line)
            line = _MD_ESCAPED.sub(lambda m: chr(ord(m.group()) - 0xF0000), _inline(line, _MD_INLINE))
        else:
            line = _inline(line, _MD_INLINE)
        if heading and not title:
            title = line.strip()
        out.append("> " + line if quote and keep_quote_marks else line)
    body = _tidy(out)
    return body, (title or first_line_title(body))[:_TITLE_CHARS]


# -- reStructuredText --------------------------------------------------------------------
_RST_ADORN = re.compile(r"""^([=\-`:.'"~^_*+#<>!$%&(),/;?@\[\]\\{|}])\1{2,}\s*$""")
_RST_SIMPLE_TABLE = re.compile(r"^\s*=+(?:\s+=+)+\s*$")
_RST_GRID = re.compile(r"^\s*\+[-=+:]+\+\s*$")
_RST_DIRECTIVE = re.compile(r"^(\s*)\.\.\s+(?:\|[^|\n]{1,100}\|\s+)?([\w:+-]{1,60})::(.*)$")
_RST_TARGET = re.compile(r"^\s*\.\.\s+(?:_[^:\n]{0,300}:|__\s).*$")
_RST_FOOTNOTE = re.compile(r"^\s*\.\.\s+\[[^\]\n]{1,50}\]\s*")
_RST_COMMENT = re.compile(r"^\s*\.\.(?:\s.*)?$")
_RST_OPTION = re.compile(r"^\s+:[\w -]{1,60}:(?:\s.*)?$")
_RST_LIST = re.compile(r"^\s*(?:[-*+\u2022]|#\.|\d{1,9}[.)]|\(?[a-zA-Z0-9]{1,3}\))\s+")
_RST_ADMONITIONS = frozenset(
    [
        "note",
        "warning",
        "tip",
        "important",
        "caution",
        "danger",
        "attention",
        "hint",
        "error",
        "admonition",
        "topic",
        "sidebar",
        "rubric",
        "seealso",
        "versionadded",
        "versionchanged",
        "deprecated",
    ]
)
_RST_INLINE = (
    (re.compile(r":(?:[\w+-]{1,30}:){1,3}`([^`<\n]{1,500}?)\s*<[^<>`\n]{1,500}>`"), r"\1", "`"),
    (re.compile(r":(?:[\w+-]{1,30}:){1,3}`([^`\n]{1,500})`"), r"\1", "`"),
    (re.compile(r"`([^`<\n]{1,500}?)\s*<[^<>`\n]{1,500}>`__?"), r"\1", "`"),
    (re.compile(r"``([^`\n]{1,1000})``"), r"\1", "`"),
    (re.compile(r"`([^`\n]{1,500})`__?"), r"\1", "`"),
    (re.compile(r"`([^`\n]{1,500})`"), r"\1", "`"),
    (re.compile(r"\*\*(?=\S)([^*\n]{1,1000})(?<=\S)\*\*"), r"\1", "*"),
    (re.compile(r"(?<![\w*])\*(?=[^\s*])([^*\n]{1,1000})(?<=\S)\*(?![\w*])"), r"\1", "*"),
    (re.compile(r"\s?\[(?:\d{1,5}|#[\w-]{0,50}|\*)\]_"), "", "]"),
    (re.compile(r"\|([^|\s][^|\n]{0,100})\|(?:__?)?"), r"\1", "|"),
    # A reference ``word_``; not the underscores of ``__init__``.
    (re.compile(r"(?<=[^\W_])_(?=[\s.,;:!?)]|$)"), "", "_"),
)


def _rst(text: str) -> tuple[str, str]:
    lines = list(_lines(text))
    out: list[str] = []
    title = ""
    in_directive = False
    for i, line in enumerate(lines):
        if in_directive and _RST_OPTION.match(line):
            continue
        in_directive = False
        if _RST_ADORN.match(line) or _RST_SIMPLE_TABLE.match(line) or _RST_GRID.match(line):
            # An underline marks the line before it as a section title.
            if not title and i > 0 and out and out[-1].strip():
                title = out[-1].strip()
            continue
        directive = _RST_DIRECTIVE.match(line)
        if directive:
            in_directive = True
            name = directive.group(2).split(":")[-1].lower()
            argument = directive.group(3).strip()
            if name in _RST_ADMONITIONS and argument:
                out.append(directive.group(1) + _inline(argument, _RST_INLINE))
            continue
        if _RST_TARGET.match(line):
            continue
        footnote = _RST_FOOTNOTE.match(line)
        if footnote:
            line = line[footnote.end() :]
        elif _RST_COMMENT.match(line):
            continue
        line = _RST_LIST.sub("", line)
        if line.rstrip().endswith("::"):
            line = line.rstrip()[:-2].rstrip()
            line = line + ":" if line else ""
        if _RST_GRID.match(line) is None and line.lstrip().startswith("|") and line.rstrip().endswith("|"):
            line = " ".join(cell.strip() for cell in line.strip().strip("|").split("|"))
        out.append(_inline(line, _RST_INLINE))
    body = _tidy(out)
    return body, (title or first_line_title(body))[:_TITLE_CHARS]


# -- AsciiDoc ----------------------------------------------------------------------------
_AD_HEADING = re.compile(r"^(?:={1,6}|#{1,6})\s+(.*?)(?:\s+=+)?\s*$")
_AD_ATTRIBUTE = re.compile(r"^:!?[\w-]{1,60}!?:(?:\s.*)?$")
_AD_BLOCK_ATTR = re.compile(r"^\[[^\]\n]{0,500}\]\s*$")
_AD_DELIMITER = re.compile(r"^(?:-{4,}|\.{4,}|={4,}|\*{4,}|_{4,}|\+{4,}|-{2}|`{3}.*|[|!,:]={3,})\s*$")
_AD_COMMENT_BLOCK = re.compile(r"^/{4,}\s*$")
_AD_COMMENT = re.compile(r"^//(?!/).*$")
_AD_BLOCK_TITLE = re.compile(r"^\.(?=[^\s.])")
_AD_DIRECTIVE = re.compile(r"^(?:include|ifdef|ifndef|ifeval|endif|toc)::.*$")
_AD_IMAGE = re.compile(r"^image::[^\[\n]{0,500}\[([^\]\n]{0,300})\].*$")
_AD_LIST = re.compile(r"^\s*(?:\*{1,5}|-|\.{1,5}|\d{1,9}\.)\s+(?:\[[ xX*]\]\s+)?")
_AD_DESCRIPTION = re.compile(r"^(\S[^:\n]{0,200}?)(?::{2,4}|;;)(?:\s+|$)")
_AD_INLINE = (
    (re.compile(r"<<[^,<>\n]{1,200},\s*([^<>\n]{1,300})>>"), r"\1", "<"),
    (re.compile(r"<<([^<>\n]{1,200})>>"), r"\1", "<"),
    (re.compile(r"\b(?:link|xref):([^\s\[\]]{1,500})\[\]"), r"\1", ":"),
    (re.compile(r"\b(?:link|xref):[^\s\[\]]{1,500}\[([^\]\n]{1,300})\]"), r"\1", ":"),
    (re.compile(r"\b(?:link|xref):(?=\S)"), "", ":"),
    (re.compile(r"(\b(?:https?|ftp|mailto|irc):[^\s\[\]]{1,500})\[\]"), r"\1", ":"),
    # Macros (link:, xref:, footnote:, kbd:, image:, and URLs with a text): their text.
    # The target excludes ":" so that scanning stops at the next candidate.
    (re.compile(r"\b[a-z]{2,12}:{1,2}[^\s\[\]:]{0,500}\[([^\]\n]{0,300})\]"), r"\1", "["),
    (re.compile(r"(\*\*|__|\+\+|##|``)(?=\S)([^*_+#`\n]{1,1000})(?<=\S)\1"), r"\2", "*_+#`"),
    (
        re.compile(r"(?<![\w*_+#`])([*_+#`])(?=[^\s*_+#`])([^*_+#`\n]{1,1000})(?<=\S)\1(?![\w*_+#`])"),
        r"\2",
        "*_+#`",
    ),
    (re.compile(r"\{[\w-]{1,60}\}"), "", "{"),
    (re.compile(r"\s\+$"), "", "+"),
)


def _asciidoc(text: str) -> tuple[str, str]:
    out: list[str] = []
    title = ""
    in_comment = False
    for line in _lines(text):
        if _AD_COMMENT_BLOCK.match(line):
            in_comment = not in_comment
            continue
        if in_comment or _AD_COMMENT.match(line) or _AD_ATTRIBUTE.match(line):
            continue
        if _AD_BLOCK_ATTR.match(line) or _AD_DELIMITER.match(line) or _AD_DIRECTIVE.match(line):
            continue
        heading = _AD_HEADING.match(line)
        image = _AD_IMAGE.match(line)
        if heading:
            line = heading.group(1)
            if not title:
                title = _inline(line, _AD_INLINE).strip()
        elif image:
            line = image.group(1)
        else:
            line = _AD_BLOCK_TITLE.sub("", line)
            line = _AD_LIST.sub("", line)
            line = _AD_DESCRIPTION.sub(r"\1: ", line)
        if line.lstrip().startswith("|"):
            line = " ".join(cell.strip() for cell in line.strip().strip("|").split("|"))
        out.append(_inline(line, _AD_INLINE))
    body = _tidy(out)
    return body, (title or first_line_title(body))[:_TITLE_CHARS]


def _plain(text: str) -> tuple[str, str]:
    return text, first_line_title(text)


MARKUP_FORMATS: dict[str, Callable[[str], tuple[str, str]]] = {
    "text": _plain,
    "markdown": _markdown,
    "restructuredtext": _rst,
    "asciidoc": _asciidoc,
}


def reduce_markup(text: str, fmt: str, *, keep_quote_marks: bool = False) -> tuple[str, str]:
    """``(text, title)`` of a text file in one of `MARKUP_FORMATS`; plain text is kept as it is.
    ``keep_quote_marks``: a Markdown block-quote line keeps its ``>`` (one, whatever the depth).

    >>> reduce_markup("Intro\\n\\n> quoted words\\n", "markdown", keep_quote_marks=True)[0]
    'Intro\\n\\n> quoted words'

    >>> reduce_markup("# Leave policy\\n\\n- **Annual** leave: see [the form](f.pdf)\\n", "markdown")
    ('Leave policy\\n\\nAnnual leave: see the form', 'Leave policy')
    """
    if fmt == "markdown":
        return _markdown(text, keep_quote_marks)
    return MARKUP_FORMATS[fmt](text)
