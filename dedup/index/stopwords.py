"""The stop words of the search: English function words, left out of queries and of the
search's TF-IDF norms.

Only words that say nothing about a text's subject are listed (articles, pronouns,
prepositions, conjunctions, auxiliary verbs, and the "s" and "t" that apostrophes leave),
never content words ("system", "find", "name" stay: in technical text they are
subjects). The words are canonical (case-folded) tokens as `dedup.normalize.token_text`
makes them. Stored term columns are hashed, so a stop word is known by its column
(`stop_columns`); a content word sharing a column with one is left out too, which with
the default 2**20 columns happens to about one word in ten thousand.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np

__all__ = ["STOP_WORDS", "stop_columns"]

_WORDS = """
a about above after again against all also am an and any are as at be because been before being
below between both but by can could did do does doing down during each either few for from further
had has have having he her here hers herself him himself his how i if in into is it its itself just
may me might more most must my myself neither no nor not now of off on once only or other others our
ours ourselves out over own s same shall she should so some such t than that the their theirs them
themselves then there these they this those through thus to too under until up upon us very was we
were what when where whether which while who whom whose why will with within without would yet you
your yours yourself yourselves
"""
STOP_WORDS = frozenset(_WORDS.split())


@lru_cache(maxsize=4)
def stop_columns(n_features: int) -> np.ndarray:
    """The hashed term columns of the stop words in a space of ``n_features`` (sorted, unique).

    The same hashing as the sketch step's term counts (`dedup.features.tokenize`). Cost:
    one pass over the list, cached per space.
    """
    from ..features import tokenize
    from ..features.shingles import pack_bytes

    words = sorted(STOP_WORDS)
    buf, offsets = pack_bytes([w.encode("utf-8") for w in words])
    hashes, _ = tokenize.words_and_hashes(buf, offsets, tokenize.word_table())
    from ..sketch.tfidf import hashed_columns

    return np.unique(hashed_columns(hashes, n_features).astype(np.int64))
