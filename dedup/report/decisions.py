"""The review decisions file that the report exports.

Its schema and validator live with the decisions data in `dedup.index.decisions_file`
(the index imports these files); the names are re-exported here for the report's side.
"""

from __future__ import annotations

from ..index.decisions_file import DECISION_VALUES, SCHEMA, SCHEMA_VERSION, validate_decisions

__all__ = ["SCHEMA", "SCHEMA_VERSION", "DECISION_VALUES", "validate_decisions"]
