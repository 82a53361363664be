"""The Python entry point: ``dedup.audit(paths, settings) -> AuditResult``.

A thin facade: the settings are validated once, the plan is made of them
(`dedup.plan.Plan`), and an engine runs it (`dedup.engines`; ``local`` on one machine).
The tool never modifies, moves or deletes any input: it only reads them and proposes
actions.
"""

from __future__ import annotations

import contextlib

from .engines import ENGINES, run_audit, spark_engine
from .engines.tuning import lean_allocation
from .features import tokenize
from .ingest import Records, as_inputs
from .normalize.boilerplate import read_ignore_text
from .plan import Plan
from .progress import Progress
from .result import NOTICE, SCHEMA_VERSION, AuditResult
from .settings import AuditSettings, SettingsError
from .workdir import WorkFolder

__all__ = ["audit", "AuditResult", "SCHEMA_VERSION", "NOTICE"]


def audit(
    inputs,
    settings: AuditSettings | None = None,
    *,
    id_col: str = "id",
    text_col: str = "text",
    progress: Progress | None = None,
    work_dir: str | None = None,
    keep_work: bool = False,
    workers: int = 1,
    engine: str = "local",
    tune_process: bool = False,
    spark_session=None,
    spark_master: str | None = None,
) -> AuditResult:
    """Audit files and folders for exact and near-duplicate documents.

    Parameters
    ----------
    inputs : path, sequence of paths, rows or table
        What to audit: a file or folder (a str or path-like is one path; folders are
        walked recursively), a sequence of them, or documents already in memory: an
        iterable of ``(id, text)`` pairs or of dicts, a pandas DataFrame or a pyarrow
        Table. Rows are read as the records of a record file: one ledger entry each, a
        row without an id or a text skipped with its reason, other columns kept as
        metadata (``date_field`` can name one; the result's frames carry them).
    settings : AuditSettings, optional
        Every knob; defaults to ``AuditSettings()``.
    id_col, text_col : str
        For rows and tables: the column (key) of the id and of the text. A DataFrame
        without ``id_col`` gives its index as the ids.
    progress : Progress, optional
        Receives stage progress (the CLI draws it on stderr).
    work_dir : str, optional
        Folder for intermediate data spilled to disk (texts, signatures); a temporary
        folder by default. Removed at the end unless ``keep_work``.
    keep_work : bool
        Leave the work folder in place (to inspect it).
    workers : int
        Processes that read and normalize files in parallel (default 1: read in this
        process). Results do not depend on it.
    engine : {"local", "spark"}
        Which engine runs the plan: ``spark`` gives the same results on Apache Spark
        (`dedup.engines.spark`; needs ``dedup[spark]`` and Java).
    tune_process : bool
        Let the local engine tune this process while it runs (memory reuse, no huge pages,
        no cyclic garbage collection; see `dedup.engines.tuning`), everything put back
        afterwards. Off by default: a library does not change its host's process.
    spark_session : pyspark.sql.SparkSession, optional
        With ``engine="spark"``: the session to run in (else the active one, or one
        started on ``spark_master``, ``local[*]`` by default, and stopped at the end).
    spark_master : str, optional
        With ``engine="spark"`` and no session: the master URL of the session started.

    Returns
    -------
    AuditResult

    Raises
    ------
    dedup.SettingsError
        A setting is invalid (checked before any work).
    dedup.InputError
        A given path does not exist.
    KeyError
        A table has no ``text_col`` (or, for a pyarrow Table, no ``id_col``).

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (d / "a.txt").write_text("the quick brown fox jumps over the lazy dog")
    >>> _ = (d / "b.txt").write_text("The  quick brown fox\\njumps over the LAZY dog")
    >>> audit([str(d)]).summary["exact_groups"]
    1
    >>> result = audit([("a", "the quick brown fox jumps over the lazy dog"),
    ...                 ("b", "The quick brown fox jumps over the lazy dog!")])
    >>> result
    AuditResult(2 documents read, 0 exact groups, 1 cluster)
    """
    paths = as_inputs(inputs, id_col=id_col, text_col=text_col)
    settings = (settings or AuditSettings()).validate()
    if engine not in ENGINES:
        raise SettingsError(f"engine must be one of {', '.join(ENGINES)}, got {engine!r}")
    plan = Plan.of(settings)
    progress = progress or Progress.silent()
    known_boilerplate = list(read_ignore_text(settings.ignore_text_file))
    if engine == "spark":
        run_spark = spark_engine()  # a clear error when pyspark or Java is missing
        with WorkFolder(work_dir, keep=keep_work) as work:
            result = run_spark(
                plan,
                paths,
                spark=spark_session,
                master=spark_master,
                known_boilerplate=known_boilerplate,
                progress=progress,
                work=work,
                workers=workers,
            )
    else:
        result = _run_local(
            plan, paths, known_boilerplate, progress, work_dir, keep_work, workers, tune_process
        )
    if isinstance(paths, Records):
        result.metadata = paths.metadata
    return result


def _run_local(plan, paths, known_boilerplate, progress, work_dir, keep_work, workers, tune_process):
    """The plan on the local engine, the process tuned around it when asked."""
    with lean_allocation() if tune_process else contextlib.nullcontext():
        try:
            with WorkFolder(work_dir, keep=keep_work) as work:
                return run_audit(
                    plan,
                    paths,
                    known_boilerplate=known_boilerplate,
                    work=work,
                    progress=progress,
                    workers=workers,
                )
        finally:
            # Freed while the heap keeps what is freed: after, its pages would go back
            # to the system at once.
            tokenize.release_scratch()
