"""An oversized TF-IDF feature space: up to the bound it runs without an allocation proportional
to the feature count (cosine over every pair included); above it, validation refuses it with
a clear message."""

from __future__ import annotations

import subprocess
import sys

import pytest

from dedup.cli import main
from dedup.settings import TFIDF_FEATURES_MAX, AuditSettings, SettingsError

TEXTS = {
    f"t{i}.txt": "the keepers of the old lighthouse write the weather in a book every evening, "
    f"and on day {i} they noted fog over the harbour and a grey sea"
    for i in range(4)
}


def test_a_feature_space_beyond_the_bound_is_a_clear_usage_error(write_corpus, tmp_path, capsys):
    root = write_corpus(TEXTS)
    out = tmp_path / "out"
    argv = ["audit", str(root), "-o", str(out), "--measure", "cosine", "--candidates", "exhaustive"]
    assert main([*argv, "--tfidf-features", str(2**63)]) == 2
    err = capsys.readouterr().err
    assert "tfidf_features must be at most 2**62" in err and "Traceback" not in err
    assert not out.exists()  # refused before any work
    with pytest.raises(SettingsError, match="at most 2"):
        AuditSettings(tfidf_features=TFIDF_FEATURES_MAX + 1).validate()
    assert AuditSettings(tfidf_features=TFIDF_FEATURES_MAX).validate().tfidf_features == 2**62


# Runs an audit in a fresh process and prints its peak resident memory in MiB (Linux: KiB).
_MEASURED = """
import resource, sys
import dedup
from dedup import AuditSettings
root, measure, candidates, features = sys.argv[1], sys.argv[2], sys.argv[3], int(sys.argv[4])
result = dedup.audit([root], AuditSettings(measure=measure, candidates=candidates, tfidf_features=features))
assert result.summary["documents"] == 4, result.summary
print(result.summary["near_pairs"], resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024)
"""


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="ru_maxrss is in KiB on Linux")
@pytest.mark.parametrize(
    "measure, candidates, features",
    [
        ("cosine", "exhaustive", 2**32),  # the case that once asked for 32 GiB
        ("cosine", "lsh", 2**32),
        ("jaccard", "exhaustive", 2**32),
        ("cosine", "exhaustive", TFIDF_FEATURES_MAX),
    ],
)
def test_large_feature_spaces_run_without_a_large_allocation(write_corpus, measure, candidates, features):
    """One array entry per column would be 16 GiB at 2**32 columns (4 bytes each) and far more
    at 2**62; the whole process must stay far below that (it needs about 0.2 GiB here)."""
    root = write_corpus(TEXTS)
    args = [sys.executable, "-c", _MEASURED, str(root), measure, candidates, str(features)]
    done = subprocess.run(args, capture_output=True, text=True, timeout=600)
    assert done.returncode == 0, done.stderr[-2000:]
    near_pairs, peak_mib = done.stdout.split()[-2:]
    assert float(peak_mib) < 1536, peak_mib
    if measure == "cosine":  # the four texts differ in one word: cosine finds them alike
        assert int(near_pairs) > 0
