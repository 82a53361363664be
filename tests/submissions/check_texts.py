"""Invented texts shared by the tests of the class check."""

from __future__ import annotations

# Invented prose, written for these tests.
SOURCE = (
    "Lanterns along the canal of Brisk were lit by hand every evening until the lamplighters' guild "
    "agreed to share the work with the families who lived above the water, and the arrangement lasted "
    "for three generations because each family kept a small book recording every night it had served."
)
OTHER_SOURCE = (
    "The winter market of Tolland opens only when the lake ice is thick enough to carry a loaded sledge, "
    "and the wardens measure it each morning with an auger and a knotted cord before any stall may be set up."
)
SHARED = (
    "Our group met in the library on three afternoons and agreed that the guild's records are the most "
    "reliable witness, since the families' books were often rewritten after a quarrel or a wedding."
)


def essay(*parts: str) -> str:
    return "\n\n".join(parts)
