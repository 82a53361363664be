"""The compiled word tokenizer agrees with the regular-expression definition of a word."""

from __future__ import annotations

from hypothesis import given, settings
from hypothesis import strategies as st

from dedup.features import build_features
from dedup.normalize import canonical_text, token_text

MASK = (1 << 64) - 1


def fnv1a_fmix64(data: bytes) -> int:
    """Plain-Python FNV-1a 64 + MurmurHash3 fmix64 (published constants), as in test_hashing."""
    h = 0xCBF29CE484222325
    for byte in data:
        h = ((h ^ byte) * 0x100000001B3) & MASK
    for shift, mult in ((33, 0xFF51AFD7ED558CCD), (33, 0xC4CEB9FE1A85EC53)):
        h ^= h >> shift
        h = (h * mult) & MASK
    return h ^ (h >> 33)


@settings(max_examples=300, deadline=None)
@given(st.lists(st.text(min_size=0, max_size=60), min_size=1, max_size=8))
def test_words_equal_the_regex_tokens_of_canonical_text(raw_texts):
    """Reference: Python's re module, [^\\W_]+ (a word = letters and digits, as str.isalnum)."""
    texts = [canonical_text(t) for t in raw_texts]
    fs = build_features(texts, shingle_size=1)
    for d, text in enumerate(texts):
        expected = [fnv1a_fmix64(w.encode("utf-8")) for w in token_text(text).split()]
        got = fs.token_hashes[fs.token_offsets[d] : fs.token_offsets[d + 1]].tolist()
        assert got == expected


@settings(max_examples=300, deadline=None)
@given(st.lists(st.text(alphabet="ab9é_-. \u00a0ü", max_size=40), min_size=1, max_size=8))
def test_dense_short_words_equal_the_regex_tokens(raw_texts):
    """Reference: as above. One-letter words a byte apart fill every place the kernel has
    for a text's words; words start and end texts, and non-ASCII bytes come between."""
    texts = [canonical_text(t) for t in raw_texts]
    fs = build_features(texts, shingle_size=1)
    for d, text in enumerate(texts):
        expected = [fnv1a_fmix64(w.encode("utf-8")) for w in token_text(text).split()]
        assert fs.token_hashes[fs.token_offsets[d] : fs.token_offsets[d + 1]].tolist() == expected


def test_non_ascii_letters_digits_and_punctuation():
    text = canonical_text("Straße—naïve café №5 ١٢٣ 東京、大阪。“quoted” e-mail_address")
    fs = build_features([text], shingle_size=1)
    assert fs.token_hashes.tolist() == [fnv1a_fmix64(w.encode()) for w in token_text(text).split()]
    assert len(token_text(text).split()) == 11


def test_words_are_the_same_in_any_thread():
    """Reference: the regex tokens hashed in plain Python (`fnv1a_fmix64`), for corpora
    hashed in four threads at once (each thread has a work array of its own)."""
    from concurrent.futures import ThreadPoolExecutor

    import numpy as np

    from dedup.features import tokenize
    from dedup.features.shingles import pack_bytes

    table = tokenize.word_table()
    corpora = [
        [f"w{k} ünï {'x' * k} -- {k * 'ab '}".encode() * (k % 7) for k in range(seed, seed + 40)]
        for seed in range(12)
    ]

    def check(texts):
        got, offsets = tokenize.words_and_hashes(*pack_bytes(texts), table)
        expected = [[fnv1a_fmix64(w.encode()) for w in token_text(t.decode()).split()] for t in texts]
        return [got[offsets[d] : offsets[d + 1]].tolist() for d in range(len(texts))] == expected and np.all(
            np.diff(offsets) >= 0
        )

    with ThreadPoolExecutor(4) as pool:
        assert all(pool.map(check, corpora * 3))


def test_the_kernel_writes_only_in_the_room_given_to_each_text():
    """Texts of one-letter words fill their room (every byte stores the hash so far at the
    next free place); a sentinel after it must stay."""
    import numpy as np

    from dedup.features import tokenize
    from dedup.features.shingles import pack_bytes

    table = tokenize.word_table()
    for text in [
        b"a",
        b"a ",
        b"a b",
        b"a b c",
        b"a b c ",
        b" a b",
        b"ab c d",
        b"\xc3\xa9 a b",
        b"a b \xc3\xa9",
    ]:
        buf, offsets = pack_bytes([text])
        room = tokenize.word_room(offsets)
        sentinel = np.uint64(0xDEADBEEF)
        out = np.full(int(room[-1]) + 4, sentinel, dtype=np.uint64)
        counts = np.empty(1, np.int64)
        tokenize._hash_words_bounded(buf, offsets, room, table, out, counts)
        assert (out[room[-1] :] == sentinel).all(), text
        expected = [fnv1a_fmix64(w.encode()) for w in token_text(text.decode()).split()]
        assert out[: counts[0]].tolist() == expected
