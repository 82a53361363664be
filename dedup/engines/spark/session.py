"""The Spark session an audit runs in: the caller's, or one started here and stopped after.

A session given by the caller is left as it is and running: the audit works in a
session of its own made from it (``newSession``: the same Spark context, executors and
cache, its own SQL settings), so the settings it needs (shuffle partitions sized to the
corpus, Arrow batch sizes, adaptive partitions in persisted plans) never touch the
caller's. Without one, a session is started on ``master`` (``local[*]`` by default) with
the Python of this process for its workers, no web UI, and one compiled-kernel thread
per task (``NUMBA_NUM_THREADS`` for the executors), so that the cores Spark gives tasks
are the cores used; a local one gets half the machine's memory for its JVM
(`local_driver_memory`) unless the user set it; it is stopped when the audit ends. Nothing of this process's own
environment is changed.
"""

from __future__ import annotations

import contextlib
import importlib.util
import logging
import os
import re
import shutil
import sys
from collections.abc import Iterator

__all__ = [
    "missing_requirement",
    "audit_session",
    "is_local_master",
    "is_uri",
    "local_driver_memory",
    "own_session",
    "shuffle_partitions",
]

log = logging.getLogger("dedup.engines.spark")

# What a map step's Python worker needs beyond pyspark itself (mapInArrow goes through pandas).
_NEEDED = (("pyspark", "pyspark"), ("pyarrow", "pyarrow"), ("pandas", "pandas"))


def missing_requirement() -> str | None:
    """Why the Spark engine cannot run here (a sentence), or None when it can.

    Checks that the Python packages are installed and that a Java runtime can be found
    (``JAVA_HOME`` or ``java`` on the PATH); imports nothing. O(1).
    """
    for module, package in _NEEDED:
        if importlib.util.find_spec(module) is None:
            return f"the spark engine needs {package}: install dedup[spark] (pip install 'dedup[spark]')"
    java_home = os.environ.get("JAVA_HOME")
    if not (java_home and os.path.exists(os.path.join(java_home, "bin", "java"))) and not shutil.which(
        "java"
    ):
        return "the spark engine needs a Java runtime (17 or later): none found on the PATH or in JAVA_HOME"
    return None


_SCHEME = re.compile(r"^[A-Za-z][A-Za-z0-9+.-]*://")


def is_uri(path: str) -> bool:
    """Whether ``path`` names a location by URI (``scheme://…``) rather than a local path
    (a check the command line can make without importing Spark).

    >>> is_uri("s3a://bucket/corpus/"), is_uri("file:///srv/kb"), is_uri("kb/notes.txt"), is_uri("C:\\\\kb")
    (True, True, False, False)
    """
    return bool(_SCHEME.match(path))


def is_local_master(master: str) -> bool:
    """Whether ``master`` runs every executor in this machine's process (``local``, ``local[N]``)."""
    return master == "local" or master.startswith("local[") or master.startswith("local-cluster[")


def _memory_set_elsewhere() -> bool:
    """Whether the user chose the driver's memory (``SPARK_DRIVER_MEMORY``,
    ``--driver-memory`` in ``PYSPARK_SUBMIT_ARGS`` or ``spark.driver.memory`` in the
    spark-defaults.conf Spark would read): then it is theirs, not ours, to set."""
    if os.environ.get("SPARK_DRIVER_MEMORY") or "--driver-memory" in os.environ.get(
        "PYSPARK_SUBMIT_ARGS", ""
    ):
        return True
    folders = [os.environ.get("SPARK_CONF_DIR")]
    if os.environ.get("SPARK_HOME"):
        folders.append(os.path.join(os.environ["SPARK_HOME"], "conf"))
    for folder in filter(None, folders):
        with (
            contextlib.suppress(OSError),
            open(os.path.join(folder, "spark-defaults.conf"), encoding="utf-8") as handle,
        ):
            if any(line.split()[:1] == ["spark.driver.memory"] for line in handle):
                return True
    return False


def local_driver_memory(total_bytes: int | None = None) -> str | None:
    """The driver memory of a local session started here: half the machine's memory,
    between 1 GiB and 64 GiB (None where the machine's memory cannot be told: Spark's
    default then). In local mode the driver's JVM runs every task, and Spark's own
    default (1 GiB) runs out at about 100,000 documents.

    >>> local_driver_memory(24 * 2**30), local_driver_memory(2**30), local_driver_memory(2**40)
    ('12g', '1g', '64g')
    """
    if total_bytes is None:
        try:
            total_bytes = os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES")
        except (AttributeError, ValueError, OSError):  # no sysconf (Windows) or no such name
            return None
    return f"{min(max(total_bytes // 2 // 2**30, 1), 64)}g"


def _started(master: str):
    from pyspark.sql import SparkSession

    builder = (
        SparkSession.builder.master(master)
        .appName("dedup audit")
        .config("spark.ui.enabled", "false")
        .config("spark.ui.showConsoleProgress", "false")
        .config("spark.pyspark.python", sys.executable)
        .config("spark.pyspark.driver.python", sys.executable)
        .config("spark.executorEnv.NUMBA_NUM_THREADS", "1")
    )
    memory = local_driver_memory() if is_local_master(master) and not _memory_set_elsewhere() else None
    if memory:
        builder = builder.config("spark.driver.memory", memory)
    return builder.getOrCreate()


@contextlib.contextmanager
def audit_session(spark=None, master: str | None = None) -> Iterator:
    """The session to audit in: ``spark`` when given, else one started on ``master``
    (stopped on leaving, unless it was already running)."""
    if spark is not None:
        yield spark
        return
    from pyspark.sql import SparkSession

    running = SparkSession.getActiveSession()
    if running is not None and master is None:
        yield running
        return
    session = _started(master or "local[*]")
    if session is running:
        yield session
        return
    log.info("started a Spark session on %s", master or "local[*]")
    # Its JVM is this audit's alone: warnings about native libraries and the like would
    # only clutter the command's output.
    session.sparkContext.setLogLevel("ERROR")
    try:
        yield session
    finally:
        with contextlib.suppress(Exception):  # a JVM that ran out of memory may be gone already
            session.stop()


# Distinct texts per shuffle partition beyond which a shuffle gets more partitions.
TEXTS_PER_PARTITION = 50_000
# Rows per Arrow batch handed to a map step (a batch of pairs carries both texts' sets).
ARROW_BATCH_ROWS = 2048


def shuffle_partitions(parallelism: int, n_texts: int) -> int:
    """Partitions of each shuffle: twice the cores (every core busy, a straggler halved),
    and more as the corpus grows (about `TEXTS_PER_PARTITION` distinct texts each)."""
    return max(2 * parallelism, -(-n_texts // TEXTS_PER_PARTITION))


def is_connect_session(spark) -> bool:
    """Whether ``spark`` is a Spark Connect client session (no JVM, no SparkContext here)."""
    return type(spark).__module__.startswith("pyspark.sql.connect")


def own_session(spark):
    """A session for one audit, sharing ``spark``'s context (see the module notes).

    Raises `dedup.SettingsError` for a Spark Connect session: the engine needs the
    driver's SparkContext (broadcasts, Hadoop's file listing, the default parallelism).
    """
    if is_connect_session(spark):
        from ...settings import SettingsError

        raise SettingsError(
            "the Spark engine needs a classic session with a SparkContext on this driver; "
            "a Spark Connect session cannot run it (start one with SparkSession.builder.master(...))"
        )
    session = spark.newSession()
    session.conf.set(
        "spark.sql.shuffle.partitions", str(shuffle_partitions(spark.sparkContext.defaultParallelism, 0))
    )
    session.conf.set("spark.sql.execution.arrow.maxRecordsPerBatch", str(ARROW_BATCH_ROWS))
    # Persisted plans may have their shuffle partitions coalesced too (small steps stay small).
    session.conf.set("spark.sql.optimizer.canChangeCachedPlanOutputPartitioning", "true")
    return session
