"""Bytes to text: marks, wide encodings without a mark, UTF-8, legacy encodings, binary data."""

from __future__ import annotations

import pytest
from hypothesis import given
from hypothesis import strategies as st

from dedup.ingest import decode_text
from dedup.ingest.encoding import MIN_DETECT_BYTES

GREETING = "Grüße aus Köln — naïve café"


@pytest.mark.parametrize(
    ("encoding", "recorded"),
    [
        ("utf-8-sig", "utf-8-sig"),
        ("utf-16", "utf-16-le"),
        ("utf-16-be", "utf-16-be"),
        ("utf-32", "utf-32-le"),
        ("utf-32-be", "utf-32-be"),
    ],
)
def test_byte_order_marks(encoding, recorded):
    data = GREETING.encode(encoding)
    if encoding in ("utf-16-be", "utf-32-be"):
        data = "\ufeff".encode(encoding) + data
    assert decode_text(data) == (GREETING, recorded, "")


@pytest.mark.parametrize("encoding", ["utf-16-le", "utf-16-be", "utf-32-le", "utf-32-be"])
def test_wide_encodings_without_a_mark_are_recognised(encoding):
    text = "Plain words of a policy document.\nSecond line."
    assert decode_text(text.encode(encoding)) == (text, encoding, "")


def test_invalid_utf8_is_skipped_with_its_byte_offset():
    data = b"valid start \xff\xfe then more"  # too short for a guess
    text, _, problem = decode_text(data)
    assert text is None
    assert problem.startswith("not UTF-8 text: byte 0xff at offset 12 cannot be decoded")


def test_invalid_text_after_a_mark_names_the_offset():
    text, encoding, problem = decode_text(b"\xef\xbb\xbfok \xc3\x28")
    assert text is None and encoding == "utf-8-sig"
    assert problem == "not valid utf-8-sig text: byte 6 cannot be decoded"


def test_nul_bytes_mean_binary_data():
    assert decode_text(b"GIF89a\x01\x00\x01\x00\x80\x00\x00") == (
        None,
        "",
        "binary data: NUL byte at offset 7",
    )


def test_control_characters_mean_binary_data_even_when_valid_utf8():
    text, _, problem = decode_text(bytes(range(1, 9)) * 20 + b"some words")
    assert text is None and problem == "binary data: control character 0x01 at offset 0"


def test_text_controls_are_text():
    data = b"col\tcol\r\n\x0cpage two \x1b[1mbold\x1b[0m b\x08b"
    assert decode_text(data)[0] == data.decode()


def test_legacy_encodings_are_detected_and_recorded():
    pytest.importorskip("charset_normalizer")
    text = "Привет! Это длинный текст о правилах отпуска для сотрудников кооператива."
    decoded, encoding, problem = decode_text(text.encode("cp1251"))
    assert (decoded, encoding, problem) == (text, "guessed cp1251", "")  # recorded as a guess


class _Match:
    def __init__(self, encoding: str, chaos: float = 0.0, coherence: float = 0.5) -> None:
        self.encoding, self.chaos, self.coherence = encoding, chaos, coherence


def _detector(monkeypatch, *matches: _Match) -> None:
    """Make charset-normalizer rate the encodings as given (its ratings vary by version)."""
    import sys
    import types

    fake = types.ModuleType("charset_normalizer")
    fake.from_bytes = lambda data: list(matches)
    monkeypatch.setitem(sys.modules, "charset_normalizer", fake)


# Invented Korean text in EUC-KR: no single-byte encoding reads it as text, so the
# detector is asked.
KOREAN = "이것은 문서 검사에 관한 짧은 설명입니다. 우리는 비슷한 문단을 찾고 그 관계를 보고합니다. " * 2
KOREAN_BYTES = KOREAN.encode("euc-kr")


def test_a_guess_its_close_rivals_contradict_is_not_used(monkeypatch):
    # cp775 and koi8-r read the bytes differently: no trusted guess.
    _detector(monkeypatch, _Match("cp775", coherence=0.58), _Match("koi8_r", coherence=0.52))
    text, encoding, problem = decode_text(KOREAN_BYTES)
    assert text is None and encoding == ""
    assert problem.endswith(
        "its encoding cannot be told with confidence (cp775 and koi8-r read it differently)"
    )


def test_windows_1252_does_not_settle_a_contradicted_detector_guess(monkeypatch):
    # windows-1252 was tried before the detector and did not read these bytes as text.
    _detector(monkeypatch, _Match("cp775", coherence=0.58), _Match("cp1252", coherence=0.53))
    text, _, problem = decode_text(KOREAN_BYTES)
    assert text is None and "(cp775 and cp1252 read it differently)" in problem


def test_a_guess_is_kept_when_rivals_agree_or_are_far_behind(monkeypatch):
    # euc-kr and cp949 read these characters alike; mac_roman is rated far worse.
    _detector(monkeypatch, _Match("euc_kr"), _Match("cp949"), _Match("mac_roman", chaos=0.3))
    assert decode_text(KOREAN_BYTES) == (KOREAN, "guessed euc_kr", "")


def test_the_detector_reads_east_asian_text():
    pytest.importorskip("charset_normalizer")
    text, encoding, problem = decode_text(KOREAN_BYTES)
    assert text == KOREAN and encoding.startswith("guessed ") and not problem


def test_short_non_utf8_is_not_guessed():
    data = "café".encode("latin-1")
    assert len(data) < MIN_DETECT_BYTES
    text, _, problem = decode_text(data)
    assert text is None and "too short to detect its encoding" in problem


def test_a_declared_charset_is_used_after_utf8():
    data = "Résumé de la réunion".encode("cp1252")
    assert decode_text(data, declared="windows-1252") == ("Résumé de la réunion", "cp1252", "")


def test_without_the_detector_the_reason_says_what_to_install(monkeypatch):
    import sys

    monkeypatch.setitem(sys.modules, "charset_normalizer", None)
    text, _, problem = decode_text(KOREAN_BYTES)
    assert text is None and "install dedup[docs] to detect other encodings" in problem


def test_western_text_needs_no_detector(monkeypatch):
    import sys

    monkeypatch.setitem(sys.modules, "charset_normalizer", None)
    french = "Résumé de la réunion du comité, à propos des congés payés et de l'été."
    assert decode_text(french.encode("cp1252")) == (french, "guessed cp1252", "")


@given(st.binary(max_size=600))
def test_any_bytes_give_text_or_a_reason(data):
    text, encoding, problem = decode_text(data)
    assert (text is None) == bool(problem)
    if text is not None:
        text.encode("utf-8")  # whatever decoded can be written out
        assert encoding
