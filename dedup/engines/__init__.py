"""Engines run the audit's plan (`dedup.plan`): ``local`` on one machine, ``spark`` on Apache Spark.

The Spark engine is imported only when asked for (`spark_engine`): pyspark is optional
(the ``dedup[spark]`` extra), and without it (or without Java) asking for it is a
`EngineUnavailable` error that says what to install.
"""

from ..settings import SettingsError
from .local import run_audit

__all__ = ["run_audit", "ENGINES", "EngineUnavailable", "EngineFailed", "spark_engine", "engine_problem"]

ENGINES = ("local", "spark")


class EngineUnavailable(SettingsError):
    """The engine asked for cannot run here; the message says what to install."""


class EngineFailed(RuntimeError):
    """The engine stopped partway (a Spark job failed, its JVM ran out of memory or went
    away); the message says in which step, why, and what to change."""


def engine_problem(engine: str) -> str | None:
    """Why ``engine`` cannot run here (a sentence), or None when it can. Imports nothing."""
    if engine == "spark":
        from .spark.session import missing_requirement

        return missing_requirement()
    return None


def spark_engine():
    """`dedup.engines.spark.run_audit_spark`, imported now.

    Raises
    ------
    EngineUnavailable
        pyspark, pyarrow, pandas or a Java runtime is missing.
    """
    problem = engine_problem("spark")
    if problem:
        raise EngineUnavailable(problem)
    from .spark import run_audit_spark

    return run_audit_spark
