"""Normalization: canonical text for exact matching, word text for features."""

from .exact import content_hash, exact_groups
from .text import canonical_text, token_text

__all__ = ["canonical_text", "token_text", "content_hash", "exact_groups"]
