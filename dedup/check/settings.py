"""The settings of a class check: one frozen object, validated once, echoed into check.json.

A class check compares each submission with the references and with the other
submissions. The settings say what counts as a passage (``min_words``), how candidate
sources are found (``seed_shingles`` shared shingles, shingles in more than
``common_share`` of the references do not seed), what is left out of the counted text
(quotations, reference lists, the template) and how inputs are read.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass
from typing import Any

from ..settings import SettingsError

__all__ = ["CheckSettings", "SettingsError"]


@dataclass(frozen=True)
class CheckSettings:
    """Every setting of a class check, with its default.

    Parameters
    ----------
    min_words : int
        Fewest words (in each text) of a counted passage (default 15: a few common phrases
        in a row match in unrelated texts). Shorter shared runs of at least
        ``short_words`` words are listed as excluded (reason ``short``).
    short_words : int
        Fewest words of a shorter run that is still listed (as excluded); below it a
        run is not listed at all.
    shingle_size : int
        Words per shingle (k): containment is measured on sets of k-word shingles.
    seed_shingles : int
        A source is a candidate for a submission when they share at least this many
        shingles (not counting common ones). A verbatim passage of w words holds
        w - k + 1 shingles, so 4 finds every copied run of 8 words or more.
    common_share, common_min : float, int
        A shingle found in more than ``max(common_min, common_share × references)``
        references is common (a set phrase, a shared header): it seeds no candidate.
        It still counts in the containment figures.
    exclude_quotes : bool
        Leave text inside quotation marks and block quotes (lines starting with ``>``)
        out of the counted text; passages there are listed as excluded (``quoted``).
    exclude_reference_lists : bool
        Leave a reference list (from a "References", "Bibliography", "Works cited"
        heading to the end) out of the counted text.
    templates : tuple of str
        Files given with the assignment (the prompt, a provided skeleton): the stretches
        of a submission matching one of them are excluded (``template``).
    template_min_words : int
        Fewest words of a stretch matching a template to exclude it (headings and
        prompts are short).
    id_field, text_fields, max_file_bytes, max_text_chars, include, exclude
        How inputs are read (as `dedup.AuditSettings` reads them).
    """

    min_words: int = 15
    short_words: int = 8
    shingle_size: int = 5
    seed_shingles: int = 4
    common_share: float = 0.01
    common_min: int = 50
    exclude_quotes: bool = True
    exclude_reference_lists: bool = True
    templates: tuple[str, ...] = ()
    template_min_words: int = 6
    id_field: str | None = None
    text_fields: tuple[str, ...] = ("text",)
    max_file_bytes: int = 50_000_000
    max_text_chars: int = 10_000_000
    include: tuple[str, ...] = ()
    exclude: tuple[str, ...] = ()

    def __post_init__(self) -> None:
        for name in ("templates", "text_fields", "include", "exclude"):
            value = getattr(self, name)
            object.__setattr__(self, name, (value,) if isinstance(value, str) else tuple(value))

    def replace(self, **changes: Any) -> CheckSettings:
        """A copy with some settings changed."""
        return dataclasses.replace(self, **changes)

    def to_dict(self) -> dict[str, Any]:
        """All settings as plain JSON-ready values, in declaration order."""
        out: dict[str, Any] = {}
        for f in dataclasses.fields(self):
            value = getattr(self, f.name)
            out[f.name] = list(value) if isinstance(value, tuple) else value
        return out

    def validate(self) -> CheckSettings:
        """Check every setting once, before any work; raise `SettingsError` naming the one that is off."""
        whole = {
            "min_words": self.min_words,
            "short_words": self.short_words,
            "shingle_size": self.shingle_size,
            "seed_shingles": self.seed_shingles,
            "common_min": self.common_min,
            "template_min_words": self.template_min_words,
            "max_file_bytes": self.max_file_bytes,
            "max_text_chars": self.max_text_chars,
        }
        for name, value in whole.items():
            if not isinstance(value, int) or isinstance(value, bool) or value < 1:
                raise SettingsError(f"{name} must be a whole number of at least 1, got {value!r}")
        if self.short_words > self.min_words:
            raise SettingsError(
                f"short_words ({self.short_words}) must not exceed min_words ({self.min_words})"
            )
        share = self.common_share
        if not isinstance(share, (int, float)) or math.isnan(share) or not 0 < share <= 1:
            raise SettingsError(f"common_share must be above 0 and at most 1, got {share!r}")
        if not self.text_fields:
            raise SettingsError("text_fields needs at least one field name")
        return self
