"""The Spark engine: the audit's plan on Apache Spark, with the local engine's answers.

Imported only when asked for (``engine="spark"``): it needs ``pyspark``, ``pyarrow`` and
``pandas`` (the ``dedup[spark]`` extra) and a Java runtime. One module per concept:

- `engine` — `run_audit_spark`: the steps in order (see its notes for which step is a
  map, a reduce or a shuffle, and by what key);
- `session` — the session used or started; `reading` / `remote` — local paths read on
  the driver and staged, URIs read in a map step; `normalizing` — the normalize map
  and the exact step; `templates` — template lines (a reduce); `sketching` — MinHash
  and band keys (a map), document frequencies (a reduce); `banding` — candidate pairs
  (a shuffle by band bucket); `verifying` — compared sets and exact scores (maps);
  `components` — large-star / small-star connected components; `clustering` — the
  cluster step; `parquet` — `write_parquet`; `columns` — Arrow columns ↔ packed arrays.
"""

__all__ = ["run_audit_spark", "write_parquet"]


def __getattr__(name: str):
    # Lazy, so that `session.missing_requirement` can say what is missing before anything
    # that needs it (pyarrow, pyspark) is imported.
    if name == "run_audit_spark":
        from .engine import run_audit_spark

        return run_audit_spark
    if name == "write_parquet":
        from .parquet import write_parquet

        return write_parquet
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
