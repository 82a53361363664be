"""Stable hashing of tokens and shingles."""

from __future__ import annotations

import subprocess
import sys

import numpy as np
import pytest

from dedup.features import build_features, shingle_strings

MASK = (1 << 64) - 1


def fnv1a_fmix64(data: bytes) -> int:
    """Reference: FNV-1a 64-bit (published offset basis 0xcbf29ce484222325, prime 0x100000001b3)
    finished with MurmurHash3's fmix64 (Appleby's reference implementation); written here in plain
    Python, independent of the compiled kernels."""
    h = 0xCBF29CE484222325
    for byte in data:
        h = ((h ^ byte) * 0x100000001B3) & MASK
    h ^= h >> 33
    h = (h * 0xFF51AFD7ED558CCD) & MASK
    h ^= h >> 33
    h = (h * 0xC4CEB9FE1A85EC53) & MASK
    h ^= h >> 33
    return h


def test_token_hashes_follow_the_published_fnv1a_and_fmix64():
    words = ["hello", "world", "zoë", "東京", "a"]
    fs = build_features([" ".join(words)], shingle_size=1)
    assert [int(x) for x in fs.token_hashes] == [fnv1a_fmix64(w.encode("utf-8")) for w in words]


def test_token_hashes_are_pinned_across_versions():
    # Values computed once and pinned: stored signatures and indexes depend on them never changing.
    fs = build_features(["hello world"], shingle_size=1)
    assert [hex(int(x)) for x in fs.token_hashes] == ["0xe9c562c0fdb23244", "0x85c3d80583b75d95"]


def test_hashes_are_identical_in_another_process_with_another_hash_seed():
    code = (
        "from dedup.features import build_features;"
        "fs = build_features(['the cat sat on the mat today'], shingle_size=3);"
        "print(','.join(str(int(x)) for x in fs.shingles))"
    )
    outputs = set()
    for seed in ("1", "2"):
        env = {"PYTHONHASHSEED": seed, "PATH": ""}
        outputs.add(
            subprocess.run(
                [sys.executable, "-c", code], capture_output=True, text=True, env=env, check=True
            ).stdout
        )
    here = build_features(["the cat sat on the mat today"], shingle_size=3)
    outputs.add(",".join(str(int(x)) for x in here.shingles) + "\n")
    assert len(outputs) == 1


def test_shingle_counts_match_the_string_definition():
    texts = ["one two three four five six seven", "one two", "", "a b c d e", "x"]
    fs = build_features(texts, shingle_size=5)
    expected = [len(set(shingle_strings(t, 5))) for t in texts]
    assert fs.shingle_counts.tolist() == expected
    # A document shorter than k words still gets one shingle (of all its words).
    assert expected[1] == 1 and expected[4] == 1 and expected[2] == 0


def test_word_shingles_are_order_sensitive_and_deduplicated():
    fs = build_features(["a b a b a b", "b a b a b a"], shingle_size=2)
    # "a b" and "b a" are the two distinct shingles of each text.
    assert fs.shingle_counts.tolist() == [2, 2]
    assert np.array_equal(fs.shingles_of(0), fs.shingles_of(1))
    fs = build_features(["a b c", "c b a"], shingle_size=3)
    assert not np.array_equal(fs.shingles_of(0), fs.shingles_of(1))


def test_char_ngrams_count_characters_not_bytes():
    texts = ["東京都庁舎", "abc", "日本"]
    fs = build_features(texts, char_ngrams=2)
    assert fs.shingle_counts.tolist() == [len(set(shingle_strings(t, char_ngrams=2))) for t in texts]
    assert fs.shingle_counts.tolist() == [4, 2, 1]
    # The hash of a 2-gram is the hash of its UTF-8 bytes.
    assert int(fs.shingles_of(2)[0]) == fnv1a_fmix64("日本".encode())


def _fmix64_py(h: int) -> int:
    h ^= h >> 33
    h = (h * 0xFF51AFD7ED558CCD) & MASK
    h ^= h >> 33
    h = (h * 0xC4CEB9FE1A85EC53) & MASK
    return h ^ (h >> 33)


def test_binned_shingle_hash_is_the_documented_polynomial():
    """Reference: the formula of `rolling_word_shingles` written out in plain Python — fmix64 of
    sum(t_j * P^(k-1-j)) mod 2^64 over the word hashes t_j (each FNV-1a + fmix64 of the word's UTF-8
    bytes) — computed from scratch for every shingle, never rolled."""
    from dedup.features.hashing import ROLL_MULTIPLIER

    p = int(ROLL_MULTIPLIER)
    texts = ["the meter is read every quarter by the field team", "kurz", "", "eins zwei drei vier fünf"]
    fs = build_features(texts, shingle_size=5, hash_scheme="binned")
    for d, text in enumerate(texts):
        words = [fnv1a_fmix64(w.encode("utf-8")) for w in text.split()]
        width = min(5, len(words))
        expected = set()
        for s in range(max(1, len(words) - 5 + 1) if words else 0):
            h = 0
            for t in words[s : s + width]:
                h = (h * p + t) & MASK
            expected.add(_fmix64_py(h))
        assert sorted(expected) == fs.shingles_of(d).tolist(), d


def test_binned_shingles_give_the_jaccard_of_shingle_strings():
    """Reference: Jaccard of Python sets of shingle strings (`shingle_strings`, the word k-shingles
    themselves, no hashing); the 64-bit shingle hashes must give the same value on real text with
    repeats, reordered and dropped words."""
    base = (  # noqa: SIM905 - one readable sentence
        "water meters are read every quarter by the field team and estimates follow when a meter "
        "cannot be reached the team leaves a card and the customer may send a reading online"
    ).split()
    rng = np.random.default_rng(11)
    texts = [" ".join(base)]
    for _ in range(12):
        words = list(base)
        for _ in range(int(rng.integers(1, 6))):
            i = int(rng.integers(0, len(words)))
            words[i] = words[int(rng.integers(0, len(words)))]
        texts.append(" ".join(words))
    fs = build_features(texts, shingle_size=3, hash_scheme="binned")
    sets = [set(shingle_strings(t, 3)) for t in texts]
    for d in range(1, len(texts)):
        ours = len(np.intersect1d(fs.shingles_of(0), fs.shingles_of(d))) / len(
            np.union1d(fs.shingles_of(0), fs.shingles_of(d))
        )
        assert ours == len(sets[0] & sets[d]) / len(sets[0] | sets[d])


@pytest.mark.parametrize("scheme", ["stable64", "binned"])
def test_shingles_from_kept_word_hashes_match_those_from_the_texts(scheme):
    # Reference: features_from_buffer over the same texts (itself checked against Python sets above).
    from dedup.features.shingles import features_from_buffer, features_from_tokens, pack_bytes

    buf, offsets = pack_bytes([b"a b c d e f g", b"", b"one two", b"x y z x y z x y z"])
    ref = features_from_buffer(buf, offsets, shingle_size=3, hash_scheme=scheme)
    got = features_from_tokens(ref.token_hashes, ref.token_offsets, shingle_size=3, hash_scheme=scheme)
    assert np.array_equal(got.shingles, ref.shingles)
    assert np.array_equal(got.shingle_offsets, ref.shingle_offsets)
    with pytest.raises(ValueError, match="cannot give"):
        features_from_tokens(ref.token_hashes, ref.token_offsets, hash_scheme="datasketch-sha1")
