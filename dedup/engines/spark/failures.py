"""When Spark fails partway: one sentence for the user instead of a Java stack.

A Spark job that fails raises a py4j or pyspark error whose text is a Java stack trace;
a JVM that runs out of memory may die too, and every call after that fails to connect.
`as_engine_failure` turns any of these into `dedup.engines.EngineFailed`: the step it
happened in, the Java error's own line, and, when memory ran out, how to give the JVM
more. In local mode the driver's JVM runs every task, so its memory is what counts.
"""

from __future__ import annotations

import re

from .. import EngineFailed

__all__ = ["is_spark_failure", "as_engine_failure"]

_JAVA_ERROR = re.compile(r"\b((?:java|org|scala)\.[\w.$]+(?:Error|Exception)\b[^\n]*)")
_OUT_OF_MEMORY = ("OutOfMemoryError", "Java heap space", "GC overhead limit exceeded")


def is_spark_failure(err: BaseException) -> bool:
    """Whether ``err`` came from Spark or from its JVM going away (not from our own code)."""
    if isinstance(err, ConnectionError):  # py4j's socket to a JVM that stopped
        return True
    return type(err).__module__.split(".")[0] in ("py4j", "pyspark")


def _java_line(text: str) -> str:
    # The innermost named Java error is the cause; the outer ones only wrap it.
    found = _JAVA_ERROR.findall(text)
    line = found[-1] if found else (text.strip().splitlines() or [""])[0]
    return " ".join(line.split())[:300]


def as_engine_failure(err: BaseException, step: str, driver_memory: str, local: bool) -> EngineFailed:
    """`EngineFailed` saying what ``err`` (see `is_spark_failure`) means for the audit."""
    text = str(err)
    gone = isinstance(err, ConnectionError) or "Py4JNetworkError" in type(err).__name__
    memory = gone or any(sign in text for sign in _OUT_OF_MEMORY)
    where = f"the Spark engine failed in the {step} step" if step else "the Spark engine failed"
    what = "its JVM stopped" if gone else _java_line(text) or type(err).__name__
    message = f"{where}: {what}"
    if memory:
        advice = (
            "in local mode the driver's JVM runs every task: give it more memory with "
            f"SPARK_DRIVER_MEMORY (it had {driver_memory})"
            if local
            else f"give the executors more memory (spark.executor.memory) or the driver (it had {driver_memory})"
        )
        message += f"; most often that is memory running out: {advice}"
    return EngineFailed(message)
