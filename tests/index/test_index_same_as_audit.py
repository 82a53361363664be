"""The index normalizes, strips template lines and sketches exactly as an audit does, and an
update stores what a fresh build of the final corpus stores.

Reference for "as an audit does": `dedup.audit` itself — its records' content hashes and
sizes, and the shingle sets and TF-IDF rows it compares (taken from the local engine's
`compared_sets` as the audit runs).
"""

from __future__ import annotations

import numpy as np
import pytest
from index_helpers import (
    FOOTER,
    HEADER,
    NOTICE,
    assert_same_as_fresh,
    page,
    sqlite,
    stored_state,
    templated_corpus,
)

import dedup
from dedup import AuditSettings
from dedup.engines import local as local_engine
from dedup.index import build, open_index, similar, update
from dedup.index.blobs import unpack_array
from dedup.index.postings import load_statistics, postings_of
from dedup.normalize import content_hash

SETTINGS = {
    "on": AuditSettings(tfidf_features=2**32),
    "off": AuditSettings(tfidf_features=2**32, boilerplate=False),
}


def _audit_compared(monkeypatch, root, settings: AuditSettings):
    """The audit of ``root``, and content hash -> (shingles, {column: TF-IDF weight}) of every
    text it compared."""
    captured: dict[str, tuple[np.ndarray, dict[int, float]]] = {}
    real = local_engine.compared_sets

    def spy(needed, *args, **kwargs):
        out = real(needed, *args, **kwargs)
        slots, store = kwargs["slots"], kwargs["canonicals"]
        for t in np.asarray(needed).tolist():
            digest = content_hash(store.get(int(slots[t])).replace(b"\n", b" "))
            k = int(out.local[t])
            row = out.model.rows[k]
            weights = dict(zip(row.indices.tolist(), row.data.tolist()))
            captured[digest] = (
                out.shingles[out.shingle_offsets[k] : out.shingle_offsets[k + 1]].copy(),
                weights,
            )
        return out

    monkeypatch.setattr(local_engine, "compared_sets", spy)
    result = dedup.audit([str(root)], settings)
    monkeypatch.setattr(local_engine, "compared_sets", real)
    return result, captured


def _index_compared(path) -> dict[str, tuple[np.ndarray, dict[int, float]]]:
    """Content hash -> (stored shingles, {column: TF-IDF weight from the stored counts and statistics})."""
    with open_index(str(path)) as index, index.reading() as db:
        stats = load_statistics(db)
        hash_of = dict(db.execute("SELECT text_id, content_hash FROM texts"))
        out = {
            hash_of[t]: (unpack_array(blob, "<u8").copy(), {})
            for t, blob in db.execute("SELECT text_id, shingles FROM sketches")
        }
        for column, idf in zip(stats.columns.tolist(), stats.idf(stats.columns).tolist()):
            ids, counts = postings_of(db, column)
            for text_id, position, count in zip(
                ids.tolist(), stats.position_of(ids).tolist(), counts.tolist()
            ):
                if position >= 0:
                    out[hash_of[text_id]][1][column] = count * idf / stats.norms[position]
    return out


def test_documents_hashes_and_sizes_equal_the_audit(tmp_path, write_corpus):
    root = write_corpus(templated_corpus())
    path = tmp_path / "i.index"
    build([str(root)], str(path))
    audited = dedup.audit([str(root)])
    with sqlite(path) as db:
        stored = {r[0]: r[1:] for r in db.execute("SELECT doc_id, content_hash, bytes FROM documents")}
        texts = {r[0] for r in db.execute("SELECT content_hash FROM texts")}
    assert {d["id"]: (d["content_hash"], d["bytes"]) for d in audited.documents} == stored
    # Texts without words are not stored: the audit compares none of them either.
    with_words = {d["content_hash"] for d in audited.documents if d["status"] != "empty"}
    assert texts == with_words and "notes/nothing.txt" in stored


@pytest.mark.parametrize("templates", ["on", "off"])
def test_stored_sets_and_rows_equal_those_the_audit_compares(tmp_path, write_corpus, monkeypatch, templates):
    settings = SETTINGS[templates]
    root = write_corpus(templated_corpus())
    path = tmp_path / "i.index"
    summary = build([str(root)], str(path), settings)
    result, compared = _audit_compared(monkeypatch, root, settings)
    stored = _index_compared(path)
    assert set(stored) == set(compared) and len(stored) == result.summary["distinct_texts"]
    for digest, (shingles, weights) in compared.items():
        np.testing.assert_array_equal(stored[digest][0], shingles)
        assert stored[digest][1].keys() == weights.keys()
        np.testing.assert_allclose(
            [stored[digest][1][c] for c in weights], list(weights.values()), rtol=1e-12
        )
    if templates == "on":
        # The header and footer are template lines: the index left out what the audit left out,
        # and kept the short page (mostly template) whole, as the audit did.
        assert result.boilerplate["lines"] >= 2 and summary.template_lines == result.boilerplate["lines"]
        assert result.boilerplate["texts_compared_whole"] >= 1
    else:
        assert summary.template_lines == 0


@pytest.mark.parametrize("templates", ["on", "off"])
def test_updates_store_what_a_fresh_build_of_the_final_corpus_stores(tmp_path, write_corpus, templates):
    settings = SETTINGS[templates]
    files = templated_corpus()
    root = write_corpus(files)
    path = tmp_path / "i.index"
    build([str(root)], str(path), settings)
    # A third text with the notice makes it a template line: the two stored texts that
    # have it lose it; a changed and a removed document besides.
    (root / "notes/q2.txt").write_text(page(12, header=False, notice=True), encoding="utf-8")
    (root / "notes/lone.md").write_text(page(23, header=False), encoding="utf-8")
    (root / "notes/unicode.txt").unlink()
    first = update([str(root)], str(path), settings)
    assert_same_as_fresh(root, path, settings, tmp_path, "first")
    # With only two texts left having the header and footer, they are template lines no more.
    for name in ("p0", "p1", "p2", "p2-near", "p3", "p3-copy"):
        (root / f"pages/{name}.txt").unlink()
    second = update([str(root)], str(path), settings)
    assert_same_as_fresh(root, path, settings, tmp_path, "second")
    if templates == "on":
        # p4 loses them; the short page was compared whole all along.
        assert first.resketched == 2 and second.resketched == 1
        assert first.sketched == 2 + first.resketched
    else:
        assert first.resketched == second.resketched == 0


def test_changed_template_settings_resketch_what_they_change(tmp_path, write_corpus):
    root = write_corpus(templated_corpus())
    path = tmp_path / "i.index"
    build([str(root)], str(path))
    ignore = tmp_path / "ignore.txt"
    ignore.write_text(NOTICE.upper() + "\n", encoding="utf-8")
    steps = [
        ("off", AuditSettings(boilerplate=False)),
        ("loose", AuditSettings(boilerplate_max_text_share=0.9)),
        ("known", AuditSettings(ignore_text_file=str(ignore))),
        ("default", AuditSettings()),
    ]
    for name, settings in steps:
        summary = update(None, str(path), settings)
        assert summary.resketched > 0, name
        assert_same_as_fresh(root, path, settings, tmp_path, name)
    assert update(None, str(path)).sketched == 0  # the same texts under the same rule


def test_a_query_is_stripped_of_the_template_lines_like_a_stored_text(tmp_path, write_corpus):
    files = templated_corpus()
    root = write_corpus(files)
    path = tmp_path / "i.index"
    build([str(root)], str(path))
    with open_index(str(path)) as index:
        best = similar(index, files["pages/p0.txt"], k=1)[0]
        framed = similar(index, "\n".join([HEADER, files["pages/p4.txt"], FOOTER, FOOTER]), k=1)[0]
    assert best["document_id"] == "pages/p0.txt" and best["jaccard"] == 1.0
    assert best["cosine"] == pytest.approx(1.0, abs=1e-12)
    assert framed["document_id"] == "pages/p4.txt" and framed["jaccard"] == 1.0


def test_an_unreadable_ignore_text_file_is_a_clear_error_and_changes_nothing(tmp_path, write_corpus):
    root = write_corpus(templated_corpus())
    path = tmp_path / "i.index"
    build([str(root)], str(path))
    before = stored_state(path)
    with pytest.raises(dedup.InputError, match="cannot read the ignore-text file"):
        update(None, str(path), AuditSettings(ignore_text_file=str(tmp_path / "missing.txt")))
    assert stored_state(path) == before
    with sqlite(path) as db:
        assert db.execute("SELECT count(*) FROM runs").fetchone()[0] == 1


def test_template_lines_are_not_shared_between_unrelated_texts_by_the_footer(tmp_path, write_corpus):
    """Two pages that share only the header and footer are not alike once those are left out
    (Jaccard 0 over the stored shingles), while whole they share the shingles of both lines."""
    root = write_corpus(templated_corpus())
    on, off = tmp_path / "on.index", tmp_path / "off.index"
    build([str(root)], str(on))
    build([str(root)], str(off), AuditSettings(boilerplate=False))
    a, b = content_hash_of(root / "pages/p0.txt"), content_hash_of(root / "pages/p1.txt")
    stripped, whole = _index_compared(on), _index_compared(off)
    assert np.intersect1d(stripped[a][0], stripped[b][0]).size == 0
    assert np.intersect1d(whole[a][0], whole[b][0]).size > 0


def content_hash_of(path) -> str:
    """The content hash the audit gives the document in ``path``."""
    from dedup.normalize import canonical_text

    return content_hash(canonical_text(path.read_text(encoding="utf-8")))


def test_a_damaged_canonical_form_is_a_one_line_error_and_changes_nothing(tmp_path, write_corpus):
    from dedup.index import IndexFileError

    root = write_corpus(templated_corpus())
    path = tmp_path / "i.index"
    build([str(root)], str(path))
    with sqlite(path) as db:
        db.execute(
            "UPDATE canonicals SET form = x'0001' WHERE text_id = (SELECT t.text_id FROM texts t "
            "JOIN documents d ON d.content_hash = t.content_hash WHERE d.doc_id = 'pages/p0.txt')"
        )
    before = stored_state(path)
    with pytest.raises(IndexFileError, match="damaged: the canonical form of text") as caught:
        # p0 loses its template lines: its canonical form is read back to be stripped again.
        update(None, str(path), AuditSettings(boilerplate=False))
    assert "\n" not in str(caught.value)
    assert stored_state(path) == before
