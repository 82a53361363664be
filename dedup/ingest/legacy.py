"""Which single-byte legacy encoding a text is in, read by the alphabets of languages.

Bytes that are not UTF-8 are most often in one of the single-byte code pages of the
1990s: windows-1252 (Western Europe), windows-1250 (Central Europe), windows-1251 or
KOI8-R (Cyrillic), and their ISO and DOS cousins. Every one of them decodes any byte,
so the question is which reading is real text. A statistical detector that rates
readings by how "messy" they look confuses the Western and Central European pages:
French "à" in windows-1252 is the byte that windows-1250 reads as the Slovak "ŕ", and
both are letters.

The rule here: a reading is plausible when its non-ASCII characters are the letters of
*one* language (French, Czech, Russian ...: `ALPHABETS`) or common punctuation, and
they sit in words the way text has them. Three things count against a reading:

- a letter that the best-fitting language does not have (Czech read as windows-1252
  has "ø" and "ì" side by side, which no language writes together);
- a word that turns from lower to upper case at a letter beyond ASCII (KOI8-R read as
  windows-1251 turns "Привет" into "пРИВЕТ") or whose letters mix scripts (Latin "café"
  read as windows-1251 is "cafй");
- a punctuation mark or symbol between two letters (DOS code page 850 "été" read as
  windows-1252 is "‚t‚").

The score of a reading is the share of its non-ASCII characters that none of these
count against; the best score wins, and a tie goes to the earlier encoding of
`CANDIDATES` (windows-1252 first: the WHATWG Encoding Standard's legacy default,
https://encoding.spec.whatwg.org/#names-and-labels). ISO-8859-1 text is read as
windows-1252, its superset, as that standard also does. Cost: one decoding of a 64 KB
sample per candidate that reads it differently, and a count of its characters and
words at C speed; the scoring itself loops over distinct characters and words only.
"""

from __future__ import annotations

import codecs
import re
from collections import Counter
from typing import NamedTuple

__all__ = ["CANDIDATES", "ALPHABETS", "Reading", "readings", "score"]

# Tried in this order; on equal scores the earlier one wins.
CANDIDATES = (
    "cp1252",
    "iso8859-15",
    "cp1250",
    "iso8859-2",
    "cp1251",
    "koi8-r",
    "koi8-u",
    "iso8859-5",
    "cp866",
    "mac-cyrillic",
    "cp1253",
    "iso8859-7",
    "cp1254",
    "cp1257",
    "iso8859-13",
    "cp1255",
    "cp1256",
    "cp850",
    "mac-roman",
)

_CYRILLIC = "абвгдежзийклмнопрстуфхцчшщъыьэюя"
_GREEK = "αβγδεζηθικλμνξοπρστυφχψωςάέήίόύώϊϋΐΰ"
# The lower-case letters beyond ASCII that each language writes (upper case follows).
ALPHABETS = {
    "French": "àâæçéèêëîïôœùûüÿ",
    "German": "äöüß",
    "Spanish": "áéíñóúü",
    "Portuguese": "áâãàçéêíóôõú",
    "Italian": "àèéìíîòóùú",
    "Catalan": "àçèéíïòóúü",
    "Dutch": "áäéèëïóöü",
    "Swedish": "åäöé",
    "Danish and Norwegian": "æøåé",
    "Finnish": "äöåšž",
    "Icelandic": "áðéíóúýþæö",
    "Albanian": "çë",
    "Czech": "áčďéěíňóřšťúůýž",
    "Slovak": "áäčďéíĺľňóôŕšťúýž",
    "Polish": "ąćęłńóśźż",
    "Hungarian": "áéíóöőúüű",
    "Slovenian and Croatian": "čćđšž",
    "Romanian": "ăâîșțşţ",
    "Turkish": "çğıöşüâîû",
    "Estonian": "äöõüšž",
    "Latvian": "āčēģīķļņšūž",
    "Lithuanian": "ąčęėįšųūž",
    "Russian": _CYRILLIC + "ё",
    "Ukrainian": _CYRILLIC.replace("ё", "").replace("ъ", "").replace("ы", "").replace("э", "") + "єіїґ",
    "Belarusian": _CYRILLIC.replace("и", "").replace("щ", "").replace("ъ", "") + "ёіў",
    "Bulgarian": _CYRILLIC.replace("ы", "").replace("э", ""),
    "Serbian and Macedonian": "абвгдђежзијклљмнњопрстћуфхцчџшѓѕќ",
    "Greek": _GREEK,
    "Hebrew": "".join(map(chr, range(0x05D0, 0x05EB))),
    "Arabic and Persian": "".join(map(chr, range(0x0621, 0x064B))) + "پچژگکی",
}
# Characters beyond ASCII that any language's text may hold: spaces, quotes, dashes,
# bullets, currency, common signs.
_MARKS = frozenset("\xa0\xad«»“”„‘’‚‹›–—…•·°§©®™€£¥¢¡¿×÷±¶†‡‰¹²³¼½¾µªº№´")
# Marks that do stand between two letters of a word: apostrophes (the acute accent typed
# for one, too), the Catalan middle dot, the soft hyphen.
_IN_WORD = frozenset("’´·\xad")
_WORD = re.compile(r"[^\W\d_]+")
_SAMPLE = 65536
_LEAD = 4096
_HIGH = re.compile(rb"[\x80-\xff]")


def _with_upper(letters: str) -> frozenset[str]:
    upper = (ch.upper() for ch in letters)
    return frozenset(letters) | {ch for ch in upper if len(ch) == 1}


_LETTER_SETS = {language: _with_upper(letters) for language, letters in ALPHABETS.items()}


class Reading(NamedTuple):
    """One encoding's reading of a sample: its score (0-1) and the language that fits it best."""

    encoding: str
    score: float
    language: str
    text: str


def _script(ch: str) -> str:
    """Latin, Greek, Cyrillic or other, by code point (letters only are asked about)."""
    code = ord(ch)
    if code < 0x0370:
        return "Latin"
    if code < 0x0400:
        return "Greek"
    if code < 0x0530:
        return "Cyrillic"
    return "other"


def _odd_word(word: str) -> bool:
    """True when a word turns from lower to upper case at a letter beyond ASCII
    (``пРИВЕТ``, ``cafÚ``; not ``fIéchelle``, a formatting code before a word) or
    mixes scripts (``cafй``)."""
    if not (word.islower() or word.isupper() or word.istitle()):
        for one, two in zip(word, word[1:]):
            if one.islower() and two.isupper() and not (one.isascii() and two.isascii()):
                return True
    return len({_script(ch) for ch in word}) > 1


def _odd_count(text: str, marks: str) -> int:
    """Non-ASCII characters that stand in odd words or are marks between two letters."""
    odd = 0
    for word, count in Counter(_WORD.findall(text)).items():
        if not word.isascii() and _odd_word(word):
            odd += count * sum(1 for ch in word if ord(ch) > 127)
    if marks:
        between = re.compile(rf"(?<=[^\W\d_])[{re.escape(marks)}](?=[^\W\d_])")
        odd += len(between.findall(text))
    return odd


def _fit(wide: dict[str, int]) -> tuple[int, str]:
    """``(characters, language)``: how many of the non-ASCII characters (with their
    counts) are the letters of the best-fitting language or common marks."""
    marks = sum(n for ch, n in wide.items() if ch in _MARKS)
    fits = {
        language: sum(n for ch, n in wide.items() if ch in letters)
        for language, letters in _LETTER_SETS.items()
    }
    language = max(fits, key=fits.__getitem__)  # the first of equals: dict order
    return fits[language] + marks, language


def _odd_marks(wide: dict[str, int]) -> str:
    """The characters that count against a reading where they stand between two letters."""
    return "".join(sorted(ch for ch in wide if not (ch.isalpha() or ch.isspace() or ch in _IN_WORD)))


def _mostly_upper(wide: dict[str, int]) -> bool:
    upper = sum(n for ch, n in wide.items() if ch.isupper())
    return upper > sum(n for ch, n in wide.items() if ch.islower())


def _rate(text: str) -> tuple[float, str, bool]:
    """``(score, language, mostly upper case)`` of a reading (see `score`)."""
    wide = {ch: n for ch, n in Counter(text).items() if ord(ch) > 127}
    total = sum(wide.values())
    if not total:
        return 1.0, "", False
    fit, language = _fit(wide)
    good = fit - _odd_count(text, _odd_marks(wide))
    return max(good, 0) / total, language, _mostly_upper(wide)


def score(text: str) -> tuple[float, str]:
    """``(score, language)``: the share of the non-ASCII characters of ``text`` that read
    as one language's letters or as common marks, less those in odd words or between
    letters (see the module's notes); 1.0 and ``""`` for ASCII text.

    >>> score("Où est la gare ? Voilà, à côté du café.")
    (1.0, 'French')
    >>> score("Oů est la gare ? Voilŕ, ŕ côté du café.")[0] < 1
    True
    """
    value, language, _ = _rate(text)
    return value, language


def readings(data: bytes) -> list[Reading]:
    """The best readings of ``data`` (rated on 64 KB from just before its first byte
    beyond ASCII) among the `CANDIDATES`
    that decode all of it, best first; encodings that read it alike are rated once,
    under the first of them. Of equal scores, a reading whose non-ASCII letters are
    mostly lower case comes first (text is; KOI8-R read as windows-1251 is the other way
    round), then the earlier of `CANDIDATES`.

    Only readings that can still come first are rated in full: each candidate's letter
    fit, from the counts of the sample's bytes, bounds its score, and candidates are
    rated best bound first until the next bound is below the best score. The list holds
    at least the best reading (none when no candidate decodes the data).
    """
    ascii_bytes = bytes(range(128))
    # From a little before the first byte beyond ASCII: a long ASCII head says nothing.
    first = _HIGH.search(data)
    start = max(0, first.start() - _LEAD) if first is not None else 0
    sample = data[start : start + _SAMPLE]
    counts = Counter(sample.translate(None, ascii_bytes))
    total = sum(counts.values())
    everywhere = bytes(sorted(set(data.translate(None, ascii_bytes))))
    bounded = []
    seen: set[str] = set()
    for order, encoding in enumerate(CANDIDATES):
        try:
            key = everywhere.decode(encoding)
        except UnicodeDecodeError:
            continue
        if key in seen:
            continue
        seen.add(key)
        wide: dict[str, int] = {}
        for byte, ch in zip(everywhere, key):
            if counts[byte]:
                wide[ch] = wide.get(ch, 0) + counts[byte]
        fit, language = _fit(wide) if total else (0, "")
        bound = fit / total if total else 1.0
        bounded.append(((-bound, _mostly_upper(wide), order), encoding, wide, fit, language))
    rated = []
    for (negative_bound, upper, order), encoding, wide, fit, language in sorted(bounded, key=lambda b: b[0]):
        if rated and -negative_bound < -rated[0][0][0]:
            break
        text = sample.decode(encoding)
        value = max(fit - _odd_count(text, _odd_marks(wide)), 0) / total if total else 1.0
        rated.append(((-value, upper, order), Reading(codecs.lookup(encoding).name, value, language, text)))
        rated.sort(key=lambda pair: pair[0])
    return [reading for _, reading in rated]
