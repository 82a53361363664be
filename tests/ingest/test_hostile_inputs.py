"""Hostile inputs at the reading level: costly pages, member bombs, links out of the tree,
look-alike names, guessed encodings, and the folders an audit writes to."""

from __future__ import annotations

import io
import os
import tarfile
import zipfile

import pytest

from dedup.ingest import iter_documents, leaving_out, readers
from dedup.ingest.archives import _zip_member_count
from dedup.ingest.budget import WorkBudget
from dedup.ingest.document import Item
from dedup.ingest.html_text import html_to_text, html_work
from dedup.ingest.options import ReadOptions
from dedup.ingest.walk import LINK_OUTSIDE

# Units that made the standard library's parser quadratic ('<a ', 'x<', '<!--', an
# unclosed quote), and others that stress every part of the tokenizer and the extractor.
HOSTILE_UNITS = [
    "<a ",
    "x<",
    "<!--",
    "<a b='",
    '<a b="',
    "</a ",
    "<div>",
    "<nav>",
    "</x>",
    "<script>",
    "</scrip",
    "<main><nav>",
    "&#",
    "<!",
    "<?",
    "</",
    "<",
    "<a/",
    "<p a=b c d=e>",
]


@pytest.mark.parametrize("unit", HOSTILE_UNITS)
def test_html_work_doubles_when_the_markup_doubles(unit):
    # Counted, not timed: the steps for 2n units are within 3x those for n (4x would be
    # quadratic, as the standard library's parser was on the first four units).
    n = 4000
    small, large = html_work(unit * n), html_work(unit * 2 * n)
    assert small >= n
    assert large <= 3 * small, (unit, small, large)


def test_closing_many_open_elements_is_linear():
    # Each end tag looks only at the open elements it closes, and only when one is open.
    for markup in (lambda n: "<nav>" * n + "</x>" * n, lambda n: "<main>" + "<aside>" * n + "</main>" * n):
        assert html_work(markup(8000)) <= 3 * html_work(markup(4000))


def test_the_probe_page_reads_at_once():
    markup = "<a " * 33334  # the 100 KB page that stalled an audit for 258 s
    assert html_to_text(markup) == ("", "")
    assert html_work(markup) <= 4 * len(markup)


@pytest.mark.parametrize(
    ("markup", "text"),
    [
        ("<p>kept</p><a href='never closed", "kept"),  # a tag the text ends in is dropped
        ("a < b and c<d", "a < b and c"),  # "<" before a space is text; "<d" starts a tag
        ("<p>one</p><!-- never closed <p>hidden", "one"),
        ("<p>one</p><script>never closed", "one"),
        ("<p>one</p><script/>var x;</script><p>two</p>", "one\n\ntwo"),  # <script/> still opens a script
        ("<p title='a>b'>quoted</p>", "quoted"),
        ("<p>x</p></>", "x"),
        ("<p>fish &amp; chips</p></", "fish & chips\n</"),
    ],
)
def test_unclosed_markup_reads_as_a_browser_reads_it(markup, text):
    assert html_to_text(markup)[0] == text


def test_a_page_over_its_work_budget_is_skipped_and_the_run_goes_on(write_corpus, read, monkeypatch):
    # No page exceeds the real budget (the tokenizer is linear): a tiny one stands in for a
    # reader that would blow up.
    monkeypatch.setattr(readers, "WorkBudget", lambda chars, what, per_char: WorkBudget(chars, what, 1, 0))
    root = write_corpus({"a.html": "<p>one</p>" * 50, "b.txt": "plain text is read"})
    docs, _, by_key = read(root)
    assert [d.id for d in docs] == ["b.txt"]
    entry = by_key["a.html"]
    assert entry.status == "skipped"
    assert entry.reason.startswith("too costly to read (the HTML tokenizer took more than 500 steps")


def test_the_work_budget_bounds_a_reader():
    budget = WorkBudget(10, "a reader", per_char=2, floor=0)
    budget.spend(20)
    with pytest.raises(
        Exception, match=r"too costly to read \(a reader took more than 20 steps for 10 characters\)"
    ):
        budget.spend(1)


# -- archives -------------------------------------------------------------------------------------
def _empty_members_zip(count: int) -> bytes:
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w") as archive:
        for i in range(count):
            archive.writestr(f"m{i}.txt", b"")
    return buffer.getvalue()


def _empty_members_tar(count: int) -> bytes:
    buffer = io.BytesIO()
    with tarfile.open(fileobj=buffer, mode="w") as archive:
        for i in range(count):
            archive.addfile(tarfile.TarInfo(f"m{i}.txt"), io.BytesIO(b""))
    return buffer.getvalue()


def test_a_zip_listing_too_many_members_is_refused_before_it_is_opened(write_corpus, read, monkeypatch):
    root = write_corpus({"bomb.zip": _empty_members_zip(1001), "fine.txt": "still read"})
    opened = []
    monkeypatch.setattr(zipfile.ZipFile, "__init__", lambda self, *a, **k: opened.append(a))
    docs, ledger, by_key = read(root, max_archive_members=1000)
    assert opened == []  # its list of members was counted, never loaded
    assert [d.id for d in docs] == ["fine.txt"]
    assert by_key["bomb.zip"].status == "refused"
    assert by_key["bomb.zip"].reason == (
        "not read: it holds more than 1,000 members, the limit (a member bomb?) (raise --max-archive-members)"
    )
    assert len(ledger) == 2


def test_counting_a_zip_stops_after_the_limit():
    data = io.BytesIO(_empty_members_zip(70_000))  # past 65,535: the zip64 end records
    assert _zip_member_count(data, 10**6) == 70_000
    assert _zip_member_count(data, 100) == 101
    assert _zip_member_count(io.BytesIO(b"x" * 100 + data.getvalue()), 10**6) == 70_000  # data prepended


def test_a_tar_stops_at_the_member_limit(write_corpus, read):
    root = write_corpus({"many.tar": _empty_members_tar(300)})
    _, ledger, by_key = read(root, max_archive_members=100)
    members = [e for e in ledger if e.input.startswith("many.tar!/")]
    assert len(members) == 100
    assert by_key["many.tar"].status == "refused"
    assert by_key["many.tar"].reason.startswith(
        "rest of the archive not read: it holds more than 100 members"
    )


def test_the_run_limit_counts_every_archive(write_corpus, read):
    root = write_corpus({"a.zip": _empty_members_zip(60), "b.zip": _empty_members_zip(60)})
    _, ledger, by_key = read(root, max_run_members=100)
    assert sum(e.input.startswith("a.zip!/") for e in ledger) == 60
    assert sum(e.input.startswith("b.zip!/") for e in ledger) == 40
    assert by_key["b.zip"].reason == (
        "rest of the archive not read: the run has taken in 100 archive members, its limit (raise --max-run-members)"
    )


def test_member_limits_must_be_positive():
    for name in ("max_archive_members", "max_run_members", "work_per_char"):
        with pytest.raises(ValueError, match=name):
            ReadOptions(**{name: 0})


# -- names, links and left-out folders ------------------------------------------------------------
def test_a_name_with_invalid_bytes_and_its_escaped_spelling_get_distinct_stable_ids(tmp_path):
    root = tmp_path / "names"
    root.mkdir()
    (root / os.fsdecode(b"caf\xe9.txt")).write_text("the name holds the byte e9")
    (root / "caf\\xe9.txt").write_text("the name holds a backslash, an x, an e and a 9")

    def ids() -> list[str]:
        ledger: list = []
        docs = list(iter_documents([str(root)], ledger=ledger))
        assert len(ledger) == 2
        return sorted(d.id for d in docs)

    first = ids()
    assert first == ["caf\\\\xe9.txt", "caf\\xe9.txt"]
    assert ids() == first


def test_a_name_with_invalid_bytes_inside_a_tar_gets_its_own_id(write_corpus, read):
    buffer = io.BytesIO()
    with tarfile.open(fileobj=buffer, mode="w", format=tarfile.GNU_FORMAT) as archive:
        for name, text in ((b"caf\xe9.txt", b"byte"), (b"caf\\xe9.txt", b"escaped spelling")):
            info = tarfile.TarInfo(name.decode("utf-8", "surrogateescape"))
            info.size = len(text)
            archive.addfile(info, io.BytesIO(text))
    root = write_corpus({"names.tar": buffer.getvalue()})
    docs, _, _ = read(root)
    assert sorted(d.id for d in docs) == ["names.tar!/caf\\\\xe9.txt", "names.tar!/caf\\xe9.txt"]


def test_links_to_files_outside_the_audited_folders_are_not_followed(tmp_path, read):
    outside = tmp_path / "outside.txt"
    outside.write_text("a file outside the audited folder")
    root = tmp_path / "audited"
    (root / "sub").mkdir(parents=True)
    (root / "inside.txt").write_text("a file inside")
    (root / "out.txt").symlink_to(outside)
    (root / "sub" / "in.txt").symlink_to(root / "inside.txt")
    docs, _, by_key = read(root)
    assert [d.id for d in docs] == ["inside.txt"]
    assert by_key["out.txt"].status == "skipped" and by_key["out.txt"].reason == LINK_OUTSIDE
    assert by_key["sub/in.txt"].reason == "same file as inside.txt, read once"  # inside: followed
    docs, _, by_key = read(root, follow_links=True)
    assert sorted(d.id for d in docs) == ["inside.txt", "out.txt"]
    # A file given by name is read wherever its link points: the user named it.
    docs, _, _ = read(root / "out.txt")
    assert [d.text for d in docs] == ["a file outside the audited folder"]


def test_a_file_swapped_for_a_link_after_the_walk_is_not_read(tmp_path, monkeypatch):
    from dedup.ingest import walk

    secret = tmp_path / "secret.txt"
    secret.write_text("not to be read")
    root = tmp_path / "audited"
    root.mkdir()
    (root / "a.txt").write_text("harmless")
    real_found = walk._Found

    def swapping(path, rel, walked=True):  # the swap happens between the walk and the read
        os.remove(path)
        os.symlink(secret, path)
        return real_found(path, rel, walked)

    monkeypatch.setattr(walk, "_Found", swapping)
    ledger: list = []
    assert list(iter_documents([str(root)], ledger=ledger)) == []
    assert ledger[0].status == "skipped" and ledger[0].reason.startswith("cannot be read")


def test_left_out_folders_are_recorded_and_not_read(write_corpus):
    root = write_corpus({"a.txt": "kept", "out/audit.json": "{}", "out/ledger.csv": "x", "work/t.txt": "w"})
    ledger: list = []
    left = [(str(root / "out"), "output folder of this audit (--out): not read")]
    left += [(str(root / "work"), "work folder of this audit: not read")]
    with leaving_out(left):
        docs = list(iter_documents([str(root)], ledger=ledger))
        # A path given that lies in a left-out folder is not read either.
        inner: list = []
        assert list(iter_documents([str(root / "out" / "ledger.csv")], ledger=inner)) == []
    assert [d.id for d in docs] == ["a.txt"]
    assert {(e.input, e.reason) for e in ledger if e.status == "skipped"} == {
        ("out", "output folder of this audit (--out): not read"),
        ("work", "work folder of this audit: not read"),
    }
    assert inner[0].reason == "output folder of this audit (--out): not read"
    # Outside the block nothing is left out.
    outside: list = []
    list(iter_documents([str(root)], ledger=outside))
    assert [e.input for e in outside] == ["a.txt", "out/audit.json", "out/ledger.csv", "work/t.txt"]


def test_a_guessed_encoding_is_recorded_as_a_guess(write_corpus, read):
    pytest.importorskip("charset_normalizer")
    text = "Привет! Это длинный текст о правилах отпуска для сотрудников кооператива. " * 2
    root = write_corpus({"ru.txt": text.encode("cp1251")})
    docs, _, by_key = read(root)
    assert docs[0].text == text
    assert by_key["ru.txt"].encoding == "guessed cp1251"


# -- record values --------------------------------------------------------------------------------
def test_json_numbers_json_does_not_have_make_a_record_invalid(ledger_check):
    data = b'{"text": "a", "d": NaN}\n{"text": "b", "d": -Infinity}\n{"text": "c", "d": 1e999}\n{"text": "d", "d": 1}\n'
    item = Item("r.jsonl", "r.jsonl", "jsonl", len(data))
    outcomes = list(readers.read_bytes(data, item, ReadOptions()))
    docs = [doc for doc, _ in outcomes if doc is not None]
    ledger_check(docs, [entry for _, entry in outcomes])
    assert [d.text for d in docs] == ["d"]
    reasons = [entry.reason for doc, entry in outcomes if doc is None]
    assert reasons == [
        "line 1: not valid JSON (NaN is not a JSON number)",
        "line 2: not valid JSON (-Infinity is not a JSON number)",
        "line 3: not valid JSON (the number 1e999 is too large)",
    ]
