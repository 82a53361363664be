"""Sketches: MinHash signatures and TF-IDF rows."""

from .minhash import Signatures, estimate_jaccard, minhash_parameters, minhash_signatures
from .tfidf import TfidfModel, collision_stats, fit_tfidf, pair_cosines

__all__ = [
    "Signatures",
    "estimate_jaccard",
    "minhash_parameters",
    "minhash_signatures",
    "TfidfModel",
    "collision_stats",
    "fit_tfidf",
    "pair_cosines",
]
