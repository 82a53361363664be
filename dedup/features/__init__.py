"""Features: stable token hashes and shingle sets (uint64 arrays, CSR layout)."""

from .shingles import FeatureSet, build_features, shingle_strings, tokens_of

__all__ = ["FeatureSet", "build_features", "shingle_strings", "tokens_of"]
