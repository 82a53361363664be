"""The ``tfidf_features`` setting: an audit left to its default uses the exact vocabulary,
and a number given by the API, a flag or a config file is the TF-IDF space used.

Reference for "exact": the exact vocabulary's record (``n_features`` 0, one column per
term); for "hashed": the collision record of `collision_stats` over the same space.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from jsonschema import Draft202012Validator

import dedup
from dedup.cli import main
from dedup.schemas import load_schema
from dedup.settings import AUDIT_TFIDF_FEATURES, AuditSettings, SettingsError
from dedup.sketch.tfidf import DocumentFrequency

TEXTS = {
    "orchard.md": "Keepers of the hill orchard prune the pear trees in the first dry week of spring and "
    "stack the cut branches by the north wall, where the wind cannot scatter them.",
    "orchard-copy.md": "Keepers of the hill orchard prune the pear trees in the first dry week of spring "
    "and stack the cut branches by the east wall, where the wind cannot scatter them.",
    "ferry.md": "The ferry to the island leaves twice a day; the crew checks the ropes, the engine and "
    "the weather board before the first passengers come aboard with their bicycles.",
}
COSINE = ["--measure", "cosine", "-t", "0.5", "-q", "--no-report"]


@pytest.fixture
def corpus(write_corpus):
    return write_corpus(TEXTS)


def _audit_json(out) -> dict:
    return json.loads((out / "audit.json").read_text(encoding="utf-8"))


def test_unset_means_the_exact_vocabulary_for_an_audit():
    settings = AuditSettings()
    assert settings.tfidf_features is None and settings.validate().tfidf_features is None
    assert settings.audit_tfidf_features == AUDIT_TFIDF_FEATURES == 0
    assert settings.to_dict()["tfidf_features"] == 0
    assert AuditSettings(tfidf_features=4096).to_dict()["tfidf_features"] == 4096


@pytest.mark.parametrize("bad", [-1, 1.5, True, "many"])
def test_a_bad_number_of_columns_is_refused(bad):
    with pytest.raises(SettingsError, match="tfidf_features must be 0"):
        AuditSettings(tfidf_features=bad).validate()


def test_unset_frequencies_count_the_exact_vocabulary():
    """Reference: `DocumentFrequency(0)`, the exact vocabulary, over the same tokens."""
    tokens, offsets = np.array([5, 9, 5, 2**40 + 3], np.uint64), np.array([0, 2, 4])
    unset, exact = DocumentFrequency(None), DocumentFrequency(0)
    for frequencies in (unset, exact):
        frequencies.add(tokens, offsets)
    assert unset.exact and unset.n_features == 0 and unset.width == exact.width == 3
    assert unset.collision_stats() == exact.collision_stats()
    assert abs(unset.model(tokens, offsets).rows - exact.model(tokens, offsets).rows).max() == 0


def test_the_default_audit_writes_what_an_explicit_exact_vocabulary_writes(corpus, tmp_path):
    assert main(["audit", str(corpus), "-o", str(tmp_path / "default"), *COSINE]) == 0
    assert main(["audit", str(corpus), "-o", str(tmp_path / "zero"), *COSINE, "--tfidf-features", "0"]) == 0
    for name in ("audit.json", "pairs.csv", "clusters.csv", "ledger.csv"):
        assert (tmp_path / "default" / name).read_bytes() == (tmp_path / "zero" / name).read_bytes(), name
    record = _audit_json(tmp_path / "default")
    Draft202012Validator(load_schema("audit")).validate(record)
    assert record["settings"]["tfidf_features"] == 0 and record["tfidf"]["n_features"] == 0
    assert record["tfidf"]["columns"] == "exact vocabulary: one column per term"


def test_a_number_from_a_flag_or_a_config_file_is_honoured(corpus, tmp_path):
    config = tmp_path / "team.toml"
    config.write_text("tfidf-features = 64\n", encoding="utf-8")
    by_file, by_flag = tmp_path / "by-file", tmp_path / "by-flag"
    assert main(["audit", str(corpus), "-o", str(by_file), *COSINE, "--config", str(config)]) == 0
    assert main(["audit", str(corpus), "-o", str(by_flag), *COSINE, "--tfidf-features", "64"]) == 0
    assert (by_file / "audit.json").read_bytes() == (by_flag / "audit.json").read_bytes()
    record = _audit_json(by_flag)
    Draft202012Validator(load_schema("audit")).validate(record)
    assert record["settings"]["tfidf_features"] == 64 and record["tfidf"]["n_features"] == 64
    assert "columns" not in record["tfidf"] and record["tfidf"]["vocabulary_size"] > 30
    # 64 columns for the texts' terms: most of them share one (reported, with a warning).
    assert record["tfidf"]["measured_colliding_share"] > 0.3
    assert any(w["kind"] == "tfidf-collisions" for w in record["warnings"])
    # The command line wins over the file.
    assert (
        main(
            [
                "audit",
                str(corpus),
                "-o",
                str(by_file),
                *COSINE,
                "--config",
                str(config),
                "--tfidf-features",
                "0",
            ]
        )
        == 0
    )
    assert _audit_json(by_file)["tfidf"]["n_features"] == 0


def test_an_api_number_is_honoured_and_cosines_follow_it(corpus):
    exact = dedup.audit([str(corpus)], AuditSettings(measure="cosine", threshold=0.3))
    hashed = dedup.audit([str(corpus)], AuditSettings(measure="cosine", threshold=0.3, tfidf_features=8))
    assert exact.tfidf["n_features"] == 0 and hashed.tfidf["n_features"] == 8
    cosine = {tuple(sorted((p["left"], p["right"]))): p["cosine"] for p in exact.pairs}
    crowded = {tuple(sorted((p["left"], p["right"]))): p["cosine"] for p in hashed.pairs}
    shared = cosine.keys() & crowded.keys()
    assert shared and any(abs(cosine[k] - crowded[k]) > 1e-6 for k in shared)
