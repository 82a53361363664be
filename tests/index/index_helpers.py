"""Helpers shared by the index tests."""

from __future__ import annotations

import contextlib
import functools
import sqlite3
from collections.abc import Iterator

import pytest

from dedup.index import build, open_index
from dedup.index.postings import load_statistics


def edited(text: str, word: str, where: float = 0.5) -> str:
    """The text with one word replaced (a near-duplicate: Jaccard about 0.97 for 2 KB)."""
    words = text.split(" ")
    words[int(len(words) * where)] = word
    return " ".join(words)


@contextlib.contextmanager
def sqlite(path) -> Iterator[sqlite3.Connection]:
    """A plain SQLite connection to an index file in autocommit mode, closed on leaving.

    (``with sqlite3.connect(...)`` commits but does not close, and a connection left open
    keeps locks and shared memory that other tests would see.)
    """
    connection = sqlite3.connect(str(path), isolation_level=None)
    try:
        yield connection
    finally:
        connection.close()


def copy_index(source, target) -> None:
    """Copy an index with SQLite's backup API (copying the file under open connections is unsafe)."""
    with sqlite(source) as a, sqlite(target) as b:
        a.backup(b)


# The corpus `v1_index.sql` was built from (by the dedup of schema version 1, with one audit
# recorded and one decision imported): three pages sharing a header and a footer line, a
# near-copy of one of them, and a lone note.
V1_CORPUS = {
    "pages/alpha.txt": (
        "Acme intranet - home - search - help\n"
        "The alpha project moves the billing service to the new cluster in three steps.\n"
        "First the read replicas are moved, then the writers, then the batch jobs.\n"
        "Copyright Acme Corp, all rights reserved.\n"
    ),
    "pages/beta.txt": (
        "Acme intranet - home - search - help\n"
        "Beta testers report that the new login page hangs on slow networks at times.\n"
        "A fix that retries the token request is planned for the next release.\n"
        "Copyright Acme Corp, all rights reserved.\n"
    ),
    "pages/gamma.txt": (
        "Acme intranet - home - search - help\n"
        "Gamma rays from the lab's new source need a second shielded room this spring.\n"
        "Facilities will quote the cost of the lead lining before the end of May.\n"
        "Copyright Acme Corp, all rights reserved.\n"
    ),
    "pages/gamma-copy.txt": (
        "Acme intranet - home - search - help\n"
        "Gamma rays from the lab's new source need a second shielded room this summer.\n"
        "Facilities will quote the cost of the lead lining before the end of May.\n"
        "Copyright Acme Corp, all rights reserved.\n"
    ),
    "notes/lone.md": "A lone note about the coffee machine on the third floor, which is broken again.\n",
}


HEADER = "Acme intranet | home | people | search | help"
FOOTER = "Copyright Acme Corp. Internal use only; do not forward outside the company."
NOTICE = "Notice: the offices close at noon on Friday for the move to the new building."


@functools.lru_cache(maxsize=1)
def _bodies() -> tuple[str, ...]:
    from benchmarks.corpus import synthetic_documents

    return tuple(text for _, text in synthetic_documents(30, seed=5, doc_bytes=900))


def body(k: int, paragraphs: int = 3) -> list[str]:
    """Distinct body lines (paragraphs of invented words) for page ``k`` (below 30)."""
    lines = [line for line in _bodies()[k].split("\n") if len(line.split()) > 8]
    return lines[:paragraphs]


def page(seed: int, *, header: bool = True, notice: bool = False, paragraphs: int = 3) -> str:
    """A page of the templated corpus: its own body lines between shared lines."""
    lines = ([HEADER] if header else []) + (["", NOTICE] if notice else []) + body(seed, paragraphs)
    return "\n".join(lines + ([FOOTER] if header else [])) + "\n"


def templated_corpus() -> dict[str, str | bytes]:
    """Pages sharing a header and footer, two sharing a notice, a near-copy, an exact copy,
    a page mostly template (compared whole), texts the normalize step changes (CRLF
    breaks, full-width letters, ß, a soft line break), an HTML page and a file without words."""
    near = page(2).replace(body(2)[1].split()[3], "walrus", 1)
    return {
        **{f"pages/p{k}.txt": page(k) for k in range(5)},
        "pages/p2-near.txt": near,
        "pages/p3-copy.txt": page(3),
        "pages/short.txt": f"{HEADER}\nShort page.\n{FOOTER}\n",
        "notes/q0.txt": page(10, header=False, notice=True),
        "notes/q1.txt": page(11, header=False, notice=True),
        "notes/unicode.txt": "ＦＵＬＬ width Straße\r\nand a CRLF line\r\n\r\n" + "\n".join(body(20)) + "\n",
        "notes/lone.md": "\n".join(body(21)) + "\n",
        "web/page.html": (
            f"<html><body><nav>{HEADER}</nav><p>{body(22)[0]}</p><p>{body(22)[1]}</p>"
            f"<footer>{FOOTER}</footer></body></html>"
        ),
        "notes/nothing.txt": " ... !!! ",
    }


def stored_state(path) -> dict:
    """Everything a run stores about texts, keyed by content hash (ids differ between runs)."""
    with sqlite(path) as db:
        texts = {
            row[0]: row[1:]
            for row in db.execute(
                "SELECT t.content_hash, t.characters, t.words, t.terms, t.shingle_count, t.sketched_hash, "
                "s.signature, s.shingles, l.lines, c.form FROM texts t JOIN sketches s ON s.text_id = t.text_id "
                "JOIN text_lines l ON l.text_id = t.text_id JOIN canonicals c ON c.text_id = t.text_id"
            )
        }
        templates = db.execute("SELECT rule, texts, threshold, line_hashes, counts FROM templates").fetchall()
    with open_index(str(path)) as index, index.reading() as db:
        stats = load_statistics(db)
        hash_of = dict(db.execute("SELECT text_id, content_hash FROM texts"))
    norms = {hash_of[int(t)]: n for t, n in zip(stats.text_ids.tolist(), stats.norms.tolist())}
    return {
        "texts": texts,
        "templates": templates,
        "norms": norms,
        "df": (stats.columns.tolist(), stats.df.tolist()),
    }


def assert_same_as_fresh(root, path, settings, tmp_path, name: str) -> None:
    """The index at ``path`` stores what a fresh build of ``root`` with ``settings`` stores."""
    fresh = tmp_path / f"{name}.index"
    build([str(root)], str(fresh), settings)
    mine, theirs = stored_state(path), stored_state(fresh)
    assert set(mine["texts"]) == set(theirs["texts"])
    for digest, row in theirs["texts"].items():
        assert mine["texts"][digest] == row, digest
    assert mine["templates"] == theirs["templates"]
    assert mine["df"] == theirs["df"]
    assert mine["norms"].keys() == theirs["norms"].keys()
    for digest, norm in theirs["norms"].items():
        assert mine["norms"][digest] == pytest.approx(norm, rel=1e-12)
