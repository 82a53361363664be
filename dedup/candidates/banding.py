"""Choosing LSH bands and rows, and what they promise.

With b bands of r rows, two documents of Jaccard s share at least one band bucket with
probability

    P(s) = 1 - (1 - s^r)^b

(Leskovec, Rajaraman, Ullman, *Mining of Massive Datasets*, ch. 3, §3.4). The bands are
chosen to minimise w_fp * ∫_0^t P(s) ds + w_fn * ∫_t^1 (1 - P(s)) ds over b * r <= num_perm:
the weighted areas of false positives below the threshold t and false negatives above it.
P is a polynomial in s of degree b * r, so Gauss-Legendre quadrature with more than
b * r / 2 nodes gives both areas exactly, up to rounding (Abramowitz and Stegun, 25.4.29).
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np

__all__ = ["catch_probability", "choose_bands", "recall_statement"]


def catch_probability(s: float | np.ndarray, bands: int, rows: int) -> float | np.ndarray:
    """P(s) = 1 - (1 - s^r)^b: probability a pair of Jaccard s becomes a candidate.

    >>> round(float(catch_probability(0.5, 20, 5)), 3)
    0.47
    """
    return 1.0 - (1.0 - np.power(s, rows)) ** bands


@lru_cache(maxsize=8)
def _legendre(nodes: int) -> tuple[np.ndarray, np.ndarray]:
    return np.polynomial.legendre.leggauss(nodes)


def _integral(function, low: float, high: float, degree: int) -> float:
    """The integral of a polynomial ``function`` of at most ``degree`` over [low, high]."""
    x, w = _legendre(max(degree // 2 + 1, 8))
    half = (high - low) / 2.0
    return float(half * np.dot(w, function(low + half * (x + 1.0))))


def _false_positive_area(t: float, bands: int, rows: int) -> float:
    return _integral(lambda s: 1.0 - (1.0 - s ** float(rows)) ** float(bands), 0.0, t, bands * rows)


def _false_negative_area(t: float, bands: int, rows: int) -> float:
    return _integral(lambda s: (1.0 - s ** float(rows)) ** float(bands), t, 1.0, bands * rows)


@lru_cache(maxsize=64)
def choose_bands(threshold: float, num_perm: int, false_positive_weight: float = 0.05) -> tuple[int, int]:
    """Bands and rows minimising the weighted false-positive and false-negative areas.

    Notes
    -----
    Tries every (b, r) with b * r <= num_perm: O(num_perm log num_perm) integrals.
    Ties keep the first pair found (fewest bands).
    """
    false_negative_weight = 1.0 - false_positive_weight
    best = (1, 1)
    best_error = float("inf")
    for bands in range(1, num_perm + 1):
        for rows in range(1, num_perm // bands + 1):
            error = false_positive_weight * _false_positive_area(threshold, bands, rows)
            error += false_negative_weight * _false_negative_area(threshold, bands, rows)
            if error < best_error:
                best_error = error
                best = (bands, rows)
    return best


def recall_statement(threshold: float, bands: int, rows: int) -> dict:
    """Expected probability of catching a pair at the threshold and at threshold ± 0.1."""
    points = {}
    for label, s in (("below", threshold - 0.1), ("at", threshold), ("above", threshold + 0.1)):
        s = min(max(s, 0.0), 1.0)
        points[label] = {"jaccard": round(s, 6), "probability": float(catch_probability(s, bands, rows))}
    return {"bands": bands, "rows": rows, "points": points}
