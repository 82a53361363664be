"""Property-based checks: any bytes, in any format, and any archive are read or accounted for.

Never an exception, and every input (file, member, record) exactly once in the ledger.
"""

from __future__ import annotations

import io
import tarfile
import zipfile
from collections import Counter

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from dedup.ingest.document import Item
from dedup.ingest.options import ReadOptions
from dedup.ingest.readers import FORMATS, read_bytes

ALL_FORMATS = sorted(set(FORMATS.values()))

# Bytes that look a little like each kind of input, so readers get past their first check.
_PREFIXES = [
    b"",
    b"PK\x03\x04",
    b"%PDF-1.4\n",
    b"\x1f\x8b\x08\x00",
    b"From a@b Mon Jan 1 2024\nSubject: x\n\n",
    b'{"text": "',
    b'[{"text": 1}, ',
    b"id,text\n1,",
    b"<html><body><p>",
    b"\xef\xbb\xbf",
    b"\xff\xfe",
    b"PAR1",
]


@st.composite
def hostile_bytes(draw) -> bytes:
    return draw(st.sampled_from(_PREFIXES)) + draw(st.binary(max_size=400))


def _outcomes(data: bytes, fmt: str, **options):
    item = Item("in.x", "in.x", fmt, len(data), None)
    opts = ReadOptions(id_field=options.pop("id_field", None), **options)
    return list(read_bytes(data, item, opts))


@settings(
    max_examples=300,
    deadline=None,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture],
)
@given(data=hostile_bytes(), fmt=st.sampled_from(ALL_FORMATS), id_field=st.sampled_from([None, "id"]))
def test_every_reader_accounts_for_any_bytes(ledger_check, data, fmt, id_field):
    outcomes = _outcomes(data, fmt, id_field=id_field)
    assert outcomes, "an input without a ledger entry"
    docs = [doc for doc, _ in outcomes if doc is not None]
    ledger = [entry for _, entry in outcomes]
    ledger_check(docs, ledger)
    for entry in ledger:
        assert entry.input == "in.x" or entry.input.startswith("in.x!/")
        for value in (entry.input, entry.reason, entry.record, entry.document_id):
            value.encode("utf-8")
    for doc in docs:
        doc.text.encode("utf-8")
        doc.title.encode("utf-8")


_SEGMENTS = st.sampled_from(["a", "b", "docs", ".hidden", "..", ".git", "ü", "x y", "CVS"])
_LEAVES = st.sampled_from(["n.txt", "n.md", "p.html", "img.png", "noext", "inner.zip", ".dot.txt", "N.TXT"])


@st.composite
def member_names(draw) -> str:
    prefix = draw(st.sampled_from(["", "", "", "/", "../", "C:/"]))
    folders = draw(st.lists(_SEGMENTS, max_size=3))
    return prefix + "/".join([*folders, draw(_LEAVES)])


@st.composite
def archives(draw) -> tuple[str, bytes, list[str]]:
    kind = draw(st.sampled_from(["zip", "tar", "tar.gz", "tar.xz"]))
    members = draw(
        st.lists(
            st.tuples(
                member_names(), st.one_of(st.binary(max_size=300), st.text(max_size=300).map(str.encode))
            ),
            max_size=8,
        )
    )
    buffer = io.BytesIO()
    if kind == "zip":
        with zipfile.ZipFile(buffer, "w", zipfile.ZIP_DEFLATED) as archive:
            for name, data in members:
                archive.writestr(name, data)
    else:
        mode = {"tar": "w", "tar.gz": "w:gz", "tar.xz": "w:xz"}[kind]
        with tarfile.open(fileobj=buffer, mode=mode, format=tarfile.PAX_FORMAT) as archive:
            for name, data in members:
                info = tarfile.TarInfo(name)
                info.size = len(data)
                archive.addfile(info, io.BytesIO(data))
    return kind, buffer.getvalue(), [name for name, _ in members]


@settings(
    max_examples=200,
    deadline=None,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture],
)
@pytest.mark.filterwarnings("ignore:Duplicate name")
@given(archive=archives(), cut=st.one_of(st.none(), st.integers(min_value=0, max_value=2000)))
def test_every_member_of_any_archive_is_accounted_for_once(ledger_check, archive, cut):
    kind, data, names = archive
    if cut is not None:
        data = data[:cut]  # a damaged copy: the members before the damage still count
    outcomes = _outcomes(data, kind)
    docs = [doc for doc, _ in outcomes if doc is not None]
    ledger = [entry for _, entry in outcomes]
    ledger_check(docs, ledger)
    if cut is None:
        # Each member has one entry per copy of its name; nested archives add theirs below it.
        expected = Counter(f"in.x!/{name}" for name in names)
        found = Counter(e.input for e in ledger if e.input != "in.x" and "!/" not in e.input[len("in.x!/") :])
        assert found == expected
        if not names:
            assert [(e.input, e.status) for e in ledger] == [("in.x", "empty")]
    else:
        assert ledger  # at least the archive's own entry


@settings(max_examples=50, deadline=None)
@given(text=st.text(max_size=2000), limit=st.integers(min_value=1, max_value=50))
def test_truncation_keeps_at_most_the_limit(text, limit):
    (doc, entry), *_ = _outcomes(text.encode("utf-8"), "text", max_text_chars=limit)
    if doc is not None:
        assert len(doc.text) <= limit
        assert (entry.status == "truncated") == (len(text) > limit)


@settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    data=st.one_of(
        st.binary(max_size=300),
        st.text(max_size=300).map(lambda t: t.encode("utf-8", "surrogatepass")),
        st.text(max_size=300).map(lambda t: ("\ufeff" + t).encode("utf-8", "surrogatepass")),
        st.text(alphabet="abc é\r\n\t\x00ü", max_size=300).map(lambda t: t.encode("cp1252", "replace")),
    ),
    fmt=st.sampled_from(["text", "markdown", "html"]),
    limit=st.sampled_from([5, 10**6]),
)
def test_bytes_kept_with_a_document_are_its_text_in_utf8(data, fmt, limit):
    """The bytes a reader keeps (to spare encoding the text again) are exactly the text's UTF-8."""
    for doc, _ in _outcomes(data, fmt, max_text_chars=limit):
        if doc is not None and doc.utf8 is not None:
            assert doc.utf8 == doc.text.encode("utf-8")
