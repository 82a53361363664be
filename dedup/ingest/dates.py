"""Dates of documents, for the keeper policies ``newest`` and ``oldest``."""

from __future__ import annotations

import math
from datetime import datetime, timezone

__all__ = ["date_value"]


def date_value(value: object) -> float | None:
    """Seconds since the epoch of a metadata value: a finite number as it is, an ISO 8601
    string (a trailing ``Z`` is UTC; no zone is UTC), anything else ``None`` — NaN,
    infinities, numbers too large for a float and dates beyond the calendar's range too,
    so that no date can break the choice of keeper or the JSON outputs.

    >>> date_value("1970-01-02T00:00:00Z"), date_value(12), date_value("soon")
    (86400.0, 12.0, None)
    >>> date_value(float("nan")), date_value(float("-inf")), date_value(10**400)
    (None, None, None)
    """
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        try:
            number = float(value)
        except OverflowError:
            return None
        return number if math.isfinite(number) else None
    if isinstance(value, str) and value.strip():
        try:
            parsed = datetime.fromisoformat(value.strip().replace("Z", "+00:00"))
            if parsed.tzinfo is None:
                parsed = parsed.replace(tzinfo=timezone.utc)
            return parsed.timestamp()
        except (ValueError, OverflowError, OSError):
            return None
    return None
