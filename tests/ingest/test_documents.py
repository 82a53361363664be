"""Office documents, PDF and e-mail; and skips naming the extra when a parser is missing."""

from __future__ import annotations

import io
import sys
import zipfile

import pytest

ODT_CONTENT = b"""<?xml version="1.0" encoding="UTF-8"?>
<office:document-content xmlns:office="urn:oasis:names:tc:opendocument:xmlns:office:1.0"
 xmlns:text="urn:oasis:names:tc:opendocument:xmlns:text:1.0"
 xmlns:table="urn:oasis:names:tc:opendocument:xmlns:table:1.0"><office:body><office:text>
<text:h text:outline-level="1">Leave policy</text:h>
<text:p>Staff<text:s text:c="2"/>get<text:tab/>25 days<text:note><text:note-citation>1</text:note-citation>
<text:note-body><text:p>Part-time staff pro rata.</text:p></text:note-body></text:note>.</text:p>
<office:annotation><text:p>REVIEWER COMMENT</text:p></office:annotation>
<text:list><text:list-item><text:p>Ask your manager</text:p></text:list-item></text:list>
<table:table><table:table-row><table:table-cell><text:p>Grade A</text:p></table:table-cell></table:table-row></table:table>
<text:p>Huge <text:s text:c="99999999999"/>gap</text:p>
</office:text></office:body></office:document-content>"""


def _zip(members: dict[str, bytes]) -> bytes:
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w", zipfile.ZIP_DEFLATED) as archive:
        for name, data in members.items():
            archive.writestr(name, data)
    return buffer.getvalue()


def _pdf_with_text(text: str) -> bytes:
    """A one-page PDF whose text layer holds ``text`` (written by hand: no PDF writer needed)."""
    stream = b"BT /F1 12 Tf 20 200 Td (" + text.encode("latin-1") + b") Tj ET"
    objects = [
        b"<< /Type /Catalog /Pages 2 0 R >>",
        b"<< /Type /Pages /Kids [3 0 R] /Count 1 >>",
        b"<< /Type /Page /Parent 2 0 R /MediaBox [0 0 300 300] /Contents 4 0 R "
        b"/Resources << /Font << /F1 5 0 R >> >> >>",
        b"<< /Length %d >>\nstream\n" % len(stream) + stream + b"\nendstream",
        b"<< /Type /Font /Subtype /Type1 /BaseFont /Helvetica >>",
    ]
    out, offsets = b"%PDF-1.4\n", []
    for number, body in enumerate(objects, 1):
        offsets.append(len(out))
        out += b"%d 0 obj\n" % number + body + b"\nendobj\n"
    xref = len(out)
    out += b"xref\n0 %d\n0000000000 65535 f \n" % (len(objects) + 1)
    out += b"".join(b"%010d 00000 n \n" % o for o in offsets)
    out += b"trailer\n<< /Size %d /Root 1 0 R >>\nstartxref\n%d\n%%%%EOF\n" % (len(objects) + 1, xref)
    return out


def test_odt_paragraphs_headings_lists_tables_and_notes(write_corpus, read):
    root = write_corpus(
        {
            "a.odt": _zip(
                {"mimetype": b"application/vnd.oasis.opendocument.text", "content.xml": ODT_CONTENT}
            ),
            "locked.odt": _zip(
                {"content.xml": b"\x00garbled", "META-INF/manifest.xml": b"<manifest:encryption-data/>"}
            ),
            "nocontent.odt": _zip({"mimetype": b"x"}),
            "notzip.odt": b"plain text with an odt name",
        }
    )
    docs, _, by_key = read(root)
    (doc,) = docs
    assert doc.title == "Leave policy"
    lines = doc.text.split("\n")
    assert lines[:2] == ["Leave policy", "Staff  get\t25 days."]
    assert "Part-time staff pro rata." in lines and "Ask your manager" in lines and "Grade A" in lines
    assert "REVIEWER COMMENT" in lines  # annotations are paragraphs too, but not inside the sentence
    assert len(doc.text) < 2000  # the encoded space run is capped
    assert by_key["locked.odt"].reason == "encrypted document: needs a password"
    assert by_key["nocontent.odt"].reason == "not an OpenDocument text: it has no content.xml"
    assert by_key["notzip.odt"].reason.startswith("cannot be read as OpenDocument text:")


def test_docx_in_document_order(write_corpus, read):
    docx = pytest.importorskip("docx")
    document = docx.Document()
    document.add_heading("Annual leave", 1)
    document.add_paragraph("Staff get 25 days.")
    table = document.add_table(rows=2, cols=2)
    table.cell(0, 0).text, table.cell(0, 1).text = "Grade", "Days"
    table.cell(1, 0).merge(table.cell(1, 1)).text = "All grades"
    document.add_paragraph("Ask your manager.", style="List Bullet")
    buffer = io.BytesIO()
    document.save(buffer)
    root = write_corpus({"a.docx": buffer.getvalue(), "b.docx": b"PK\x03\x04 broken"})
    docs, _, by_key = read(root)
    (doc,) = docs
    assert doc.text == "Annual leave\nStaff get 25 days.\nGrade\tDays\nAll grades\nAsk your manager."
    assert doc.title == "Annual leave"
    assert by_key["b.docx"].reason.startswith("cannot be read as .docx:")


def test_pdf_text_layer_scans_and_passwords(write_corpus, read):
    pypdf = pytest.importorskip("pypdf")
    blank, locked = io.BytesIO(), io.BytesIO()
    writer = pypdf.PdfWriter()
    writer.add_blank_page(200, 200)
    writer.write(blank)
    writer = pypdf.PdfWriter(clone_from=io.BytesIO(_pdf_with_text("Secret minutes")))
    writer.encrypt("letmein", algorithm="RC4-128")
    writer.write(locked)
    root = write_corpus(
        {
            "text.pdf": _pdf_with_text("Minutes of the board meeting"),
            "scan.pdf": blank.getvalue(),
            "locked.pdf": locked.getvalue(),
            "broken.pdf": b"%PDF-1.7\n1 0 obj << /Type /Catalog",
            "renamed.pdf": b"just some text",
        }
    )
    docs, _, by_key = read(root)
    assert [(d.id, d.text) for d in docs] == [("text.pdf", "Minutes of the board meeting")]
    assert by_key["scan.pdf"].reason == "no text layer — scanned? (1 page)"
    assert by_key["locked.pdf"].reason.startswith("encrypted PDF")
    for name in ("broken.pdf", "renamed.pdf"):
        assert by_key[name].status == "skipped" and by_key[name].reason.startswith("cannot be read as PDF:")


@pytest.mark.parametrize(
    ("module", "name", "extension"), [("docx", "a.docx", ".docx"), ("pypdf", "a.pdf", ".pdf")]
)
def test_missing_parser_skips_the_file_not_the_run(write_corpus, read, monkeypatch, module, name, extension):
    monkeypatch.setitem(sys.modules, module, None)  # importing it now fails as if not installed
    root = write_corpus({name: b"whatever", "ok.txt": "still read"})
    docs, _, by_key = read(root)
    assert [d.id for d in docs] == ["ok.txt"]
    assert by_key[name].reason == f"install dedup[docs] to read {extension}"


def test_missing_parquet_parser(tmp_path, read, monkeypatch):
    monkeypatch.setitem(sys.modules, "pyarrow", None)
    monkeypatch.setitem(sys.modules, "pyarrow.parquet", None)
    (tmp_path / "r.parquet").write_bytes(b"PAR1")
    _, _, by_key = read(tmp_path)
    assert by_key["r.parquet"].reason == "install dedup[docs] to read .parquet"


EML = b"""From: =?utf-8?q?J=C3=B6rg?= <jorg@example.org>
To: desk@example.org
Subject: =?utf-8?b?UGFzc3dvcmQgcmVzZXQ=?=
Date: Tue, 02 Jan 2024 09:30:00 +0100
Message-ID: <m1@example.org>
MIME-Version: 1.0
Content-Type: multipart/mixed; boundary="b1"

--b1
Content-Type: multipart/alternative; boundary="b2"

--b2
Content-Type: text/html; charset=utf-8

<p>HTML version</p>
--b2
Content-Type: text/plain; charset=iso-8859-1
Content-Transfer-Encoding: quoted-printable

Please reset my password, J=F6rg.
--b2--
--b1
Content-Type: text/plain
Content-Disposition: attachment; filename="notes.txt"

attachment text
--b1--
"""


def test_eml_plain_body_subject_and_metadata(write_corpus, read):
    html_only = (
        b"Subject: Page\nContent-Type: text/html; charset=x-unknown\n\n<nav>menu</nav><p>Only HTML</p>\n"
    )
    root = write_corpus({"a.eml": EML, "b.eml": html_only, "c.eml": b"Subject: x\n\n\x00\x01"})
    docs, _, by_key = read(root)
    a, b = docs
    assert (a.title, a.text, a.encoding) == (
        "Password reset",
        "Please reset my password, Jörg.",
        "iso-8859-1",
    )
    assert a.metadata == {
        "from": "Jörg <jorg@example.org>",
        "to": "desk@example.org",
        "date": "2024-01-02T09:30:00+01:00",
        "message_id": "<m1@example.org>",
    }
    assert (b.title, b.text) == ("Page", "Only HTML")
    assert by_key["c.eml"].reason == "binary data: NUL byte at offset 12"


def test_mbox_one_document_per_message(write_corpus, read):
    mbox = (
        b"From alice@example.org Mon Jan  1 10:00:00 2024\nSubject: First\n\nFirst body\n>From the start\n\n"
        b"From bob@example.org Mon Jan  1 11:00:00 2024\nSubject: Second\n\n\n"
        b"From carol@example.org Mon Jan  1 12:00:00 2024\nSubject: Third\nContent-Type: text/plain; charset=utf-8\n"
        b"Content-Transfer-Encoding: base64\n\nVGhpcmQgYm9keQ==\n"
    )
    root = write_corpus({"box.mbox": mbox, "not.mbox": b"Subject: no From line\n\nbody\n", "empty.mbox": b""})
    docs, _, by_key = read(root)
    assert [(d.id, d.title, d.text) for d in docs] == [
        ("box.mbox#message 1", "First", "First body\nFrom the start"),
        ("box.mbox#message 2", "Second", ""),
        ("box.mbox#message 3", "Third", "Third body"),
    ]
    assert by_key["box.mbox#message 2"].status == "empty"
    assert by_key["not.mbox"].reason.startswith("not an mbox mailbox")
    assert by_key["empty.mbox"].status == "empty" and by_key["empty.mbox"].reason == "no messages"
