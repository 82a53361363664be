"""The Spark engine: the plan's steps (`dedup.plan`) on Apache Spark, with the same answers.

::

    step         kind     in Spark                                         shuffle key
    read         driver   local paths: our readers on the driver, staged   -
                 / map    as Parquet; URIs: files read in a map step
    normalize    map      mapInArrow: PreparedBatch (compiled pass)        -
    exact        driver   records, empty documents, distinct texts;        read position
                          canonical forms picked by a join                 (broadcast)
    templates    reduce   line counts per partition, summed by line hash   line hash
    sketch       map      mapInArrow: template_stripped + sketch_batch     -
    frequencies  reduce   per-partition DocumentFrequency, treeReduce      -
    candidates   shuffle  (band, key, text) rows: bucket sizes (window),   (band, key);
                          pairs in small buckets (self-join), neighbours   pair
                          in oversize ones (lead over signature order);
                          exhaustive: (shingle, text) rows self-joined     shingle
                          (Jaccard); containment and cosine: the sets
                          collected and searched on the driver, up to
                          `DRIVER_SEARCH_VALUES` (`driver_search`)
    sets         map      mapInArrow: shingle sets and TF-IDF rows of      text (semi-join)
                          the texts compared
    verify       map      pairs joined with both sets; may_reach,          text (two joins)
                          score_pairs in mapInArrow
    cluster      driver   cluster_step (scipy), or large-star/small-star   node
                          components in Spark beyond a limit
    align,       driver   align_step, settle_step, pair_records,           -
    settle,               assemble (over the clustered texts only)
    records

Every value the records hold is computed by the same kernels as on one machine and
every collection is put in a fixed order on the driver, so the audit is byte for byte
the local engine's, whatever the partitioning. The audit runs in a session of its own
made from the given one (`own_session`: shuffle partitions sized to the corpus), data
it persisted is released at the end, and a session started here is stopped.
"""

from __future__ import annotations

import contextlib
import logging
import time
from collections.abc import Sequence

import numpy as np
import pyarrow as pa

from ...ingest import LedgerEntry, Records
from ...plan import Plan
from ...progress import Progress
from ...report import records
from ...result import AuditResult
from ...settings import SettingsError
from ...verify.whole import whole_text_scores
from ...workdir import WorkFolder
from ..driver import (
    Findings,
    Verified,
    align_step,
    assemble,
    candidates_block,
    pair_records,
    settle_step,
    tfidf_block,
    whole_text_threshold,
    with_whole_texts,
)
from .banding import exhaustive_pairs, lsh_pairs, oversize_buckets, shared_buckets
from .clustering import DRIVER_COMPONENT_EDGES, spark_cluster_step
from .columns import ddl
from .failures import as_engine_failure, is_spark_failure
from .normalizing import NORMALIZED, RECORD_COLUMNS, ExactStep, exact_step, normalize_partition
from .reading import read_documents
from .remote import is_uri, read_uris
from .session import audit_session, is_local_master, own_session, shuffle_partitions
from .sketching import SKETCHED, merged_summaries, sketch_partition
from .templates import boilerplate_of_counts, find_templates
from .verifying import (
    CONFIRMED,
    PAIRS,
    SETS,
    compared_sets_partition,
    confirmed_scores,
    driver_search,
    driver_sets,
    verify_partition,
)

__all__ = ["run_audit_spark"]

log = logging.getLogger("dedup.engines.spark")

# Up to this many distinct texts, their read positions (24 bytes each) are broadcast.
BROADCAST_TEXTS = 100_000
_POSITIONS = pa.schema([("file_no", pa.int64()), ("entry_no", pa.int64()), ("t", pa.int64())])
_TEXTS = pa.schema([("t", pa.int64())])


class _SparkRun:
    """One audit in a Spark session: the steps in order, and what they persisted."""

    def __init__(self, spark, plan: Plan, work: WorkFolder, progress: Progress) -> None:
        self.spark, self.plan, self.settings = spark, plan, plan.settings
        self.work, self.progress = work, progress
        self.description = spark.sparkContext.getLocalProperty("spark.job.description")
        self.kept_frames: list = []
        self.originals_from = None  # documents with their original text, by read position
        self.broadcasts: list = []
        self.stages: dict[str, float] = {}
        self.current = ""  # the step running
        self._t = time.perf_counter()

    # -- bookkeeping ---------------------------------------------------------------------
    def keep(self, frame):
        """Persist ``frame`` (memory, then disk) until the audit ends."""
        from pyspark import StorageLevel

        frame = frame.persist(StorageLevel.MEMORY_AND_DISK)
        self.kept_frames.append(frame)
        return frame

    def share(self, value):
        """Broadcast ``value`` to the executors until the audit ends."""
        shared = self.spark.sparkContext.broadcast(value)
        self.broadcasts.append(shared)
        return shared

    def step(self, name: str, total: int | None = None) -> None:
        """Start a step: its progress, and the description Spark shows for its jobs."""
        self.current = name
        self.spark.sparkContext.setJobDescription(f"dedup audit: {name}")
        self.progress.start(name, total)

    def lap(self, name: str, note: str = "") -> None:
        """End a step: its seconds (for ``run.json``; a step run twice adds up) and its
        progress line."""
        now = time.perf_counter()
        self.stages[name] = round(self.stages.get(name, 0.0) + now - self._t, 4)
        self._t = now
        self.progress.done(note)

    def release(self) -> None:
        """Unpersist and destroy what the audit left in the session. Never raises: after a
        failure Spark's JVM may be gone, and the failure is what the caller must see."""
        undo = [frame.unpersist for frame in self.kept_frames] + [
            shared.destroy for shared in self.broadcasts
        ]
        undo.append(lambda: self.spark.sparkContext.setJobDescription(self.description))
        for step in undo:
            with contextlib.suppress(Exception):
                step()

    def frame(self, table: pa.Table, schema: pa.Schema):
        """A small driver table as a DataFrame (a local relation: joined by broadcast)."""
        return self.spark.createDataFrame(table, schema=ddl(schema))

    # -- steps ---------------------------------------------------------------------------
    def read(self, paths: Sequence[str], ledger: list[LedgerEntry], workers: int):
        """The read and normalize steps: normalized documents (persisted) and, for URIs,
        the ledger entries made on the driver."""
        self.step("reading")
        s = self.settings
        if not isinstance(paths, Records) and any(is_uri(p) for p in paths):
            if not all(is_uri(p) for p in paths):
                raise SettingsError("give either local paths or URIs (scheme://…), not both")
            normalized, entries = read_uris(self.spark, paths, s, self.share)
        else:
            master = self.spark.sparkContext.master
            staging = self.work.file("staged-documents") if is_local_master(master) else None
            documents = read_documents(self.spark, paths, s, ledger, staging=staging, workers=workers)
            # The original texts stay where they were staged (read again for the evidence).
            run = normalize_partition(s.boilerplate, keep_text=False)
            normalized, entries = documents.mapInArrow(run, ddl(NORMALIZED)), None
            self.originals_from = documents
        normalized = self.keep(normalized)
        if self.originals_from is None:
            self.originals_from = normalized.where("kind = 0")
        rows = normalized.select("kind", *RECORD_COLUMNS, *_LEDGER_COLUMNS).toArrow()
        if entries is not None:
            ledger.extend(entries.entries(rows))
        documents = rows.filter(pa.compute.equal(rows.column("kind"), 0))
        if entries is not None:
            documents = entries.kept_documents(documents)
        self.lap("read", f"{documents.num_rows:,} documents")
        return normalized, documents

    def exact(self, normalized, documents: pa.Table, ledger: list[LedgerEntry]):
        """The exact step on the driver, and the distinct texts (``t``, ``canonical``) persisted:
        each text's canonical form picked from its first document in read order (a join
        keyed by read position; the positions are broadcast up to `BROADCAST_TEXTS`)."""
        from pyspark.sql import functions as F

        self.step("grouping")
        date = self.settings.keeper_policy in ("newest", "oldest")
        exact = exact_step(documents, ledger, date)
        parts = shuffle_partitions(self.spark.sparkContext.defaultParallelism, exact.texts.n)
        self.spark.conf.set("spark.sql.shuffle.partitions", str(parts))
        first = exact.first_read
        positions = pa.table(
            {"file_no": first[:, 0], "entry_no": first[:, 1], "t": first[:, 2]}, schema=_POSITIONS
        )
        chosen = self.frame(positions, _POSITIONS)
        chosen = F.broadcast(chosen) if exact.texts.n <= BROADCAST_TEXTS else chosen
        texts_frame = (
            normalized.where("kind = 0")
            .select("file_no", "entry_no", "canonical")
            .join(chosen, ["file_no", "entry_no"])
            .select("t", "canonical")
        )
        self.lap("exact", f"{exact.texts.n:,} distinct texts")
        return exact, self.keep(texts_frame)

    def templates(self, texts_frame, n_texts: int, known: Sequence[str]):
        """The templates step (when template lines are left out), broadcast."""
        if not self.settings.boilerplate:
            return None, None
        self.step("templates")
        found = find_templates(texts_frame, n_texts, self.settings, known) if n_texts else None
        if found is None:  # no text: nothing is counted, as on one machine
            found = boilerplate_of_counts(
                np.zeros(0, np.uint64),
                np.zeros(0, np.int64),
                0,
                share=self.settings.boilerplate_share,
                min_texts=self.settings.boilerplate_min_texts,
                known=known,
            )
        self.lap("templates", f"{len(found):,} lines")
        return found, self.share(found)

    def sketch(self, texts_frame, method: str, shared_templates):
        """The sketch and frequencies steps: sketched texts (persisted) and the summary."""
        self.step("shingling")
        lsh = self.plan.lsh if method == "lsh" else None
        run = sketch_partition(self.settings, lsh, shared_templates)
        sketched = self.keep(texts_frame.mapInArrow(run, ddl(SKETCHED)))
        summary = merged_summaries(sketched, self.settings)
        self.lap("features")
        return sketched, summary

    def compared_sets(self, texts_frame, needed, shared_templates, frequencies):
        """The compared sets of the texts in ``needed`` (a DataFrame of ``t``; None: all), persisted."""
        chosen = texts_frame if needed is None else texts_frame.join(needed, "t", "left_semi")
        run = compared_sets_partition(self.settings, shared_templates, self.share(frequencies))
        return self.keep(chosen.mapInArrow(run, ddl(SETS)))

    def candidates(
        self, texts_frame, sketched, exact: ExactStep, method: str, shared_templates, summary, also=None
    ):
        """The candidates step: candidate pairs (persisted), their number, oversize buckets,
        and the sets of the texts compared (and of the texts ``also``, paired another way)."""
        self.step("candidates")
        s = self.settings
        exact_texts = np.asarray([exact.texts.text_of_doc[g[0]] for g in exact.texts.groups], np.int64)
        oversize: list[dict] = []
        if method == "lsh":
            members = self.keep(shared_buckets(sketched))
            pairs, big = lsh_pairs(sketched, members, s.bucket_limit)
            pairs = self.keep(pairs)
            count = pairs.count()
            oversize = oversize_buckets(big) if not big.isEmpty() else []
            ends = pairs.select(pairs.left.alias("t")).unionByName(pairs.select(pairs.right.alias("t")))
            more = exact_texts if also is None else np.concatenate([exact_texts, np.asarray(also, np.int64)])
            needed = ends.unionByName(self.frame(pa.table({"t": more}, schema=_TEXTS), _TEXTS)).distinct()
            sets = self.compared_sets(texts_frame, needed, shared_templates, summary.frequencies)
        else:
            sets = self.compared_sets(texts_frame, None, shared_templates, summary.frequencies)
            if s.measure == "jaccard":
                pairs = self.keep(exhaustive_pairs(sets))
            else:
                pairs = self.keep(
                    self.frame(driver_search(sets, exact.texts.n, s, summary.frequencies.width), PAIRS)
                )
            count = pairs.count()
        self.lap("candidates", f"{count:,} pairs")
        return pairs, count, oversize, sets

    def verify(self, pairs, count: int, sets, width: int, threshold: float | None = None) -> Verified:
        """The verify step: pairs joined with both texts' sets (TF-IDF rows of ``width``
        columns), scored in a map; the confirmed ones (at the settings' threshold unless
        given) collected in (left, right) order."""
        from pyspark.sql import functions as F

        self.step("verifying", count)
        columns = ("shingles", "columns", "weights")
        left = sets.select(F.col("t").alias("left"), *(F.col(c).alias("l_" + c) for c in columns))
        right = sets.select(F.col("t").alias("right"), *(F.col(c).alias("r_" + c) for c in columns))
        joined = pairs.join(left, "left").join(right, "right")
        settings = self.settings if threshold is None else self.settings.replace(threshold=threshold)
        run = verify_partition(settings, width)
        table = joined.mapInArrow(run, ddl(CONFIRMED)).toArrow()
        confirmed, decided = confirmed_scores(table)
        self.lap("verify", f"{len(confirmed):,} confirmed")
        return Verified(confirmed, decided, count)

    def whole_texts(self, texts_frame, exact: ExactStep, method: str) -> tuple[Verified, list[dict]]:
        """The sketch, candidates and verify steps again, over the whole texts (template
        lines kept), for `with_whole_texts`; with their oversize buckets."""
        sketched, summary = self.sketch(texts_frame, method, None)
        pairs, count, oversize, sets = self.candidates(texts_frame, sketched, exact, method, None, summary)
        width = summary.frequencies.width
        return self.verify(pairs, count, sets, width, whole_text_threshold(self.settings)), oversize

    def cluster(self, exact: ExactStep, verified: Verified, sets, width: int, ledger, driver_edges: int):
        """The cluster step, with the sets of the clustered texts brought to the driver."""
        self.step("clustering")
        texts = exact.texts
        exact_texts = [texts.text_of_doc[g[0]] for g in texts.groups]
        clustered = np.unique(
            np.concatenate(
                [verified.confirmed.left, verified.confirmed.right, np.asarray(exact_texts, np.int64)]
            )
        )
        wanted = self.frame(pa.table({"t": clustered}, schema=_TEXTS), _TEXTS)
        table = sets.join(wanted, "t", "left_semi").toArrow() if clustered.shape[0] else SETS.empty_table()
        held = driver_sets(table, texts.n, width)
        scorer = held.scorer(texts.text_of_doc)
        ledger_ids = [entry.document_id for entry in ledger]
        clusters, roles, exact_edges = spark_cluster_step(
            self.spark, texts, verified, scorer, self.settings, ledger_ids, driver_edges
        )
        self.lap("cluster", f"{len(clusters):,} clusters")
        return clusters, roles, exact_edges, held

    def originals(self, exact: ExactStep, clusters: list[dict]) -> dict[str, str]:
        """Original texts of the clustered documents (the report's evidence), in id order."""
        clustered = {m["document_id"] for c in clusters for m in c["members"]}
        picked = [i for i, rec in enumerate(exact.documents) if rec["id"] in clustered]
        if not picked:
            return {}
        where = exact.position[np.asarray(picked, np.int64)]
        positions = pa.table(
            {"file_no": where[:, 0], "entry_no": where[:, 1], "t": np.zeros(len(picked), np.int64)},
            schema=_POSITIONS,
        )
        found = (
            self.originals_from.join(self.frame(positions, _POSITIONS), ["file_no", "entry_no"], "left_semi")
            .select("id", "text")
            .toArrow()
        )
        text_of = dict(zip(found.column("id").to_pylist(), found.column("text").to_pylist()))
        return {exact.documents[i]["id"]: text_of[exact.documents[i]["id"]] for i in picked}

    def align(self, pairs: list[dict], clusters: list[dict], originals: dict[str, str]):
        """The align step on the driver (`align_step`), over the clustered texts it holds:
        the passages, and the words found (for `settle`)."""
        self.step("aligning passages")
        passages, words = align_step(pairs, clusters, originals, self.settings)
        self.lap("align", f"{len(passages):,} passages")
        return passages, words

    def settle(self, clusters, roles, texts, originals, boilerplate, words):
        """The settle step on the driver (`settle_step`): what happens to each near-duplicate."""
        self.step("settling")
        template_lines = boilerplate.counts if boilerplate is not None else None
        settled = settle_step(clusters, roles, texts, originals, template_lines, self.settings, words=words)
        self.lap("settle")
        return settled


_LEDGER_COLUMNS = ("input", "status", "reason", "entry_format", "size", "encoding", "record", "document_id")


def _audit(run: _SparkRun, paths: Sequence[str], known: Sequence[str], workers: int, driver_edges: int):
    plan, settings = run.plan, run.settings
    ledger: list[LedgerEntry] = []
    normalized, documents = run.read(paths, ledger, workers)
    exact, texts_frame = run.exact(normalized, documents, ledger)
    texts = exact.texts
    boilerplate, shared_templates = run.templates(texts_frame, texts.n, known)
    method = plan.candidate_method(texts.n)
    sketched, summary = run.sketch(texts_frame, method, shared_templates)
    if boilerplate is not None:
        for h, line in summary.line_texts.items():
            boilerplate.texts.setdefault(h, line)
    whole, more = None, []
    if summary.texts_affected:  # template lines were left out of some texts: compare them whole too
        whole, more = run.whole_texts(texts_frame, exact, method)
    also = None if whole is None else np.concatenate([whole.confirmed.left, whole.confirmed.right])
    pairs, count, oversize, sets = run.candidates(
        texts_frame, sketched, exact, method, shared_templates, summary, also
    )
    width = summary.frequencies.width  # columns of the TF-IDF rows of the sets compared
    verified = run.verify(pairs, count, sets, width)
    if whole is not None:
        verified, oversize = with_whole_texts(verified, whole), oversize + more
    clusters, roles, exact_edges, held = run.cluster(exact, verified, sets, width, ledger, driver_edges)
    pairs = pair_records(texts, verified, exact_edges, held.sizes)
    originals = run.originals(exact, clusters)
    whole_text_scores(pairs, originals, boilerplate, run.settings)
    passages, words = run.align(pairs, clusters, originals)
    clusters, unique_runs = run.settle(clusters, roles, texts, originals, boilerplate, words)
    found = Findings(
        ledger=ledger,
        documents=exact.documents,
        texts=texts,
        boilerplate=records.boilerplate_block(
            settings, boilerplate, summary.texts_affected, summary.texts_compared_whole
        ),
        tfidf=tfidf_block(summary.frequencies, settings),
        candidates=candidates_block(plan, method, texts.n, verified.candidates, len(oversize)),
        oversize=oversize,
        verified=verified,
        clusters=clusters,
        roles=roles,
        pairs=pairs,
        passages=passages,
        unique_runs=unique_runs,
        original_texts=originals,
    )
    result = assemble(plan, paths, found)
    run.lap("records")
    return result


def run_audit_spark(
    plan: Plan,
    paths: Sequence[str],
    *,
    spark=None,
    master: str | None = None,
    known_boilerplate: Sequence[str] = (),
    progress: Progress | None = None,
    work: WorkFolder | None = None,
    workers: int = 1,
    driver_component_edges: int = DRIVER_COMPONENT_EDGES,
) -> AuditResult:
    """Run the plan's steps on Apache Spark (see the module notes): the same `AuditResult`
    as the local engine gives for the same inputs and settings.

    Parameters
    ----------
    plan : Plan
        The audit's plan (validated settings, LSH bands).
    paths : sequence of str
        Local files and folders (read on the driver by our own readers), or URIs Spark
        reads (``hdfs://``, ``s3a://``, ``file://`` …; read in a map step). Not both.
    spark : pyspark.sql.SparkSession, optional
        The session to run in (used as it is, left running). Without it, the active
        session, else one started on ``master`` (``local[*]`` by default) and stopped at
        the end.
    known_boilerplate : sequence of str
        Normalized lines of the user's known shared text.
    progress : Progress, optional
    work : WorkFolder, optional
        Where local documents are staged for a local master (a temporary folder by default).
    workers : int
        Processes that read local files on the driver.
    driver_component_edges : int
        Up to this many confirmed edges, components are found on the driver (scipy);
        beyond, in Spark (large-star / small-star).

    Returns
    -------
    AuditResult
        With ``run`` holding the engine, the master and the seconds of each step.

    Raises
    ------
    dedup.SettingsError
        Local paths and URIs mixed.
    dedup.InputError
        A path or URI does not exist.
    dedup.engines.EngineFailed
        A Spark job failed or Spark's JVM stopped (most often: out of memory); the
        message names the step and what to change.
    """
    progress = progress or Progress.silent()
    started = time.time()
    with audit_session(spark, master) as session, _work_folder(work) as folder:
        run = _SparkRun(own_session(session), plan, folder, progress)
        context = session.sparkContext
        memory, local = context.getConf().get("spark.driver.memory", "1g"), is_local_master(context.master)
        try:
            result = _audit(run, paths, known_boilerplate, workers, driver_component_edges)
        except Exception as err:
            if is_spark_failure(err):
                raise as_engine_failure(err, run.current, memory, local) from err
            raise
        finally:
            run.release()
        result.run = {
            "engine": "spark",
            "master": session.sparkContext.master,
            "default_parallelism": session.sparkContext.defaultParallelism,
            "stages_seconds": run.stages,
            "total_seconds": round(sum(run.stages.values()), 4),
            "started": time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime(started)),
        }
    return result


class _work_folder:  # noqa: N801 - a context manager used like a function
    """The given work folder, or a temporary one removed on leaving."""

    def __init__(self, work: WorkFolder | None) -> None:
        self.work, self.own = work, None

    def __enter__(self) -> WorkFolder:
        if self.work is not None:
            return self.work
        self.own = WorkFolder(None)
        return self.own.__enter__()

    def __exit__(self, *exc) -> None:
        if self.own is not None:
            self.own.__exit__(*exc)
