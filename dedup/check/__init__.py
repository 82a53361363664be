"""Class check: each submission compared with reference material and with the other submissions.

``check(submissions, against=..., settings=...) -> CheckResult``; ``result.write(out)``
writes check.json, matches.csv, submissions.csv, ledger.csv and check.html. Matching
text is evidence for a person to read, not proof of anything (`CAUTION`).

The package is callable: importing it makes ``dedup.check`` this module (the import
system sets the attribute), so ``dedup.check(...)`` calls `check` either way.
"""

import sys
import types

from .result import CheckResult
from .run import check
from .settings import CheckSettings
from .wording import CAUTION, CAUTION_TEXT

__all__ = ["check", "CheckResult", "CheckSettings", "CAUTION", "CAUTION_TEXT"]


class _CallableModule(types.ModuleType):
    def __call__(self, *args, **kwargs) -> CheckResult:
        return check(*args, **kwargs)


sys.modules[__name__].__class__ = _CallableModule
