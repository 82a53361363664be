"""Dates of documents, for the keeper policies ``newest`` and ``oldest``."""

from __future__ import annotations

from datetime import datetime, timezone

__all__ = ["date_value"]


def date_value(value: object) -> float | None:
    """Seconds since the epoch of a metadata value: a number as it is, an ISO 8601 string
    (a trailing ``Z`` is UTC; no zone is UTC), anything else ``None``.

    >>> date_value("1970-01-02T00:00:00Z"), date_value(12), date_value("soon")
    (86400.0, 12.0, None)
    """
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        return float(value)
    if isinstance(value, str) and value.strip():
        try:
            parsed = datetime.fromisoformat(value.strip().replace("Z", "+00:00"))
        except ValueError:
            return None
        if parsed.tzinfo is None:
            parsed = parsed.replace(tzinfo=timezone.utc)
        return parsed.timestamp()
    return None
