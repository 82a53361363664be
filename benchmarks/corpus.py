"""Benchmark and test corpora for dedup.

Two sources of base documents are offered:

* real English manual pages found under ``/usr/share/man`` (converted from
  troff/mdoc source to plain text by :func:`manpage_to_text`), and
* synthetic documents built from an invented, Zipf-distributed vocabulary
  (:func:`synthetic_documents`), which scale to any corpus size.

:func:`make_planted_corpus` writes a set of base documents plus edited copies
of some of them, together with a ``truth.json`` that records which file
belongs to which family and exactly which edits produced each copy.

Everything here is deterministic: the same arguments give byte-identical
files on any machine (for the man page source: on any machine with the same
pages installed).  Randomness comes only from ``numpy`` generators seeded with
explicit integer tuples, and only ``Generator.random`` is drawn from, so
results do not depend on version-specific sampling algorithms; listings are
sorted and nothing depends on ``hash()`` or the clock.

Run ``python -m benchmarks.corpus --help`` for the command-line interface.
"""

from __future__ import annotations

import argparse
import bz2
import gzip
import hashlib
import json
import lzma
import os
import re
import shutil
import sys
import textwrap
import time
import unicodedata
from collections import Counter
from collections.abc import Iterable, Iterator, Sequence
from functools import lru_cache
from pathlib import Path

import numpy as np

__all__ = [
    "MAN_ROOT",
    "available_manpages",
    "iter_manpages",
    "main",
    "make_planted_corpus",
    "manpage_to_text",
    "synthetic_documents",
]

MAN_ROOT = Path("/usr/share/man")

# ---------------------------------------------------------------------------
# troff / man / mdoc to plain text
# ---------------------------------------------------------------------------

# Private control characters stand in for output characters that would
# otherwise be re-interpreted by the line-level pass: a leading "." or "'"
# would turn a text line into a request, and a '"' would break argument
# quoting.  They are mapped to their final form only at the very end.
_BS = "\x00"  # literal backslash
_ZW = "\x01"  # zero-width (\&)
_NBSP = "\x02"  # unbreakable space
_DQ = "\x03"  # double quote
_JOIN = "\x04"  # \c: continue the output line without a space
_APOS = "\x05"  # apostrophe
_DOT = "\x06"  # period
_OPEN = "\x0e"  # \{ conditional block start
_CLOSE = "\x0f"  # \} conditional block end
_REF = "\x10"  # start of a deferred string reference
_REF_END = "\x11"

# Applied with str.replace, which is much faster here than str.translate.
_FINAL_REPLACEMENTS = (
    (_BS, "\\"),
    (_ZW, ""),
    (_NBSP, " "),
    (_DQ, '"'),
    (_JOIN, ""),
    (_APOS, "'"),
    (_DOT, "."),
    (_OPEN, ""),
    (_CLOSE, ""),
    (_REF, ""),
    (_REF_END, ""),
)

_PROTECT = {".": _DOT, "'": _APOS, '"': _DQ, "\\": _BS}


def _build_char_map() -> dict[str, str]:
    table = {
        "bu": "\u2022",
        "em": "\u2014",
        "en": "\u2013",
        "hy": "-",
        "mi": "-",
        "aq": "'",
        "cq": "'",
        "oq": "'",
        "lq": '"',
        "rq": '"',
        "dq": '"',
        "Fo": "\u00ab",
        "Fc": "\u00bb",
        "fo": "\u2039",
        "fc": "\u203a",
        "bq": ",",
        "Bq": '"',
        "rs": "\\",
        "sl": "/",
        "ga": "`",
        "aa": "\u00b4",
        "ul": "_",
        "ru": "_",
        "ba": "|",
        "or": "|",
        "br": "|",
        "bv": "|",
        "ci": "\u25cb",
        "sq": "\u25a1",
        "lh": "\u261c",
        "rh": "\u261e",
        "ps": "\u00b6",
        "sc": "\u00a7",
        "co": "\u00a9",
        "rg": "\u00ae",
        "tm": "\u2122",
        "de": "\u00b0",
        "dg": "\u2020",
        "dd": "\u2021",
        "mu": "\u00d7",
        "di": "\u00f7",
        "+-": "\u00b1",
        "<=": "\u2264",
        ">=": "\u2265",
        "!=": "\u2260",
        "==": "\u2261",
        "~=": "\u2245",
        "~~": "\u2248",
        "->": "\u2192",
        "<-": "\u2190",
        "<>": "\u2194",
        "rA": "\u21d2",
        "lA": "\u21d0",
        "hA": "\u21d4",
        "ua": "\u2191",
        "da": "\u2193",
        "uA": "\u21d1",
        "dA": "\u21d3",
        "ha": "^",
        "ti": "~",
        "at": "@",
        "sh": "#",
        "Do": "$",
        "pc": "\u00b7",
        "pl": "+",
        "eq": "=",
        "fm": "'",
        "sd": '"',
        "mc": "\u00b5",
        "ct": "\u00a2",
        "Po": "\u00a3",
        "Ye": "\u00a5",
        "Eu": "\u20ac",
        "eu": "\u20ac",
        "OK": "\u2713",
        "es": "\u2205",
        "if": "\u221e",
        "pd": "\u2202",
        "gr": "\u2207",
        "no": "\u00ac",
        "AN": "\u2227",
        "OR": "\u2228",
        "fa": "\u2200",
        "te": "\u2203",
        "mo": "\u2208",
        "nm": "\u2209",
        "sb": "\u2282",
        "sp": "\u2283",
        "ib": "\u2286",
        "ip": "\u2287",
        "ca": "\u2229",
        "cu": "\u222a",
        "is": "\u222b",
        "sr": "\u221a",
        "pt": "\u221d",
        "12": "\u00bd",
        "14": "\u00bc",
        "34": "\u00be",
        "S1": "\u00b9",
        "S2": "\u00b2",
        "S3": "\u00b3",
        "ss": "\u00df",
        "ae": "\u00e6",
        "AE": "\u00c6",
        "oe": "\u0153",
        "OE": "\u0152",
        "/o": "\u00f8",
        "/O": "\u00d8",
        "-D": "\u00d0",
        "Sd": "\u00f0",
        "TP": "\u00de",
        "Tp": "\u00fe",
        "r!": "\u00a1",
        "r?": "\u00bf",
        "lz": "\u25ca",
        "ff": "ff",
        "fi": "fi",
        "fl": "fl",
        "Fi": "ffi",
        "Fl": "ffl",
        "shc": "",
        "cs": "",
        "char94": "^",
        "char92": "\\",
        "ts": "s",
    }
    greek = "abgdezyhiklmncoprstufxqw"
    greek_lower = "\u03b1\u03b2\u03b3\u03b4\u03b5\u03b6\u03b7\u03b8\u03b9\u03ba\u03bb\u03bc\u03bd\u03be\u03bf\u03c0\u03c1\u03c3\u03c4\u03c5\u03c6\u03c7\u03c8\u03c9"
    for latin, glyph in zip(greek, greek_lower, strict=True):
        table["*" + latin] = glyph
        table["*" + latin.upper()] = glyph.upper()
    accents = {
        ":": "\u0308",
        "'": "\u0301",
        "`": "\u0300",
        "^": "\u0302",
        "~": "\u0303",
        ",": "\u0327",
        "o": "\u030a",
        "v": "\u030c",
    }
    for mark, combining in accents.items():
        for letter in "aeiouyAEIOUYnNcCsSzZ":
            composed = unicodedata.normalize("NFC", letter + combining)
            if len(composed) == 1:
                table[mark + letter] = composed
    return table


_CHAR_MAP = _build_char_map()

# Strings predefined by the man, mdoc and pod2man macro packages, used when a
# page refers to them without defining them itself.
_BUILTIN_STRINGS = {
    "R": "\u00ae",
    "Tm": "\u2122",
    "lq": '"',
    "rq": '"',
    "Lq": '"',
    "Rq": '"',
    "q": '"',
    "Aq": "'",
    "C`": '"',
    "C'": '"',
    'L"': '"',
    'R"': '"',
    "--": "--",
    "PI": "pi",
    "C+": "C++",
    "Lt": "<",
    "Gt": ">",
    "Le": "\u2264",
    "Ge": "\u2265",
    "Ne": "\u2260",
    "Pi": "\u03c0",
    "Ba": "|",
    "Am": "&",
    "Na": "NaN",
    "If": "\u221e",
    "Ua": "\u2191",
    "Da": "\u2193",
    "Ra": "\u2192",
    "La": "\u2190",
    "Pm": "\u00b1",
    "Ai": "ANSI",
    "HV": "",
    "S": "",
    "ex": "",
    "Em": "\u2014",
    "En": "\u2013",
    "Tx": "TeX",
    "lx": "LaTeX",
    "tx": "TeX",
    "softhyphen": "",
}

_SIMPLE_ESCAPES = {
    "-": "-",
    "&": _ZW,
    " ": _NBSP,
    "~": _NBSP,
    "0": " ",
    "|": "",
    "^": "",
    "%": "",
    "c": _JOIN,
    "e": _BS,
    "E": _BS,
    ".": _DOT,
    "'": _APOS,
    "`": "`",
    "_": "_",
    "t": "\t",
    "a": "",
    ",": "",
    "/": "",
    ":": "",
    ")": "",
    "p": "",
    "r": "",
    "u": "",
    "d": "",
    "z": "",
    "{": _OPEN,
    "}": _CLOSE,
    "!": "",
    "?": "",
    "#": "",
    '"': "",
    "\n": "",
    "\\": _BS,
}

# The bulk of real pages uses a handful of escapes; plain str.replace on the
# whole document handles those at C speed before the general regex runs.
_FAST_ESCAPES = (
    ("\\-", "-"),
    ("\\fB", ""),
    ("\\fI", ""),
    ("\\fR", ""),
    ("\\fP", ""),
    ("\\&", _ZW),
    ("\\f(CW", ""),
    ("\\f(CB", ""),
    ("\\f[]", ""),
    ("\\f[R]", ""),
    ("\\f[B]", ""),
    ("\\f[I]", ""),
    ("\\f[CB]", ""),
    ("\\fC", ""),
    ("\\f1", ""),
    ("\\f2", ""),
    ("\\f3", ""),
    ("\\f4", ""),
    ("\\e", _BS),
    ("\\ ", _NBSP),
    ("\\(em", "\u2014"),
    ("\\(en", "\u2013"),
    ("\\(bu", "\u2022"),
    ("\\[bu]", "\u2022"),
    ("\\(aq", _APOS),
    ("\\[aq]", _APOS),
    ("\\(cq", _APOS),
    ("\\(oq", _APOS),
    ("\\(dq", _DQ),
    ("\\(lq", _DQ),
    ("\\(rq", _DQ),
    ("\\%", ""),
    ("\\|", ""),
    ("\\^", ""),
    ("\\c", _JOIN),
    ("\\{", _OPEN),
    ("\\}", _CLOSE),
    ("\\(hy", "-"),
    ("\\~", _NBSP),
)

_ESCAPE_RE = re.compile(
    r"\\(?:"
    r"\((?P<c2>[^\n]{2})"
    r"|\[(?P<cb>[^\]\n]*)\]"
    r"|\*(?:\((?P<s2>[^\n]{2})|\[(?P<sb>[^\]\n]*)\]|(?P<s1>[^\n]))"
    r"|(?P<reg>[fFgkmMnYV$])[+-]?(?:\([^\n]{2}|\[[^\]\n]*\]|[^\n])"
    r"|s(?:[-+]?\([-+]?\d\d|\[[^\]\n]*\]|'[^'\n]*'|[-+]?[1-3]\d|[-+]?\d)"
    r"|(?P<dl>[hvwlLDxXNoSbBAZRCH])(?P<dc>[^\n\w\\])(?P<da>[^\n]*?)(?P=dc)"
    r"|(?P<ch>[\s\S])"
    r")"
)

_COMMENT_LINE_RE = re.compile(r'^[ \t]*\\".*\n?', re.M)
_COMMENT_RE = re.compile(r'\\".*')
_GROFF_COMMENT_RE = re.compile(r"\\#.*\n?")
_ARG_RE = re.compile(r'"((?:[^"]|"")*)"?|([^ \t]+)')
_REF_RE = re.compile(_REF + "([^" + _REF + _REF_END + "]*)" + _REF_END)
_BLANKS_RE = re.compile(r"\n{3,}")
_TRAILING_RE = re.compile(r"[ \t]+$", re.M)
_UNICODE_NAME_RE = re.compile(r"u([0-9A-Fa-f]{4,6})(?:_[0-9A-Fa-f_]+)?$")
_INDENT_RE = re.compile(r"(\d+(?:\.\d*)?)[nmi]?$")
_NUMBER_RE = re.compile(r"[-+]?\d+(?:\.\d*)?[a-zA-Z]?$")
_UNKNOWN_MACRO_RE = re.compile(r"[A-Z][A-Za-z0-9]{0,3}$")
_EMPTY_LINE_RE = re.compile(r"[ \t]*(?:[.'][ \t]*(?:\\\".*)?)?$")
_CONTROL_OR_BLANK = frozenset(".' \t")
_NAME_RE = re.compile("([^ \t" + _OPEN + _CLOSE + "]+)[ \t]*(.*)", re.S)
_SO_LINE_RE = re.compile(r"\A(?:[ \t]*(?:[.'][ \t]*(?:\\\".*)?)?\n)*[.'][ \t]*so[ \t]+\S.*(?:\n|\Z)")


def _char(name: str) -> str:
    value = _CHAR_MAP.get(name)
    if value is None:
        m = _UNICODE_NAME_RE.match(name)
        if m:
            try:
                value = chr(int(m.group(1), 16))
            except (ValueError, OverflowError):
                value = ""
        elif name.startswith("char") and name[4:].isdigit():
            value = chr(int(name[4:]) % 0x110000)
        else:
            value = ""
    return _PROTECT.get(value, value)


def _escape_sub(m: re.Match[str]) -> str:
    text = m.group(0)
    c = text[1]
    if c == "(":
        return _char(m.group("c2"))
    if c == "[":
        return _char(m.group("cb"))
    if c == "*":
        name = m.group("s2") or m.group("sb") or m.group("s1") or ""
        return _REF + name + _REF_END
    if m.group("reg") is not None:
        # Number registers read as zero so that tests on them fail and
        # their alternatives (usually the plain-terminal variant) are used.
        return "0" if c == "n" else ""
    if m.group("dl") is not None:
        arg = m.group("da")
        if c == "h":
            return " "
        if c == "w":
            return "0"
        if c == "N":
            digits = arg.strip()
            return _PROTECT.get(chr(int(digits)), chr(int(digits))) if digits.isdigit() else ""
        if c == "C":
            return _char(arg)
        if c in "oZ":
            return arg[-1:] if c == "o" else arg
        if c in "AB":
            return "1"
        return ""
    ch = m.group("ch")
    if ch is not None:
        if ch in "hvwlLDxXNoSbBAZRCHs":
            return ""
        return _SIMPLE_ESCAPES.get(ch, ch)
    return ""  # a size escape


def _group_fast_escapes() -> list[tuple[str, list[tuple[str, str]]]]:
    groups: dict[str, list[tuple[str, str]]] = {}
    for old, new in _FAST_ESCAPES:
        groups.setdefault(old[:2], []).append((old, new))
    return list(groups.items())


_FAST_ESCAPE_GROUPS = _group_fast_escapes()


def _convert_escapes(text: str) -> str:
    """Apply all inline escapes; the result contains no backslashes."""
    for prefix, pairs in _FAST_ESCAPE_GROUPS:
        if prefix in text:
            for old, new in pairs:
                if old in text:
                    text = text.replace(old, new)
    if "\\" in text:
        text = _ESCAPE_RE.sub(_escape_sub, text)
    return text


def _split_args(s: str) -> list[str]:
    out = []
    for quoted, bare in _ARG_RE.findall(s):
        out.append(bare if bare else quoted.replace('""', '"'))
    return out


def _name_set(names: str) -> frozenset[str]:
    return frozenset(names.split())


# man(7) and an-ext font macros; the value says whether arguments are glued
# (alternating fonts) or separated by spaces.
_FONT_MACROS = {
    "B": False,
    "I": False,
    "SM": False,
    "SB": False,
    "R": False,
    "CW": False,
    "BR": True,
    "BI": True,
    "IB": True,
    "IR": True,
    "RB": True,
    "RI": True,
}
_PARA_MACROS = frozenset({"PP", "LP", "P", "HP", "sp", "bp", "Sp", "Pp", "Lp"})
_BREAK_MACROS = frozenset(
    {"br", "RS", "RE", "in", "ti", "ce", "INDENT", "UNINDENT", "YS", "rj", "Bk", "Ek", "El", "ne"}
)
_NOFILL_ON = frozenset({"nf", "EX", "Vb", "DS", "CS", "Ds", "NF"})
_NOFILL_OFF = frozenset({"fi", "EE", "Ve", "DE", "CE", "De", "FI"})
_IGNORED_REQUESTS = _name_set(
    "ad na nh hy ft ps vs ll ta fam ev mk rt ss cs fp lf pc cc ec eo c2 nr rr hw hc lt pl pn po "
    "wh ch it nm nn em rs cu ul uf kern fspecial ftr char fchar schar warn pso sy open write close "
    "opena return shift while break continue substring length chop asciify unformat blm lsm ecs "
    "ecr pev pm pnr ptr fl hla hlm hpf hym hys linetabs sizes special stringup stringdown tkf trf "
    "trin trnt vpt writec writem cflags defcolor device devicem gcolor fcolor output psbb pvs tag "
    "taga brp spreadwarn tm1 tmc shc sty cp mso so ab tm nx rd ex tl lg uf ls ns vpt rn bd cf lc mc "
    "pi sv os dt di da box boxa fc hcode hpfa fzoom nroff troff ptr tkf"
)
_DEFINITION_MACROS = frozenset({"de", "de1", "dei", "dei1", "am", "am1", "ami", "ami1", "ig"})
_SKIP_BLOCKS = {"EQ": "EN", "PS": "PE", "G1": "G2", "GS": "GE", "[": "]"}

_MDOC_CALLABLE = _name_set(
    "Ac Ad An Ao Ap Aq Ar At Bc Bo Bq Brc Bro Brq Bsx Bx Cd Cm Dc Do Dq Dv Dx Ec Em En Eo "
    "Er Es Ev Fa Fc Fl Fn Fo Ft Fx Ic In Lb Li Lk Ms Mt Nm No Ns Nx Oc Oo Op Ot Ox Pa Pc "
    "Pf Po Pq Qc Ql Qo Qq Sc Sm So Sq St Sx Sy Ta Tn Ux Va Vt Xc Xo Xr %A %B %C %D %I %J "
    "%N %O %P %Q %R %T %U %V"
)
_MDOC_BLOCK = _name_set(
    "Dd Dt Os Sh Ss Nd Pp Lp Bl El It Bd Ed D1 Dl Rs Re Ex Rv Fd Bf Ef Db Ud Hf Tg Bt "
    "Lb In Ft Fn Fo Fc Cd Vt Sm Bk Ek"
)
_MDOC_OPENERS = frozenset({"(", "["})
_MDOC_CLOSERS = frozenset({".", ",", ":", ";", ")", "]", "?", "!"})
_MDOC_ENCLOSE = {
    "Op": ("[", "]"),
    "Dq": ('"', '"'),
    "Qq": ('"', '"'),
    "Sq": ("'", "'"),
    "Ql": ("'", "'"),
    "Pq": ("(", ")"),
    "Bq": ("[", "]"),
    "Aq": ("<", ">"),
    "Brq": ("{", "}"),
}
_MDOC_OPEN_CLOSE = {
    "Oo": "[",
    "Oc": "]",
    "Qo": '"',
    "Qc": '"',
    "Do": '"',
    "Dc": '"',
    "So": "'",
    "Sc": "'",
    "Po": "(",
    "Pc": ")",
    "Bo": "[",
    "Bc": "]",
    "Ao": "<",
    "Ac": ">",
    "Bro": "{",
    "Brc": "}",
}
_MDOC_FIXED = {
    "Ux": "UNIX",
    "Bx": "BSD",
    "Fx": "FreeBSD",
    "Nx": "NetBSD",
    "Ox": "OpenBSD",
    "Dx": "DragonFly",
    "Bsx": "BSD/OS",
    "At": "AT&T UNIX",
    "Ud": "currently under development.",
}
_MDOC_STANDARDS = {
    "-p1003.1": "IEEE Std 1003.1 (POSIX.1)",
    "-p1003.1-2001": "IEEE Std 1003.1-2001 (POSIX.1)",
    "-p1003.1-2008": "IEEE Std 1003.1-2008 (POSIX.1)",
    "-p1003.2": "IEEE Std 1003.2 (POSIX.2)",
    "-ansiC": "ANSI X3.159-1989 (ANSI C89)",
    "-isoC": "ISO/IEC 9899:1990 (ISO C90)",
    "-isoC99": "ISO/IEC 9899:1999 (ISO C99)",
    "-isoC-2011": "ISO/IEC 9899:2011 (ISO C11)",
    "-susv2": "Version 2 of the Single UNIX Specification (SUSv2)",
    "-susv3": "Version 3 of the Single UNIX Specification (SUSv3)",
    "-xpg4": "X/Open Portability Guide Issue 4 (XPG4)",
}
_NS = object()  # "no space" marker inside rendered mdoc token lists


class _TroffConverter:
    """Line-level interpreter for one page; see :func:`manpage_to_text`."""

    def __init__(self) -> None:
        self.out: list[str] = []
        self.cur: list[str] = []
        self.nofill = False
        self.tag_pending = False
        self.strings: dict[str, str] = {}
        self.translate: dict[int, str] = {}
        self.defined: set[str] = set()
        self.ie_stack: list[bool] = []
        self.skip_end: str | None = None
        self.brace_skip = 0
        self.table: str | None = None  # None, "options", "format" or "data"
        self.tab = "\t"
        self.url: str | None = None
        self.mdoc_name = ""
        self.lists: list[list] = []  # mdoc list stack: [type, counter]
        self.literal_stack: list[bool] = []
        self.heading_end = -1
        self.spacing = True

    # -- output ---------------------------------------------------------
    def brk(self) -> None:
        if self.cur:
            self.out.append(" ".join(self.cur))
            self.cur = []

    def para(self) -> None:
        self.brk()
        # A heading stays attached to the paragraph that follows it.
        if self.out and self.out[-1] != "" and len(self.out) != self.heading_end:
            self.out.append("")

    def add(self, text: str) -> None:
        cur = self.cur
        if cur and cur[-1].endswith(_JOIN):
            cur[-1] = cur[-1][:-1] + text
        else:
            cur.append(text)

    def emit(self, text: str) -> None:
        if not text:
            return
        self.add(text)
        if text.endswith(_JOIN):
            return
        if self.nofill or self.tag_pending:
            self.tag_pending = False
            self.brk()

    # -- main loop ------------------------------------------------------
    def run(self, lines: Iterable[str]) -> None:
        for line in lines:
            if self.skip_end is not None:
                if line[:1] in ".'" and line[1:].strip() == self.skip_end:
                    self.skip_end = None
                continue
            if self.brace_skip:
                self.brace_skip += line.count(_OPEN) - line.count(_CLOSE)
                if self.brace_skip < 0:
                    self.brace_skip = 0
                continue
            if line and self.table is None and line[0] not in _CONTROL_OR_BLANK:
                # Plain text in fill mode is by far the most common line.
                line = line.rstrip()
                cur = self.cur
                if cur and cur[-1][-1:] == _JOIN:
                    cur[-1] = cur[-1][:-1] + line
                else:
                    cur.append(line)
                if (self.nofill or self.tag_pending) and line[-1:] != _JOIN:
                    self.tag_pending = False
                    self.brk()
                continue
            self.line(line)

    def line(self, line: str) -> None:
        if not line:
            if self.table is None:
                self.para()
            return
        c = line[0]
        if c == "." or c == "'":
            self.request(line[1:], c)
        elif self.table is not None:
            self.table_line(line)
        else:
            if (c == " " or c == "\t") and not self.nofill:
                self.brk()
            self.emit(line.rstrip())

    def table_line(self, line: str) -> None:
        if self.table == "options":
            self.table = "format"
            if line.rstrip().endswith(";"):
                m = re.search(r"tab\s*\((.)\)", line)
                if m:
                    self.tab = m.group(1)
                return
        if self.table == "format":
            if line.rstrip().endswith("."):
                self.table = "data"
            return
        stripped = line.strip()
        if stripped in ("_", "=", ""):
            return
        cells = [cell.strip() for cell in line.replace("T{", "").replace("T}", "").split(self.tab)]
        text = "  ".join(cell for cell in cells if cell and cell not in ("_", "="))
        if text:
            self.brk()
            self.add(text)
            self.brk()

    def request(self, rest: str, control: str) -> None:
        rest = rest.lstrip(" \t")
        if not rest:
            return
        if _OPEN in rest or _CLOSE in rest:
            m = _NAME_RE.match(rest)
            if m is None:
                rest = rest.replace(_OPEN, "").replace(_CLOSE, "").lstrip(" \t")
                if rest:
                    self.line(rest)
                return
            name, args = m.group(1), m.group(2)
            if name in ("if", "ie", "el"):
                self.conditional(name, args)
                return
            args = args.replace(_OPEN, "").replace(_CLOSE, "")
        else:
            parts = rest.split(None, 1)
            name = parts[0]
            args = parts[1] if len(parts) > 1 else ""
        handler = _DISPATCH.get(name)
        if handler is not None:
            handler(self, name, args)
            return
        if name in self.defined:
            return
        # An unknown name that does not look like a macro or a request is
        # most likely a text line that happens to start with a period or an
        # apostrophe (".gitignore files", "'quoted' words"): keep it.
        if _UNKNOWN_MACRO_RE.match(name) or not name.strip("."):
            return
        self.emit((control + rest).rstrip())

    def req_font(self, name: str, args: str) -> None:
        words = _split_args(args)
        if words:
            self.emit(("" if _FONT_MACROS[name] else " ").join(words))

    def req_para(self, name: str, args: str) -> None:
        self.para()

    def req_break(self, name: str, args: str) -> None:
        self.brk()

    def req_nofill(self, name: str, args: str) -> None:
        self.brk()
        self.nofill = name in _NOFILL_ON

    def req_define(self, name: str, args: str) -> None:
        words = args.split()
        if name == "ig":
            self.skip_end = words[0] if words else "."
            return
        if words:
            self.defined.add(words[0])
        self.skip_end = words[1] if len(words) > 1 else "."

    def req_skip(self, name: str, args: str) -> None:
        self.skip_end = _SKIP_BLOCKS[name]

    def req_do(self, name: str, args: str) -> None:
        self.request(args, ".")

    def req_nop(self, name: str, args: str) -> None:
        self.emit(args.rstrip())

    def req_conditional(self, name: str, args: str) -> None:
        self.conditional(name, args)

    # -- conditionals ---------------------------------------------------
    def conditional(self, name: str, args: str) -> None:
        if name == "el":
            taken = not self.ie_stack.pop() if self.ie_stack else False
            body = args
        else:
            taken, body = _evaluate_condition(args)
            if name == "ie":
                self.ie_stack.append(taken)
        if not taken:
            depth = body.count(_OPEN) - body.count(_CLOSE)
            if depth > 0:
                self.brace_skip = depth
            return
        body = body.lstrip(" \t")
        if _OPEN in body or _CLOSE in body:
            body = body.replace(_OPEN, "").replace(_CLOSE, "").lstrip(" \t")
        if body:
            self.line(body)

    # -- requests with arguments -----------------------------------------
    def req_heading(self, name: str, args: str) -> None:
        self.para()
        self.tag_pending = False
        words = _split_args(args) if name in ("SH", "SS") else [self.mdoc_render(_split_args(args))]
        if words and words[0]:
            self.add(" ".join(words))
            self.brk()
            self.heading_end = len(self.out)
        else:
            self.tag_pending = True

    def req_tp(self, name: str, args: str) -> None:
        if name == "TQ":
            self.brk()
        else:
            self.para()
        self.tag_pending = True

    def req_ip(self, name: str, args: str) -> None:
        self.para()
        self.tag_pending = False
        words = _split_args(args)
        if words and words[0]:
            self.add(words[0])
            # As in troff, a tag wider than the indent gets a line of its own.
            m = _INDENT_RE.match(words[1]) if len(words) > 1 else None
            indent = float(m.group(1)) if m else 7.0
            if len(words[0]) >= indent:
                self.brk()

    def req_bullet(self, name: str, args: str) -> None:
        self.para()
        self.add("\u2022")

    def req_ignore(self, name: str, args: str) -> None:
        return

    def req_ds(self, name: str, args: str) -> None:
        parts = args.lstrip().split(None, 1) if args.strip() else []
        if not parts:
            return
        key = parts[0]
        value = args.lstrip()[len(key) :].lstrip(" \t")
        if value.startswith('"'):
            value = value[1:]
        if name in ("as", "as1"):
            self.strings[key] = self.strings.get(key, "") + value
        else:
            self.strings[key] = value

    def req_rm(self, name: str, args: str) -> None:
        for key in args.split():
            self.strings.pop(key, None)

    def req_als(self, name: str, args: str) -> None:
        words = args.split()
        if len(words) == 2 and words[1] in self.strings:
            self.strings[words[0]] = self.strings[words[1]]

    def req_tr(self, name: str, args: str) -> None:
        chars = args.strip().replace(_ZW, "")
        for i in range(0, len(chars) - 1, 2):
            target = chars[i + 1]
            self.translate[ord(chars[i])] = " " if target == _NBSP else target
        if len(chars) % 2:
            self.translate[ord(chars[-1])] = " "

    def req_table(self, name: str, args: str) -> None:
        if name == "TS":
            self.para()
            self.table = "options"
            self.tab = "\t"
        elif name == "T&":
            self.table = "format"
        else:
            self.table = None
            self.para()

    def req_op(self, name: str, args: str) -> None:
        words = _split_args(args)
        if words:
            self.emit("[" + " ".join(words) + "]")

    def req_sy(self, name: str, args: str) -> None:
        self.para()
        words = _split_args(args)
        if words:
            self.add(" ".join(words))

    def req_mr(self, name: str, args: str) -> None:
        words = _split_args(args)
        if words:
            text = words[0]
            if len(words) > 1:
                text += "(" + words[1] + ")"
            if len(words) > 2:
                text += words[2]
            self.emit(text)

    def req_url_start(self, name: str, args: str) -> None:
        words = _split_args(args)
        self.url = words[0] if words else None

    def req_url_end(self, name: str, args: str) -> None:
        words = _split_args(args)
        tail = words[0] if words else ""
        if self.url:
            self.emit("<" + self.url + ">" + tail)
        elif tail:
            self.emit(tail)
        self.url = None

    def req_url_inline(self, name: str, args: str) -> None:
        words = _split_args(args)
        if not words:
            return
        text = words[1] if len(words) > 1 and words[1] else words[0]
        tail = words[2] if len(words) > 2 else ""
        self.emit(text + tail)

    def req_text_args(self, name: str, args: str) -> None:
        words = _split_args(args)
        if words:
            self.emit(" ".join(words))

    def req_quoted(self, name: str, args: str) -> None:
        words = _split_args(args)
        if words:
            self.emit('"' + words[0] + '"' + "".join(words[1:]))

    # -- mdoc -----------------------------------------------------------
    def mdoc(self, name: str, args: str) -> None:
        tokens = _split_args(args)
        if name == "Sm":
            self.spacing = tokens[:1] != ["off"] if tokens else not self.spacing
            return
        if name in ("Dd", "Dt", "Os", "Db", "Bf", "Ef", "Tg", "Bk", "Ek", "Hf"):
            return
        if name in ("Sh", "Ss"):
            self.req_heading(name, args)
            return
        if name in ("Pp", "Lp"):
            self.para()
            return
        if name == "Nd":
            self.emit("- " + self.mdoc_render(tokens))
            return
        if name == "Bl":
            self.brk()
            kind = next((t for t in tokens if t.startswith("-") and t not in ("-compact",)), "-tag")
            if kind in ("-width", "-offset"):
                kind = "-tag"
            self.lists.append([kind, 0])
            return
        if name == "El":
            self.brk()
            self.tag_pending = False
            if self.lists:
                self.lists.pop()
            return
        if name == "It":
            self.mdoc_item(tokens)
            return
        if name == "Bd":
            self.brk()
            literal = "-literal" in tokens or "-unfilled" in tokens
            self.literal_stack.append(self.nofill)
            self.nofill = self.nofill or literal
            return
        if name == "Ed":
            self.brk()
            self.nofill = self.literal_stack.pop() if self.literal_stack else False
            return
        if name in ("D1", "Dl"):
            self.brk()
            self.add(self.mdoc_render(tokens))
            self.brk()
            return
        if name in ("Rs", "Re"):
            self.para()
            return
        if name == "Ex":
            subject = " ".join(t for t in tokens if t != "-std") or self.mdoc_name
            self.emit(f"The {subject} utility exits 0 on success, and >0 if an error occurs.")
            return
        if name == "Rv":
            subject = " ".join(t for t in tokens if t != "-std") or self.mdoc_name
            self.emit(
                f"The {subject}() function returns the value 0 if successful; otherwise the "
                "value -1 is returned and the global variable errno is set to indicate the error."
            )
            return
        if name == "In":
            self.emit("#include <" + " ".join(tokens) + ">")
            return
        if name == "An":
            tokens = [t for t in tokens if t not in ("-split", "-nosplit")]
            if not tokens:
                return
        text = self.mdoc_render([name, *tokens])
        if text:
            self.emit(text)

    def mdoc_item(self, tokens: list[str]) -> None:
        self.brk()
        self.tag_pending = False
        kind = self.lists[-1][0] if self.lists else "-tag"
        if kind in ("-bullet",):
            self.add("\u2022")
        elif kind in ("-dash", "-hyphen"):
            self.add("-")
        elif kind == "-enum":
            self.lists[-1][1] += 1
            self.add(f"{self.lists[-1][1]}.")
        elif kind == "-column":
            text = self.mdoc_render(tokens)
            if text:
                self.add(text)
        elif kind == "-item":
            pass
        else:
            text = self.mdoc_render(tokens)
            if text:
                self.add(text)
                if kind not in ("-inset", "-diag"):
                    self.brk()

    def mdoc_render(self, tokens: list[str]) -> str:
        items = self.mdoc_items(tokens)
        out: list[str] = []
        glue = True
        for item in items:
            if item is _NS:
                glue = True
                continue
            if out and not glue and self.spacing and item not in _MDOC_CLOSERS:
                out.append(" ")
            out.append(item)
            glue = item in _MDOC_OPENERS
        return "".join(out)

    def mdoc_items(self, tokens: Sequence[str]) -> list:
        items: list = []
        i = 0
        n = len(tokens)
        while i < n:
            token = tokens[i]
            if token in _MDOC_CALLABLE:
                i = self.mdoc_macro(token, tokens, i + 1, items)
            else:
                items.append(token)
                i += 1
        return items

    def mdoc_macro(self, name: str, tokens: Sequence[str], i: int, items: list) -> int:
        n = len(tokens)
        if name in _MDOC_ENCLOSE:
            opener, closer = _MDOC_ENCLOSE[name]
            j = n
            while j > i and tokens[j - 1] in _MDOC_CLOSERS:
                j -= 1
            items.extend((opener, _NS))
            items.extend(self.mdoc_items(tokens[i:j]))
            items.extend((_NS, closer))
            items.extend(tokens[j:])
            return n
        if name in _MDOC_OPEN_CLOSE:
            mark = _MDOC_OPEN_CLOSE[name]
            if name.endswith("o"):
                items.extend((mark, _NS))
            else:
                items.extend((_NS, mark))
            return i
        if name == "Ns":
            items.append(_NS)
            return i
        if name == "Ap":
            items.extend((_NS, "'", _NS))
            return i
        if name == "Sm":
            if i < n and tokens[i] in ("on", "off"):
                self.spacing = tokens[i] == "on"
                return i + 1
            self.spacing = not self.spacing
            return i
        if name in ("Xo", "Xc", "Eo", "Ec", "Es", "En"):
            if name in ("Eo", "Es") and i < n and tokens[i] not in _MDOC_CALLABLE:
                i += 1
            return i
        args = []
        while i < n and tokens[i] not in _MDOC_CALLABLE:
            args.append(tokens[i])
            i += 1
        words = [a for a in args if a not in _MDOC_CLOSERS and a not in _MDOC_OPENERS]
        trailing = args[len(words) :] if words == args[: len(words)] else []
        if trailing:
            args = args[: len(words)]
        if name == "Fl":
            if not args:
                items.extend(("-", _NS) if i < n and tokens[i] == "Fl" else ("-",))
            else:
                items.extend(
                    "-" + a if a not in _MDOC_CLOSERS and a not in _MDOC_OPENERS else a for a in args
                )
        elif name == "Ar":
            items.extend(args or ["file", "..."])
        elif name == "Nm":
            if words:
                if not self.mdoc_name:
                    self.mdoc_name = words[0]
                items.extend(args)
            else:
                items.append(self.mdoc_name)
                items.extend(args)
        elif name == "Xr":
            if len(args) >= 2:
                items.append(f"{args[0]}({args[1]})")
                items.extend(args[2:])
            else:
                items.extend(args)
        elif name == "Pf":
            if args:
                items.extend((args[0], _NS))
                items.extend(args[1:])
        elif name in _MDOC_FIXED:
            text = _MDOC_FIXED[name]
            if name in ("Bx", "Nx", "Fx", "Ox", "Dx", "Bsx") and args:
                text = f"{text} {args[0]}"
                args = args[1:]
            elif name == "At" and args:
                args = args[1:]
            items.append(text)
            items.extend(args)
        elif name == "St":
            if args:
                items.append(_MDOC_STANDARDS.get(args[0], args[0].lstrip("-")))
                items.extend(args[1:])
        elif name == "Fn":
            if args:
                items.append(args[0] + "(" + ", ".join(args[1:]) + ")")
        elif name == "Fo":
            if args:
                items.extend((args[0] + "(", _NS))
        elif name == "Fc":
            items.extend((_NS, ")"))
        elif name == "Lk":
            if args:
                items.append(args[1] if len(args) > 1 else args[0])
                items.extend(args[2:])
        elif name == "Ta":
            items.append("\t")
            items.extend(args)
        else:
            items.extend(args)
        items.extend(trailing)
        return i

    # -- finishing --------------------------------------------------------
    def finish(self) -> str:
        self.brk()
        text = "\n".join(self.out)
        if _REF in text:
            text = self.resolve_strings(text)
        if self.translate:
            text = text.translate(self.translate)
        for sentinel, final in _FINAL_REPLACEMENTS:
            if sentinel in text:
                text = text.replace(sentinel, final)
        if " \n" in text or "\t\n" in text:
            text = _TRAILING_RE.sub("", text)
        if "\n\n\n" in text:
            text = _BLANKS_RE.sub("\n\n", text)
        return text.strip("\n") + "\n" if text.strip() else ""

    def resolve_strings(self, text: str) -> str:
        strings = self.strings

        def lookup(m: re.Match[str]) -> str:
            key = m.group(1)
            value = strings.get(key)
            if value is None:
                value = _BUILTIN_STRINGS.get(key, "")
            return value

        for _ in range(4):
            if _REF not in text:
                break
            text = _REF_RE.sub(lookup, text)
        return text


def _evaluate_condition(args: str) -> tuple[bool, str]:
    """Split ``.if`` arguments into (condition is true, remaining body).

    The page is rendered as a plain terminal would see it: ``n`` (nroff) is
    true, ``t`` (typesetter) is false, and anything that depends on a
    register or on the output device is treated as false.
    """
    s = args.lstrip(" \t")
    negate = False
    while s.startswith("!"):
        negate = not negate
        s = s[1:]
    if not s:
        return False, ""
    c = s[0]
    if c in "ntoe" and (len(s) == 1 or s[1] in " \t" + _OPEN):
        value = c == "n"
        rest = s[1:]
    elif c in "drcmFSv" and len(s) > 1 and s[1] in " \t":
        parts = s.split(None, 2)
        value = False
        rest = parts[2] if len(parts) > 2 else ""
    elif not c.isalnum() and c not in "(-+\\" + _OPEN + _REF:
        first = s.find(c, 1)
        second = s.find(c, first + 1) if first >= 0 else -1
        if second < 0:
            return False, ""
        value = s[1:first] == s[first + 1 : second]
        rest = s[second + 1 :]
    else:
        m = re.match(r"[^ \t" + _OPEN + "]+", s)
        expr = m.group(0) if m else ""
        rest = s[len(expr) :]
        value = bool(_NUMBER_RE.match(expr)) and float(re.sub(r"[a-zA-Z]$", "", expr) or 0) > 0
    return value != negate, rest


# Requests and macros with a handler of their own, by method name.
_REQUESTS = {
    "SH": "req_heading",
    "SS": "req_heading",
    "TP": "req_tp",
    "TQ": "req_tp",
    "IP": "req_ip",
    "bP": "req_bullet",
    "TH": "req_ignore",
    "so": "req_ignore",
    "mso": "req_ignore",
    "ds": "req_ds",
    "ds1": "req_ds",
    "as": "req_ds",
    "as1": "req_ds",
    "rm": "req_rm",
    "als": "req_als",
    "tr": "req_tr",
    "TS": "req_table",
    "T&": "req_table",
    "TE": "req_table",
    "OP": "req_op",
    "SY": "req_sy",
    "MR": "req_mr",
    "UR": "req_url_start",
    "MT": "req_url_start",
    "UE": "req_url_end",
    "ME": "req_url_end",
    "URL": "req_url_inline",
    "MTO": "req_url_inline",
    "FTP": "req_url_inline",
    "QW": "req_quoted",
    "UN": "req_ignore",
    "IX": "req_ignore",
    "PD": "req_ignore",
    "DT": "req_ignore",
    "UC": "req_ignore",
    "AT": "req_ignore",
    "LINKSTYLE": "req_ignore",
    "tm": "req_ignore",
    "ab": "req_ignore",
    "nr": "req_ignore",
    "TX": "req_text_args",
    "Tn": "req_text_args",
}


def _is_redirect(raw: str) -> bool:
    m = _SO_LINE_RE.match(raw)
    if m is None:
        return False
    return all(_EMPTY_LINE_RE.match(line) for line in raw[m.end() :].split("\n"))


def _build_dispatch() -> dict:
    table: dict = {}
    groups = (
        (_IGNORED_REQUESTS, "req_ignore"),
        (_MDOC_CALLABLE, "mdoc"),
        (_MDOC_BLOCK, "mdoc"),
        (_DEFINITION_MACROS, "req_define"),
        (_SKIP_BLOCKS, "req_skip"),
        (_NOFILL_ON, "req_nofill"),
        (_NOFILL_OFF, "req_nofill"),
        (_BREAK_MACROS, "req_break"),
        (_PARA_MACROS, "req_para"),
        (_FONT_MACROS, "req_font"),
        (("do",), "req_do"),
        (("nop",), "req_nop"),
        (("if", "ie", "el"), "req_conditional"),
    )
    for names, method in groups:  # later groups take precedence
        for name in names:
            table[name] = getattr(_TroffConverter, method)
    table.update((name, getattr(_TroffConverter, method)) for name, method in _REQUESTS.items())
    return table


_DISPATCH = _build_dispatch()


def manpage_to_text(raw: str) -> str:
    """Convert troff ``man(7)`` or ``mdoc(7)`` source into plain text.

    The conversion is a small line-oriented interpreter written for speed
    rather than typographic fidelity: it keeps every word a reader would see
    in a terminal rendering, joins filled lines into one line per paragraph,
    keeps the line structure of no-fill blocks (examples, ``.nf``/``.EX``),
    and separates paragraphs with blank lines.

    Parameters
    ----------
    raw : str
        The page source, already decompressed and decoded.

    Returns
    -------
    str
        Plain text ending in a newline, or ``""`` for a page that only
        redirects to another page with ``.so`` (or has no text at all).

    Notes
    -----
    Handled: comments (``.\\"``, trailing ``\\"``, ``\\#``); font and heading
    macros (arguments kept, alternating fonts glued); paragraph, indent and
    layout requests (dropped or turned into line/paragraph breaks); macro
    definition and ``.ig`` blocks (skipped); conditionals evaluated as for a
    terminal; string definitions and interpolation (``.ds``, ``\\*(xx``) with
    the usual man/mdoc/pod2man strings predefined; ``tbl`` tables (one line per
    row); ``eqn``/``pic`` blocks (skipped); the common mdoc macros; and inline
    escapes for fonts, sizes, special characters, spacing and motions.
    """
    if "\r" in raw:
        raw = raw.replace("\r\n", "\n").replace("\r", "\n")
    if _is_redirect(raw):
        return ""
    raw = raw.replace("\\\\", _BS)
    if '\\"' in raw:
        raw = _COMMENT_LINE_RE.sub("", raw)
        raw = _COMMENT_RE.sub("", raw)
    if "\\#" in raw:
        raw = _GROFF_COMMENT_RE.sub("", raw)
    raw = raw.replace("\\\n", "")
    text = _convert_escapes(raw)
    conv = _TroffConverter()
    conv.run(text.split("\n"))
    return conv.finish()


# ---------------------------------------------------------------------------
# Man pages on this machine
# ---------------------------------------------------------------------------

_COMPRESSED = {
    ".gz": gzip.decompress,
    ".bz2": bz2.decompress,
    ".xz": lzma.decompress,
    ".lzma": lzma.decompress,
}


def _page_name(file_name: str) -> str:
    for suffix in _COMPRESSED:
        if file_name.endswith(suffix):
            return file_name[: -len(suffix)]
    return file_name


def _page_stem(name: str) -> str:
    return re.split(r"[-_.]", name, maxsplit=1)[0].lower()


def _manpage_files(sections: Sequence[str], root: str | os.PathLike[str] | None) -> list[tuple[str, Path]]:
    """Regular page files as (page name, path), sorted by name then section.

    Symbolic links are alias names for another page and are left out, as
    are further hard links to an already listed file.
    """
    base = os.fspath(root) if root is not None else os.fspath(MAN_ROOT)
    found: list[tuple[str, str, str]] = []
    seen_inodes: set[tuple[int, int]] = set()
    for section in sections:
        directory = os.path.join(base, f"man{section}")
        try:
            device = os.stat(directory).st_dev
            with os.scandir(directory) as it:
                entries = list(it)
        except OSError:
            continue
        for entry in entries:
            try:
                # d_type from readdir answers both without a stat call
                if not entry.is_file(follow_symlinks=False):
                    continue
                key = (device, entry.inode())
            except OSError:
                continue
            if key in seen_inodes:
                continue
            seen_inodes.add(key)
            found.append((_page_name(entry.name), section, entry.path))
    found.sort()
    return [(name, Path(path)) for name, _section, path in found]


def _read_page(path: Path) -> str | None:
    try:
        data = path.read_bytes()
        for suffix, decompress in _COMPRESSED.items():
            if path.name.endswith(suffix):
                data = decompress(data)
                break
    except (OSError, EOFError, ValueError, lzma.LZMAError):
        return None
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError:
        return data.decode("latin-1")


def _capped(files: list[tuple[str, Path]], max_per_stem: int | None) -> list[tuple[str, Path]]:
    if max_per_stem is None:
        return files
    counts: Counter[str] = Counter()
    kept = []
    for name, path in files:
        stem = _page_stem(name)
        if counts[stem] < max_per_stem:
            counts[stem] += 1
            kept.append((name, path))
    return kept


def iter_manpages(
    limit: int | None = None,
    sections: Sequence[str] = ("1", "5", "8"),
    min_words: int = 50,
    *,
    max_per_stem: int | None = None,
    root: str | os.PathLike[str] | None = None,
) -> Iterator[tuple[str, str]]:
    """Yield English man pages of this machine as plain text.

    Parameters
    ----------
    limit : int or None
        Stop after this many pages have been yielded.
    sections : sequence of str
        Manual sections to read, e.g. ``("1", "5", "8")``; only the
        top-level ``man<N>`` folders are read, never translations.
    min_words : int
        Pages with fewer whitespace-separated words after conversion are
        skipped.
    max_per_stem : int or None
        Keep at most this many pages whose names share the part before the
        first ``-``, ``_`` or ``.`` (``gcloud_*``, ``git-*``).  Generated
        families of pages are strongly similar to one another; capping them
        keeps a base corpus free of many unplanned near-duplicates.
    root : path or None
        Man page root, default :data:`MAN_ROOT`.

    Yields
    ------
    tuple of (str, str)
        ``(name, text)`` where name is the file name without compression
        suffix (``"ls.1"``), in sorted name order.  Pages that are ``.so``
        redirects, unreadable, too short, or textually identical to a page
        already yielded are skipped.
    """
    if limit is not None and limit <= 0:
        return
    files = _capped(_manpage_files(sections, root), max_per_stem)
    seen: set[bytes] = set()
    count = 0
    for name, path in files:
        raw = _read_page(path)
        if raw is None:
            continue
        text = manpage_to_text(raw)
        if not text or len(text.split()) < min_words:
            continue
        digest = hashlib.blake2b(text.encode("utf-8"), digest_size=16).digest()
        if digest in seen:
            continue
        seen.add(digest)
        yield name, text
        count += 1
        if limit is not None and count >= limit:
            return


def available_manpages(
    minimum: int,
    sections: Sequence[str] = ("1", "5", "8"),
    *,
    root: str | os.PathLike[str] | None = None,
) -> bool:
    """Tell cheaply whether at least ``minimum`` page files exist.

    Only directory entries are counted; no page is opened.  Intended for
    tests that need real pages and should skip elsewhere.
    """
    base = Path(root) if root is not None else MAN_ROOT
    total = 0
    for section in sections:
        try:
            with os.scandir(base / f"man{section}") as entries:
                for entry in entries:
                    if entry.is_file(follow_symlinks=False):
                        total += 1
                        if total >= minimum:
                            return True
        except OSError:
            continue
    return total >= minimum


# ---------------------------------------------------------------------------
# Synthetic documents
# ---------------------------------------------------------------------------

_ONSETS = (
    "",
    "b",
    "c",
    "d",
    "f",
    "g",
    "h",
    "j",
    "k",
    "l",
    "m",
    "n",
    "p",
    "r",
    "s",
    "t",
    "v",
    "w",
    "z",
    "br",
    "cr",
    "dr",
    "fl",
    "gr",
    "pl",
    "pr",
    "st",
    "tr",
    "sh",
    "ch",
    "th",
    "sl",
    "sp",
    "qu",
)
_NUCLEI = ("a", "e", "i", "o", "u", "a", "e", "i", "o", "ai", "ea", "ou", "io", "y")
_CODAS = ("", "", "", "", "n", "r", "s", "l", "t", "m", "nd", "st", "rk", "ng", "x")
_SYLLABLE_COUNTS = np.array([0.22, 0.62, 0.90, 1.0])  # cumulative: 1, 2, 3, 4 syllables
_VOCAB_SIZE = 30000
_ZIPF_OFFSET = 2.7  # Zipf-Mandelbrot offset; the exponent stays 1 so only division is used
_VARIANTS = 7  # word, Word, word., Word., word.<para>, Word.<para>, word,
_CHUNK_DOCS = 256
_ZIPF_TABLE = 1 << 21


def _rng(*key: int) -> np.random.Generator:
    return np.random.default_rng([int(k) for k in key])


def _uniform_index(u: np.ndarray, n: int) -> np.ndarray:
    return np.minimum((u * n).astype(np.int64), n - 1)


class _Vocabulary:
    """Invented words with Zipf ranks and precomputed token spellings."""

    def __init__(self, seed: int, size: int = _VOCAB_SIZE) -> None:
        syllables = [o + n + c for o in _ONSETS for n in _NUCLEI for c in _CODAS]
        words: dict[str, None] = {}
        batch = 0
        while len(words) < size:
            rng = _rng(seed, 90, batch)
            n_syl = np.searchsorted(_SYLLABLE_COUNTS, rng.random(size), side="right") + 1
            picks = _uniform_index(rng.random((size, 4)), len(syllables)).tolist()
            for k, row in zip(n_syl.tolist(), picks, strict=True):
                word = "".join(syllables[j] for j in row[:k])
                if 2 <= len(word) <= 16:
                    words.setdefault(word, None)
            batch += 1
        # Frequent words are short in natural languages; rank by length.
        ordered = sorted(enumerate(list(words)[:size]), key=lambda item: (len(item[1]), item[0]))
        self.words: list[str] = [w for _, w in ordered]
        weights = 1.0 / (np.arange(size, dtype=np.float64) + _ZIPF_OFFSET)
        cdf = np.cumsum(weights)
        self.cdf = cdf / cdf[-1]
        self.cdf[-1] = 1.0
        # Inverse-CDF lookup table: sampling becomes one gather instead of a
        # binary search per word; every word keeps at least one slot.
        slots = np.searchsorted(self.cdf, (np.arange(_ZIPF_TABLE, dtype=np.float64) + 0.5) / _ZIPF_TABLE)
        self.table = np.minimum(slots, size - 1).astype(np.int32)
        spellings: list[str] = []
        for w in self.words:
            cap = w[:1].upper() + w[1:]
            spellings.extend((w + " ", cap + " ", w + ". ", cap + ". ", w + ".\n\n", cap + ".\n\n", w + ", "))
        self.spellings = spellings
        self.lengths = np.fromiter((len(t) for t in spellings), dtype=np.int64, count=len(spellings))
        self.offsets = np.concatenate(([0], np.cumsum(self.lengths)[:-1]))
        self.blob = np.frombuffer("".join(spellings).encode("ascii"), dtype=np.uint8)
        frequencies = np.bincount(self.table, minlength=size) / _ZIPF_TABLE
        self.mean_token_bytes = float(np.dot(frequencies, self.lengths[::_VARIANTS]))

    def sample_ids(self, rng: np.random.Generator, n: int) -> np.ndarray:
        return self.table[(rng.random(n) * _ZIPF_TABLE).astype(np.int64)].astype(np.int64)

    def render(self, codes: np.ndarray) -> str:
        """Concatenate the spellings of ``codes`` with one vectorised gather."""
        lengths = self.lengths[codes]
        total = int(lengths.sum())
        starts = np.cumsum(lengths) - lengths
        index = np.repeat(self.offsets[codes] - starts, lengths) + np.arange(total, dtype=np.int64)
        return self.blob[index].tobytes().decode("ascii")


@lru_cache(maxsize=4)
def _vocabulary(seed: int) -> _Vocabulary:
    return _Vocabulary(seed)


def _synthetic_chunk(vocab: _Vocabulary, seed: int, chunk: int, doc_bytes: int) -> list[tuple[str, str]]:
    """Build the ``_CHUNK_DOCS`` documents of one chunk.

    Each chunk uses its own generators, so document k is the same whatever
    the total number of documents requested.
    """
    rng_doc = _rng(seed, 20, chunk)
    targets = np.rint(doc_bytes * (0.8 + 0.4 * rng_doc.random(_CHUNK_DOCS))).astype(np.int64)
    n_title = 2 + (rng_doc.random(_CHUNK_DOCS) < 0.5)
    title_ids = 40 + _uniform_index(rng_doc.random((_CHUNK_DOCS, 3)), 4000)
    budget = int(_CHUNK_DOCS * 1.2 * doc_bytes / vocab.mean_token_bytes * 1.1) + 256
    while True:
        docs = _split_stream(vocab, seed, chunk, budget, targets, n_title, title_ids)
        if docs is not None:
            return docs
        budget *= 2


def _split_stream(
    vocab: _Vocabulary,
    seed: int,
    chunk: int,
    budget: int,
    targets: np.ndarray,
    n_title: np.ndarray,
    title_ids: np.ndarray,
) -> list[tuple[str, str]] | None:
    ids = vocab.sample_ids(_rng(seed, 21, chunk), budget)
    u = _rng(seed, 22, chunk).random((2, budget // 4 + 1))
    ends = np.cumsum(4 + (u[0] * 9).astype(np.int64) + (u[1] * 9).astype(np.int64)) - 1
    ends = ends[ends < budget]
    if len(ends) < 2:
        return None
    # Paragraphs of two to six sentences.
    para_sizes = 2 + _uniform_index(_rng(seed, 23, chunk).random(len(ends) // 2 + 1), 5)
    para_last = np.cumsum(para_sizes) - 1
    para_end = np.zeros(len(ends), dtype=np.int64)
    para_end[para_last[para_last < len(ends)]] = 1
    variant = np.where(_rng(seed, 24, chunk).random(budget) < 0.07, 6, 0)
    starts = np.concatenate(([0], ends[:-1] + 1))
    is_start = np.zeros(budget, dtype=np.int64)
    is_start[starts] = 1
    variant[starts] = 1
    variant[ends] = 2 + is_start[ends] + 2 * para_end
    codes = ids * _VARIANTS + variant
    cum = np.cumsum(vocab.lengths[codes])
    sentence_cum = cum[ends]
    bounds: list[int] = []
    start_bytes = 0
    first = 0
    for k in range(_CHUNK_DOCS):
        goal = start_bytes + int(targets[k])
        j = int(np.searchsorted(sentence_cum, goal))
        if j >= len(ends):
            return None
        if j > first and goal - sentence_cum[j - 1] < sentence_cum[j] - goal:
            j -= 1
        j = max(j, first)
        bounds.append(int(ends[j]) + 1)
        start_bytes = int(sentence_cum[j])
        first = j + 1
    text = vocab.render(codes[: bounds[-1]])
    words = vocab.words
    docs: list[tuple[str, str]] = []
    char_start = 0
    for k, end in enumerate(bounds):
        char_end = int(cum[end - 1])
        title_words = [words[j] for j in title_ids[k, : n_title[k]].tolist()]
        title = " ".join(w[:1].upper() + w[1:] for w in title_words)
        docs.append(("-".join(title_words), title + "\n\n" + text[char_start:char_end].rstrip() + "\n"))
        char_start = char_end
    return docs


def synthetic_documents(n: int, seed: int, doc_bytes: int = 2048) -> Iterator[tuple[str, str]]:
    """Yield ``n`` synthetic documents of about ``doc_bytes`` bytes each.

    Documents consist of a short title line and paragraphs of sentences
    made of invented words whose frequencies follow a Zipf law, so the
    collection behaves like natural text for shingling and hashing while
    costing nothing to produce at any scale.

    Parameters
    ----------
    n : int
        Number of documents.
    seed : int
        Seed; also selects the invented vocabulary.
    doc_bytes : int
        Target size; each document falls within roughly 0.8 to 1.2 times
        this value (rounded to whole paragraphs).

    Yields
    ------
    tuple of (str, str)
        ``(name, text)``; the name is made of the title words.
    """
    if doc_bytes < 64:
        raise ValueError("doc_bytes must be at least 64")
    vocab = _vocabulary(seed)
    remaining = n
    chunk = 0
    while remaining > 0:
        docs = _synthetic_chunk(vocab, seed, chunk, doc_bytes)
        yield from docs[:remaining]
        remaining -= len(docs)
        chunk += 1


# ---------------------------------------------------------------------------
# Planted copies
# ---------------------------------------------------------------------------

_TEMPLATES = (
    (
        "ARCHIVED COPY: {title}\n"
        "This page was mirrored from the public documentation archive. The original may have "
        "changed since this copy was taken; check the upstream source before relying on it.",
        "Redistribution of this archived page is permitted under the terms of its original "
        "license.\nHome | Index | Search | Previous | Next",
    ),
    (
        "Knowledge Base > Reference > {title}\n"
        "Was this article helpful? Sign in to rate it and to receive updates when it changes.",
        "Copyright the respective authors. All trademarks are the property of their owners.\n"
        "Contact us | Privacy policy | Terms of use | Site map",
    ),
    (
        "-----BEGIN FORWARDED DOCUMENT-----\nSubject: {title}\n"
        "Please read the attached text and send your comments to the list by Friday.",
        "-----END FORWARDED DOCUMENT-----\nYou received this message because you are subscribed "
        "to the documentation mailing list. To unsubscribe, reply with the word STOP.",
    ),
)
_STRUCTURAL_OPS = (
    "reorder_sentences",
    "remove_paragraph",
    "add_paragraph",
    "whitespace_case",
    "wrap_template",
)
_WHITESPACE_VARIANTS = (
    "lowercase",
    "uppercase_lines",
    "double_spaces",
    "rewrap",
    "trailing_spaces",
    "indent",
    "crlf",
)
_PARA_SPLIT_RE = re.compile(r"\n[ \t]*\n+")
_SENTENCE_SPLIT_RE = re.compile(r"(?<=[.!?])\s+(?=[A-Z(\"'])")
_WORD_PARTS_RE = re.compile(r"^([^A-Za-z0-9]*)(.*?)([^A-Za-z0-9]*)$", re.S)
_ALPHA_WORD_RE = re.compile(r"[A-Za-z][a-z]+")
_WS_SPLIT_RE = re.compile(r"(\s+)")


class _WordSource:
    """Draws replacement words with corpus frequencies."""

    def __init__(self, words: list[str], cdf: np.ndarray) -> None:
        self.words = words
        self.cdf = cdf

    @classmethod
    def from_counts(cls, counts: Counter[str]) -> _WordSource:
        words = sorted(counts)
        if not words:
            words = ["text"]
            counts = Counter(words)
        cdf = np.cumsum(np.array([counts[w] for w in words], dtype=np.float64))
        return cls(words, cdf / cdf[-1])

    def draw(self, rng: np.random.Generator, n: int) -> list[str]:
        if n <= 0:
            return []
        ids = np.minimum(np.searchsorted(self.cdf, rng.random(n), side="right"), len(self.words) - 1)
        return [self.words[i] for i in ids.tolist()]


def _match_case(template: str, word: str) -> str:
    if len(template) > 1 and template.isupper():
        return word.upper()
    if template[:1].isupper():
        return word[:1].upper() + word[1:]
    return word


def _stronger_space(a: str, b: str) -> str:
    return a if a.count("\n") >= b.count("\n") else b


def _word_edits(text: str, rate: float, rng: np.random.Generator, source: _WordSource) -> tuple[str, dict]:
    """Substitute, delete or insert words at ``round(rate * n_words)`` positions.

    Whitespace between words is preserved, so line and paragraph structure
    survive the edits.
    """
    parts = _WS_SPLIT_RE.split(text)
    lead = ""
    if parts and parts[0] == "":
        lead = parts[1] if len(parts) > 1 else ""
        parts = parts[2:]
    words = parts[0::2]
    seps = parts[1::2]
    if len(seps) < len(words):
        seps.append("")
    if words and words[-1] == "":
        words.pop()
        seps.pop()
    n = len(words)
    k = min(n, int(round(rate * n)))
    positions: list[int] = []
    actions: list[int] = []
    if k:
        chosen = np.sort(np.argsort(rng.random(n), kind="stable")[:k])
        positions = chosen.tolist()
        actions = (1 + _uniform_index(rng.random(k), 3)).tolist()
    fresh = source.draw(rng, 2 * k)
    counts = [0, 0, 0, 0]
    # Right to left, so that the positions still to be visited stay valid.
    for t in range(k - 1, -1, -1):
        j = positions[t]
        action = actions[t]
        counts[action] += 1
        if action == 1:  # substitute, keeping punctuation and capitalisation
            pre, core, post = _WORD_PARTS_RE.match(words[j]).groups()
            replacement = fresh[2 * t]
            if replacement.lower() == core.lower():
                replacement = fresh[2 * t + 1]
            words[j] = pre + _match_case(core, replacement) + post if core else replacement
        elif action == 2:  # delete, keeping the stronger of the two separators
            if j > 0:
                seps[j - 1] = _stronger_space(seps[j - 1], seps[j])
            del words[j]
            del seps[j]
        else:  # insert before
            words.insert(j, fresh[2 * t])
            seps.insert(j, " ")
    edited = lead + "".join(map(str.__add__, words, seps))
    return edited, {
        "op": "word_edits",
        "rate": rate,
        "words": n,
        "substituted": counts[1],
        "deleted": counts[2],
        "inserted": counts[3],
    }


def _paragraphs(text: str) -> list[str]:
    return [p for p in _PARA_SPLIT_RE.split(text.strip("\n")) if p.strip()]


def _reorder_sentences(paras: list[str], rate: float, rng: np.random.Generator) -> dict | None:
    candidates = [i for i, p in enumerate(paras) if len(_SENTENCE_SPLIT_RE.split(p)) >= 2]
    if not candidates:
        return None
    k = max(1, min(len(candidates), int(round(len(candidates) * min(1.0, 2 * rate)))))
    chosen = sorted(
        candidates[i] for i in np.argsort(rng.random(len(candidates)), kind="stable")[:k].tolist()
    )
    for i in chosen:
        sentences = _SENTENCE_SPLIT_RE.split(paras[i])
        order = np.argsort(rng.random(len(sentences)), kind="stable").tolist()
        if order == sorted(order):
            order = order[1:] + order[:1]
        paras[i] = " ".join(sentences[j] for j in order)
    return {"op": "reorder_sentences", "paragraphs": chosen}


def _whitespace_case(text: str, rng: np.random.Generator) -> tuple[str, dict, bool]:
    u = rng.random(4)
    first = int(u[0] * len(_WHITESPACE_VARIANTS))
    chosen = [_WHITESPACE_VARIANTS[min(first, len(_WHITESPACE_VARIANTS) - 1)]]
    if u[1] < 0.5:
        second = _WHITESPACE_VARIANTS[
            min(int(u[2] * len(_WHITESPACE_VARIANTS)), len(_WHITESPACE_VARIANTS) - 1)
        ]
        if second not in chosen:
            chosen.append(second)
    chosen.sort(key=_WHITESPACE_VARIANTS.index)
    detail: dict = {"op": "whitespace_case", "variants": chosen}
    for variant in chosen:
        if variant == "lowercase":
            text = text.lower()
        elif variant == "uppercase_lines":
            lines = text.split("\n")
            flags = rng.random(len(lines)) < 0.1
            text = "\n".join(
                line.upper() if f else line for line, f in zip(lines, flags.tolist(), strict=True)
            )
        elif variant == "double_spaces":
            text = text.replace(". ", ".  ").replace(", ", ",  ")
        elif variant == "rewrap":
            width = 50 + int(rng.random() * 40)
            detail["width"] = width
            text = (
                "\n\n".join(
                    textwrap.fill(
                        " ".join(p.split()), width=width, break_long_words=False, break_on_hyphens=False
                    )
                    for p in _paragraphs(text)
                )
                + "\n"
            )
        elif variant == "trailing_spaces":
            lines = text.split("\n")
            pads = _uniform_index(rng.random(len(lines)), 4).tolist()
            text = "\n".join(line + " " * p if line else line for line, p in zip(lines, pads, strict=True))
        elif variant == "indent":
            text = "\n".join("    " + line if line else line for line in text.split("\n"))
    return text, detail, "crlf" in chosen


def _make_copy(
    base_text: str,
    title: str,
    rate: float,
    plan: dict,
    rng: np.random.Generator,
    source: _WordSource,
    donor_text: str | None,
) -> tuple[str, list[dict]]:
    """Apply one copy's edits; returns the text and the operations in order.

    Structural edits come first so that word edits also touch an added
    paragraph, and the template is wrapped last so that it stays verbatim,
    which is what makes it shared boilerplate across unrelated copies.
    Indices in the recorded operations refer to the paragraph list as it
    was when that operation ran.
    """
    ops: list[dict] = []
    paras = _paragraphs(base_text)
    if plan["remove_paragraph"] and len(paras) >= 3:
        i = 1 + int(rng.random() * (len(paras) - 1))
        i = min(i, len(paras) - 1)
        ops.append({"op": "remove_paragraph", "index": i, "words": len(paras[i].split())})
        del paras[i]
    if plan["add_paragraph"] and donor_text is not None:
        donor_paras = _paragraphs(donor_text)
        if donor_paras:
            src = min(int(rng.random() * len(donor_paras)), len(donor_paras) - 1)
            at = min(1 + int(rng.random() * len(paras)), len(paras))
            paras.insert(at, donor_paras[src])
            ops.append(
                {
                    "op": "add_paragraph",
                    "source": plan["donor"],
                    "source_index": src,
                    "index": at,
                    "words": len(donor_paras[src].split()),
                }
            )
    if plan["reorder_sentences"]:
        detail = _reorder_sentences(paras, rate, rng)
        if detail is not None:
            ops.append(detail)
    text = "\n\n".join(paras) + "\n"
    text, detail = _word_edits(text, rate, rng, source)
    ops.append(detail)
    crlf = False
    if plan["whitespace_case"]:
        text, detail, crlf = _whitespace_case(text, rng)
        ops.append(detail)
    if plan["wrap_template"]:
        which = min(int(rng.random() * len(_TEMPLATES)), len(_TEMPLATES) - 1)
        header, footer = _TEMPLATES[which]
        text = header.format(title=title) + "\n\n" + text.strip("\n") + "\n\n" + footer + "\n"
        ops.append({"op": "wrap_template", "template": which})
    if crlf:
        text = text.replace("\n", "\r\n")
    return text, ops


def _safe_name(name: str) -> str:
    cleaned = re.sub(r"[^A-Za-z0-9._+-]+", "_", name).strip("._") or "doc"
    return cleaned[:60]


def _rate_label(rate: float) -> str:
    percent = rate * 100
    if abs(percent - round(percent)) < 1e-9:
        return f"e{int(round(percent)):02d}"
    return "e" + f"{percent:04.1f}".replace(".", "p")


def _select_manpages(
    n_base: int, seed: int, max_per_stem: int | None, min_words: int
) -> list[tuple[str, str]]:
    files = _capped(_manpage_files(("1", "5", "8"), None), max_per_stem)
    order = np.argsort(_rng(seed, 1).random(len(files)), kind="stable").tolist()
    chosen: list[tuple[str, str]] = []
    seen: set[bytes] = set()
    for i in order:
        if len(chosen) >= n_base:
            break
        name, path = files[i]
        raw = _read_page(path)
        if raw is None:
            continue
        text = manpage_to_text(raw)
        if not text or len(text.split()) < min_words:
            continue
        digest = hashlib.blake2b(text.encode("utf-8"), digest_size=16).digest()
        if digest in seen:
            continue
        seen.add(digest)
        chosen.append((name, text))
    if len(chosen) < n_base:
        hint = " (raise or remove max_per_stem)" if max_per_stem is not None else ""
        raise ValueError(f"only {len(chosen)} usable man pages found, {n_base} requested{hint}")
    chosen.sort()
    return chosen


def make_planted_corpus(
    out_dir: str | os.PathLike[str],
    n_base: int,
    n_families: int,
    seed: int,
    *,
    edit_rates: Sequence[float] = (0.02, 0.05, 0.1, 0.2),
    source: str = "manpages",
    doc_bytes: int = 2048,
    structural_prob: float = 0.5,
    max_per_stem: int | None = 10,
    min_words: int = 80,
    overwrite: bool = False,
) -> dict:
    """Write base documents and planted edited copies with ground truth.

    Layout of ``out_dir``::

        base/NNNNN-name.txt     every base document (NNNNN = base index)
        copies/NNNNN-eK.txt     one copy per edit rate for each chosen family
        truth.json              family and edit history of every file

    Every copy gets word-level edits (substitutions with words drawn from the
    corpus vocabulary by frequency, insertions and deletions) affecting a
    ``rate`` fraction of its words.  Independently, each of the structural
    edits is applied with probability ``structural_prob``: sentences
    reordered inside some paragraphs, a paragraph removed, a paragraph from
    another base document added, whitespace or case changes, and a header
    and footer from a small set of shared templates wrapped around it.

    Parameters
    ----------
    out_dir : path
        Output directory, created if needed.  It must not already contain
        a corpus unless ``overwrite`` is true.
    n_base : int
        Number of base documents.
    n_families : int
        Number of base documents that receive copies (at most ``n_base``).
    seed : int
        Seed for every random choice.
    edit_rates : sequence of float
        One copy per rate for each family; ``K`` in the file name is the
        rate in percent (``e05`` for 0.05, ``e2p5`` for 0.025).
    source : {"manpages", "synthetic"}
        Where base documents come from: a seeded choice among this
        machine's man pages, or :func:`synthetic_documents`.
    doc_bytes : int
        Target size of synthetic documents.
    structural_prob : float
        Probability of each structural edit per copy.
    max_per_stem : int or None
        For man pages: cap on pages sharing a name stem (see
        :func:`iter_manpages`).
    min_words : int
        For man pages: minimum length of a usable page.
    overwrite : bool
        Remove an earlier ``base/``, ``copies/`` and ``truth.json`` first.

    Returns
    -------
    dict
        The content of ``truth.json``: parameters, ``files`` mapping each
        written path (relative, ``/``-separated) to its ``family`` (the base
        index), ``kind`` (``"base"`` or ``"copy"``), ``rate`` and the list of
        ``operations`` applied in order, and ``families`` mapping each
        family with copies to its member paths.
    """
    if source not in ("manpages", "synthetic"):
        raise ValueError(f"unknown source {source!r}")
    if n_base < 0 or n_families < 0 or n_families > n_base:
        raise ValueError("need 0 <= n_families <= n_base")
    rates = [float(r) for r in edit_rates]
    if any(not 0.0 <= r <= 1.0 for r in rates):
        raise ValueError("edit rates must lie in [0, 1]")
    labels = [_rate_label(r) for r in rates]
    if len(set(labels)) != len(labels):
        raise ValueError("edit rates must be distinct")
    out = Path(out_dir)
    base_dir, copy_dir, truth_path = out / "base", out / "copies", out / "truth.json"
    existing = [p for p in (base_dir, copy_dir, truth_path) if p.exists()]
    if existing and not overwrite:
        raise FileExistsError(
            f"{out} already holds a corpus; pass overwrite=True (--overwrite) to replace it"
        )
    # Man pages are chosen before anything is written, so a shortage fails cleanly.
    if source == "manpages":
        docs: Iterable[tuple[str, str]] = _select_manpages(n_base, seed, max_per_stem, min_words)
    else:
        docs = synthetic_documents(n_base, seed, doc_bytes)
    for p in existing:
        if p.is_dir():
            shutil.rmtree(p)
        else:
            p.unlink()
    base_dir.mkdir(parents=True, exist_ok=True)
    if n_families:
        copy_dir.mkdir(parents=True, exist_ok=True)

    width = max(5, len(str(max(n_base - 1, 0))))
    family_ids = sorted(np.argsort(_rng(seed, 2).random(n_base), kind="stable")[:n_families].tolist())
    plans: dict[tuple[int, int], dict] = {}
    needed: set[int] = set(family_ids)
    for f in family_ids:
        for k in range(len(rates)):
            u = _rng(seed, 3, f, k, 0).random(len(_STRUCTURAL_OPS) + 1)
            plan = {op: bool(u[j] < structural_prob) for j, op in enumerate(_STRUCTURAL_OPS)}
            plan["donor"] = None
            if plan["add_paragraph"] and n_base > 1:
                donor = min(int(u[-1] * (n_base - 1)), n_base - 2)
                plan["donor"] = donor + 1 if donor >= f else donor
                needed.add(plan["donor"])
            plans[(f, k)] = plan

    files: dict[str, dict] = {}
    kept: dict[int, tuple[str, str, str]] = {}
    counts: Counter[str] = Counter()
    for index, (name, text) in enumerate(docs):
        rel = f"base/{index:0{width}d}-{_safe_name(name)}.txt"
        (out / rel).write_bytes(text.encode("utf-8"))
        files[rel] = {"family": index, "kind": "base", "name": name, "rate": 0.0, "operations": []}
        if index in needed:
            kept[index] = (rel, text, name)
        if source == "manpages":
            counts.update(w.lower() for w in _ALPHA_WORD_RE.findall(text))

    if source == "manpages":
        word_source = _WordSource.from_counts(counts)
    else:
        vocab = _vocabulary(seed)
        word_source = _WordSource(vocab.words, vocab.cdf)

    families: dict[str, list[str]] = {}
    for f in family_ids:
        base_rel, base_text, base_name = kept[f]
        members = [base_rel]
        title = base_text.strip().split("\n", 1)[0].strip()[:80] if source == "synthetic" else base_name
        for k, rate in enumerate(rates):
            plan = plans[(f, k)]
            donor_text = kept[plan["donor"]][1] if plan["donor"] is not None else None
            text, ops = _make_copy(
                base_text, title, rate, plan, _rng(seed, 3, f, k, 1), word_source, donor_text
            )
            rel = f"copies/{f:0{width}d}-{labels[k]}.txt"
            (out / rel).write_bytes(text.encode("utf-8"))
            files[rel] = {"family": f, "kind": "copy", "base": base_rel, "rate": rate, "operations": ops}
            members.append(rel)
        families[str(f)] = members

    truth = {
        "format": 1,
        "source": source,
        "seed": seed,
        "n_base": n_base,
        "n_families": n_families,
        "edit_rates": rates,
        "doc_bytes": doc_bytes if source == "synthetic" else None,
        "structural_prob": structural_prob,
        "files": dict(sorted(files.items())),
        "families": dict(sorted(families.items(), key=lambda item: int(item[0]))),
    }
    truth_path.write_bytes(_dump_truth(truth).encode("utf-8"))
    return truth


def _dump_truth(truth: dict) -> str:
    """Serialise the ground truth with one line per file entry.

    Readable in a pager and much faster than ``json.dumps(indent=...)`` for
    corpora with a million files; key order is fixed by the caller.
    """

    def dumps(value: object) -> str:
        return json.dumps(value, sort_keys=True, ensure_ascii=False)

    lines = ["{"]
    keys = sorted(truth)
    for i, key in enumerate(keys):
        comma = "," if i < len(keys) - 1 else ""
        value = truth[key]
        if isinstance(value, dict):
            lines.append(f" {dumps(key)}: {{")
            entries = [f"  {dumps(k)}: {dumps(v)}" for k, v in value.items()]
            if entries:
                lines.append(",\n".join(entries))
            lines.append(" }" + comma)
        else:
            lines.append(f" {dumps(key)}: {dumps(value)}{comma}")
    lines.append("}")
    return "\n".join(lines) + "\n"


# ---------------------------------------------------------------------------
# Command line
# ---------------------------------------------------------------------------


def _parse_rates(value: str) -> list[float]:
    try:
        return [float(v) for v in value.split(",") if v.strip()]
    except ValueError as exc:
        raise argparse.ArgumentTypeError(f"bad rate list {value!r}") from exc


def main(argv: Sequence[str] | None = None) -> int:
    """Command-line entry point; returns the process exit status."""
    parser = argparse.ArgumentParser(
        prog="python -m benchmarks.corpus",
        description="Write a corpus of base documents and planted near-duplicate copies.",
    )
    parser.add_argument("--out", required=True, help="output directory")
    parser.add_argument("--base", type=int, required=True, help="number of base documents")
    parser.add_argument("--families", type=int, required=True, help="base documents that get copies")
    parser.add_argument("--seed", type=int, default=0)
    parser.add_argument("--source", choices=("manpages", "synthetic"), default="manpages")
    parser.add_argument(
        "--rates",
        type=_parse_rates,
        default=[0.02, 0.05, 0.1, 0.2],
        help="comma-separated edit rates (default 0.02,0.05,0.1,0.2)",
    )
    parser.add_argument("--doc-bytes", type=int, default=2048, help="synthetic document size")
    parser.add_argument("--structural-prob", type=float, default=0.5)
    parser.add_argument(
        "--max-per-stem",
        type=int,
        default=10,
        help="man pages kept per name stem such as gcloud_* (0: no cap; default 10)",
    )
    parser.add_argument("--overwrite", action="store_true", help="replace an existing corpus")
    args = parser.parse_args(argv)
    started = time.perf_counter()
    try:
        truth = make_planted_corpus(
            args.out,
            args.base,
            args.families,
            args.seed,
            edit_rates=args.rates,
            source=args.source,
            doc_bytes=args.doc_bytes,
            structural_prob=args.structural_prob,
            max_per_stem=args.max_per_stem or None,
            overwrite=args.overwrite,
        )
    except (ValueError, FileExistsError) as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 2
    elapsed = time.perf_counter() - started
    n_copies = sum(1 for entry in truth["files"].values() if entry["kind"] == "copy")
    print(
        f"wrote {len(truth['files'])} files ({args.base} base, {n_copies} copies in "
        f"{args.families} families, source={args.source}, seed={args.seed}) to {args.out} "
        f"in {elapsed:.2f} s"
    )
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
