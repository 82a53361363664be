"""Verify: exact Jaccard, containment and cosine for every candidate pair."""

from .scores import PairScores, deciding_score, intersection_sizes, may_reach, score_pairs

__all__ = ["PairScores", "deciding_score", "intersection_sizes", "may_reach", "score_pairs"]
