"""The published JSON Schemas (draft 2020-12) of dedup's outputs, one ``NAME.schema.json`` each.

Scripts and pipelines that read dedup's outputs can check them with any JSON Schema
validator of draft 2020-12, and read what each field means in its ``description``:

=============  ==========================================================================
audit          ``audit.json``, written by ``dedup audit --out DIR``
audit-summary  what ``dedup audit --json`` prints on standard output
check          ``check.json``, written by ``dedup check --out DIR``
decisions      the review decisions file the report exports (``dedup decisions import``)
redirects      ``redirects.json``, written by ``dedup audit --out DIR``
run            ``run.json``, written by ``dedup audit --out DIR`` (timings and memory)
similar        what ``dedup similar --json`` prints on standard output
=============  ==========================================================================

Each schema stands alone (it refers to no other file), and each object whose keys are
known is closed (``additionalProperties: false``): a key that is not described is an
error, so a schema is changed together with the output it describes. The files ship
inside the package and are read with `importlib.resources`, so they are found the same
in a wheel, a zip or a source tree. Cost: a listing of this folder and one small file
read per call.
"""

from __future__ import annotations

import json
from importlib import resources

__all__ = ["schema_names", "schema_text", "load_schema", "UnknownSchemaError", "SUFFIX"]

# The end of the name of every schema file: ``audit.schema.json`` is the schema "audit".
SUFFIX = ".schema.json"


class UnknownSchemaError(KeyError):
    """A schema name that dedup does not publish; the message names those it does."""

    def __str__(self) -> str:
        # KeyError would show its message in quotes, as it does a missing key.
        return str(self.args[0]) if self.args else ""


def _files():
    return resources.files(__name__)


def schema_names() -> list[str]:
    """The names of the published schemas, sorted: what `schema_text` and `load_schema` take.

    >>> "audit" in schema_names() and "decisions" in schema_names()
    True
    """
    return sorted(entry.name[: -len(SUFFIX)] for entry in _files().iterdir() if entry.name.endswith(SUFFIX))


def schema_text(name: str) -> str:
    """The JSON text of the schema ``name`` (one of `schema_names`), as it is shipped.

    Raises
    ------
    UnknownSchemaError
        A `KeyError`: ``name`` is not a published schema; the message lists those that are.

    >>> schema_text("run").startswith("{")
    True
    """
    names = schema_names()
    if name not in names:
        raise UnknownSchemaError(f"no schema named {name!r}; the schemas are: {', '.join(names)}")
    return _files().joinpath(name + SUFFIX).read_text(encoding="utf-8")


def load_schema(name: str) -> dict:
    """The schema ``name`` as a new dict (changing it changes no later call's result).

    Raises
    ------
    UnknownSchemaError
        As `schema_text`.

    >>> load_schema("audit")["$schema"]
    'https://json-schema.org/draft/2020-12/schema'
    """
    return json.loads(schema_text(name))
