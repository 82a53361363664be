"""Sketches: MinHash signatures and TF-IDF rows."""

from .minhash import Signatures, estimate_jaccard, minhash_parameters, minhash_signatures, signatures_with
from .tfidf import TfidfModel, collision_stats, fit_tfidf, pair_cosines

__all__ = [
    "Signatures",
    "estimate_jaccard",
    "minhash_parameters",
    "minhash_signatures",
    "signatures_with",
    "TfidfModel",
    "collision_stats",
    "fit_tfidf",
    "pair_cosines",
]
