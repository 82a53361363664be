"""Candidates: LSH band buckets, or an exact search per measure → candidate pairs."""

from .banding import catch_probability, choose_bands, recall_statement
from .containment import containment_candidate_pairs
from .cosine import cosine_candidate_pairs
from .exact import EXACT_SEARCHES, exact_candidate_pairs
from .exhaustive import exhaustive_candidate_pairs
from .lsh import band_keys, lsh_candidate_pairs

__all__ = [
    "catch_probability",
    "choose_bands",
    "recall_statement",
    "band_keys",
    "lsh_candidate_pairs",
    "exhaustive_candidate_pairs",
    "containment_candidate_pairs",
    "cosine_candidate_pairs",
    "exact_candidate_pairs",
    "EXACT_SEARCHES",
]
