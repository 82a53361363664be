"""Candidates: LSH band buckets (or all pairs, for small corpora) → candidate pairs."""

from .banding import catch_probability, choose_bands, recall_statement
from .exhaustive import exhaustive_candidate_pairs
from .lsh import band_keys, lsh_candidate_pairs

__all__ = [
    "catch_probability",
    "choose_bands",
    "recall_statement",
    "band_keys",
    "lsh_candidate_pairs",
    "exhaustive_candidate_pairs",
]
