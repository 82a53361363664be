"""From bytes to text: byte-order marks, UTF-16/32 without a mark, UTF-8, then legacy encodings.

The order matters. A byte-order mark is certain; UTF-16 and UTF-32 text without one is
recognised by its pattern of NUL bytes (Latin-script text in them has a NUL in every
second or every three of four bytes); other NUL bytes mean binary data. UTF-8 is tried
next: text that decodes as UTF-8 almost never is anything else. A charset the file
declares itself (HTML ``<meta charset>``) comes after that, and only then a guess.

The guess first reads the bytes in each single-byte legacy encoding (windows-1252 and
ISO-8859-1/15 for Western Europe, windows-1250 and ISO-8859-2 for Central Europe,
windows-1251, KOI8-R/U, ISO-8859-5 and DOS 866 for Cyrillic, Greek, Turkish, Baltic,
Hebrew, Arabic) and keeps the reading whose non-ASCII characters are the letters of one
language, in words cased as text is (`dedup.ingest.legacy`; no extra package needed).
When no reading fits well enough (`TRUSTED_READING`), as for the multi-byte encodings
of East Asian text, the statistical detector charset-normalizer (part of the
``dedup[docs]`` extra) is asked. Either guess needs some text to go on, so very short
files that are not UTF-8 are skipped rather than decoded wrongly, and so are UTF-8 files
with a few bad bytes (`damaged_utf8`: no legacy encoding reads them right); a guess is recorded as
one (the ledger's encoding reads ``guessed cp1252``), never as a certainty, and a
detector's guess that its close rivals contradict is not used (see `_detected`): the
file is skipped with the reason.

Whatever decoded, text full of control characters is binary data with a text name.
"""

from __future__ import annotations

import codecs
import importlib
import re

from .legacy import readings

__all__ = ["decode_text", "damaged_utf8", "MIN_DETECT_BYTES", "GUESSED", "TRUSTED_READING"]

_BOMS = (
    (codecs.BOM_UTF32_LE, "utf-32-le"),
    (codecs.BOM_UTF32_BE, "utf-32-be"),
    (codecs.BOM_UTF8, "utf-8-sig"),
    (codecs.BOM_UTF16_LE, "utf-16-le"),
    (codecs.BOM_UTF16_BE, "utf-16-be"),
)
_ANY_BOM = tuple(bom for bom, _ in _BOMS)
# Below this many bytes a statistical guess of the encoding is little better than chance
# (twelve bytes of Latin-1 come back as an Urdu code page).
MIN_DETECT_BYTES = 32
_SAMPLE = 65536
# A guess is trusted when the encodings rated about as likely (mess within 0.05, language
# fit within 0.1 of the best) read at least 90% of the non-ASCII characters the same way.
_NEAR_CHAOS = 0.05
_NEAR_COHERENCE = 0.1
_AGREEMENT = 0.9
# The ledger's encoding of a text decoded by a guess: "guessed cp1251".
GUESSED = "guessed "
# A single-byte reading is used when at least this share of its non-ASCII characters
# reads as one language's text (`dedup.ingest.legacy.score`). Real text scores 0.95-1
# in its own encoding (0.8 at worst on manual pages in 20 languages, with markup left
# in); East Asian multi-byte text read byte by byte scores below 0.7.
TRUSTED_READING = 0.85
# Control characters, less those that real text does contain: backspace (overstruck
# manual pages), tab, line ends (NEL too), vertical tab, form feed, escape (coloured logs).
_CONTROLS = re.compile("[\x00-\x07\x0e-\x1a\x1c-\x1f\x7f-\x84\x86-\x9f]")
# One stray control character in a short note is a typo, not binary data.
_CONTROL_MIN = 2
_CONTROL_SHARE = 0.01
# The same control characters seen in UTF-8 bytes: the ASCII ones are single bytes, and
# every C1 control (U+0080-U+009F) starts with 0xC2. Deleting all other bytes screens a
# text at C speed; the regular expression runs only when the screen finds something.
_CONTROL_BYTES = bytes([*range(0x00, 0x08), *range(0x0E, 0x1B), *range(0x1C, 0x20), 0x7F])
_NOT_CONTROL_BYTES = bytes(b for b in range(256) if b not in _CONTROL_BYTES + b"\xc2")
_UTF8_C1_CONTROL = re.compile(b"\xc2[\x80-\x84\x86-\x9f]")


def _nul_pattern(sample: bytes, width: int, text_position: int) -> bool:
    """True when every ``width``-byte unit has its text byte at ``text_position`` and NULs elsewhere."""
    units = len(sample) // width
    if units < 2:
        return False
    text_bytes = sample[text_position::width][:units]
    nul_elsewhere = sum(sample[p::width][:units].count(0) for p in range(width) if p != text_position)
    return text_bytes.count(0) <= units // 10 and nul_elsewhere >= 0.9 * units * (width - 1)


def _unmarked_wide(data: bytes) -> str | None:
    """UTF-32 or UTF-16 name when the bytes look like one of them without a byte-order mark."""
    sample = data[: _SAMPLE - _SAMPLE % 4]
    if len(data) % 4 == 0:
        if _nul_pattern(sample, 4, 0):
            return "utf-32-le"
        if _nul_pattern(sample, 4, 3):
            return "utf-32-be"
    if len(data) % 2 == 0:
        if _nul_pattern(sample, 2, 0):
            return "utf-16-le"
        if _nul_pattern(sample, 2, 1):
            return "utf-16-be"
    return None


def _utf8_without_controls(data: bytes) -> bool:
    """True when UTF-8 bytes hold none of the `_CONTROLS` characters; False means "maybe"."""
    found = data.translate(None, _NOT_CONTROL_BYTES)
    if not found:
        return True
    if found.count(0xC2) != len(found):  # an ASCII control character
        return False
    return _UTF8_C1_CONTROL.search(data) is None  # 0xC2 also starts U+00A0-U+00BF (no-break space, ©)


def _without_controls(sample: str, utf8: bytes | None) -> bool:
    """True when the sample surely holds no control character, found without a per-character scan.

    ``utf8`` is the UTF-8 bytes the text was decoded from, when it was.
    """
    if utf8 is not None:
        # Every character of the sample is at most four bytes long.
        return _utf8_without_controls(utf8[: 4 * _SAMPLE])
    return sample.isascii() and not sample.encode("ascii").translate(None, _NOT_CONTROL_BYTES)


def _control_problem(text: str, encoding: str, skip: int, utf8: bytes | None = None) -> str:
    """A reason when the text is mostly not text (control characters), else ``""``."""
    sample = text[:_SAMPLE]
    if _without_controls(sample, utf8):
        return ""
    first = _CONTROLS.search(sample)
    count = len(_CONTROLS.findall(sample)) if first is not None else 0
    if count < _CONTROL_MIN or count <= _CONTROL_SHARE * len(sample):
        return ""
    offset = skip + len(sample[: first.start()].encode(encoding, "surrogatepass"))
    return f"binary data: control character 0x{ord(first.group()):02x} at offset {offset}"


# A character of two to four bytes in UTF-8 (RFC 3629, section 4, less overlong forms).
_UTF8_SEQUENCE = re.compile(rb"[\xc2-\xdf][\x80-\xbf]|[\xe0-\xef][\x80-\xbf]{2}|[\xf0-\xf4][\x80-\xbf]{3}")
_HIGH_BYTES = re.compile(rb"[\x80-\xff]")


def damaged_utf8(data: bytes) -> bool:
    """True when at least 95% of the bytes beyond ASCII (in the first 64 KB from the first
    of them) form UTF-8 characters: UTF-8 text with a few bad bytes, which a single-byte
    reading would turn into "Ã©" (a legacy encoding seldom puts its bytes in such
    sequences: East Asian multi-byte text in EUC-JP does, about half of them). Cost: two
    regular-expression scans of 64 KB.

    >>> damaged_utf8("café, thé, crème ".encode() * 5 + bytes([255])), damaged_utf8("café".encode("cp1252") * 9)
    (True, False)
    """
    first = _HIGH_BYTES.search(data)
    if first is None:
        return False
    sample = data[first.start() : first.start() + _SAMPLE]
    high = len(_HIGH_BYTES.findall(sample))
    in_sequences = sum(len(seq) for seq in _UTF8_SEQUENCE.findall(sample))
    return (high - in_sequences) * 20 <= high


def _codec_name(name: str) -> str | None:
    try:
        return codecs.lookup(name).name
    except (LookupError, TypeError, ValueError):
        return None


def _guess(data: bytes) -> tuple[str | None, str]:
    """``(encoding, doubt)``: the single-byte encoding whose reading fits (see the
    module's notes), else the one charset-normalizer guesses and trusts, else None and
    why not (``doubt``). Raises ImportError when the detector is needed and missing.
    Cost: `readings` (a few milliseconds for 64 KB), and the detector only for text that
    no single-byte encoding reads well.
    """
    found = readings(data)
    if found and found[0].score >= TRUSTED_READING:
        return found[0].encoding, ""
    return _detected(data)


def _detected(data: bytes) -> tuple[str | None, str]:
    """``(encoding, doubt)``: the encoding charset-normalizer guesses and trusts, or None
    and why not (``doubt``).

    Asked only for bytes that no single-byte encoding reads as text (East Asian
    multi-byte encodings, mostly), whose readings the detector often rates as a near
    tie. So the guess is trusted only when every encoding rated about as likely
    (`_NEAR_CHAOS`, `_NEAR_COHERENCE`) reads the sample the same way on at least
    `_AGREEMENT` of its non-ASCII characters; otherwise there is no trusted guess.
    Cost: the detector, plus one decoding of a 64 KB sample per close candidate.
    """
    detector = importlib.import_module("charset_normalizer")
    matches = list(detector.from_bytes(data))
    if not matches:
        return None, "no encoding fits"
    best = matches[0]
    close = [
        m
        for m in matches
        if m.chaos <= best.chaos + _NEAR_CHAOS and m.coherence >= best.coherence - _NEAR_COHERENCE
    ]
    names = [name for name in dict.fromkeys(_codec_name(m.encoding) for m in close) if name]
    if not names:
        return None, "no encoding fits"
    sample = data[:_SAMPLE]
    first = _strict(sample, names[0]) or ""
    rivals = [name for name in names[1:] if _agreement(first, _strict(sample, name) or "") < _AGREEMENT]
    if not rivals:
        return names[0], ""
    return (
        None,
        f"its encoding cannot be told with confidence ({names[0]} and {rivals[0]} read it differently)",
    )


def _agreement(one: str, other: str) -> float:
    """Share of the non-ASCII characters of ``one`` that ``other`` has at the same place
    (0 when the two differ in length: a multi-byte encoding against a single-byte one)."""
    if one == other:
        return 1.0
    if len(one) != len(other):
        return 0.0
    wide = [i for i, ch in enumerate(one) if ord(ch) > 127]
    if not wide:
        return 1.0
    return sum(one[i] == other[i] for i in wide) / len(wide)


def _strict(data: bytes, encoding: str) -> str | None:
    try:
        return data.decode(encoding)
    except (UnicodeDecodeError, LookupError):
        return None


def _checked(
    text: str, encoding: str, skip: int = 0, utf8: bytes | None = None
) -> tuple[str | None, str, str]:
    problem = _control_problem(text, encoding, skip, utf8)
    return (None, encoding, problem) if problem else (text, encoding, "")


def decode_text(data: bytes, *, declared: str | None = None) -> tuple[str | None, str, str]:
    """``(text, encoding, problem)``: text is None when the bytes are not text we can read.

    Parameters
    ----------
    data : bytes
        The whole file.
    declared : str, optional
        A charset the file names itself (an HTML ``<meta charset>``), tried after UTF-8.

    Returns
    -------
    text : str or None
    encoding : str
        The encoding used (``utf-8``, ``utf-16-le``, ``cp1252`` ...), recorded in the ledger;
        ``guessed cp1251`` when it is a statistical guess.
    problem : str
        Why the bytes are not text, with the byte offset; empty when ``text`` is set.

    >>> decode_text("Grüße".encode("utf-16-le"))
    ('Grüße', 'utf-16-le', '')
    >>> decode_text(b"ab\\x00cd")[2]
    'binary data: NUL byte at offset 2'
    """
    if data.startswith(_ANY_BOM):  # one test for all of them: most files have none
        for bom, name in _BOMS:
            if data.startswith(bom):
                try:
                    text = data[len(bom) :].decode(name.replace("-sig", ""))
                except UnicodeDecodeError as err:
                    return None, name, f"not valid {name} text: byte {err.start + len(bom)} cannot be decoded"
                return _checked(text, name, len(bom))
    # Without a NUL byte in the sample the bytes cannot be unmarked UTF-16 or UTF-32;
    # a NUL byte that is not part of them means binary data.
    nul = data.find(b"\x00")
    wide = _unmarked_wide(data) if 0 <= nul < _SAMPLE else None
    if wide is not None:
        text = _strict(data, wide)
        if text is not None:
            return _checked(text, wide)
    if nul >= 0:
        return None, "", f"binary data: NUL byte at offset {nul}"
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as err:
        bad = data[err.start : err.start + 1].hex()
        not_utf8 = f"not UTF-8 text: byte 0x{bad} at offset {err.start} cannot be decoded"
    else:
        # Most files: UTF-8 with no control character at all, screened on the bytes.
        if _utf8_without_controls(data[: 4 * _SAMPLE]):
            return text, "utf-8", ""
        return _checked(text, "utf-8", utf8=data)
    codec = _codec_name(declared) if declared else None
    if codec is not None:
        text = _strict(data, codec)
        if text is not None:
            return _checked(text, codec)
    if len(data) < MIN_DETECT_BYTES:
        return None, "", f"{not_utf8} (too short to detect its encoding)"
    if damaged_utf8(data):
        return None, "", f"{not_utf8} (its other bytes read as UTF-8: a damaged UTF-8 file?)"
    try:
        guessed, doubt = _guess(data)
    except ImportError:
        return None, "", f"{not_utf8} (install dedup[docs] to detect other encodings)"
    text = _strict(data, guessed) if guessed else None
    if text is None:
        return None, "", f"{not_utf8}, and {doubt or 'no other encoding fits'}"
    text, encoding, problem = _checked(text, guessed)
    return text, GUESSED + encoding, problem
