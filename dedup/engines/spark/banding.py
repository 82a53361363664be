"""The candidates step (a shuffle): pairs of distinct texts that share a band bucket.

Our own banding, the same rules as `dedup.candidates.lsh_candidate_pairs`, in DataFrame
operations (no bucket is ever loaded whole into one Python call):

1. rows ``(band, key, t)`` — one per text and band (``posexplode`` of the band keys);
2. each row learns its bucket's size (a count over a window partitioned by
   ``(band, key)``: the one shuffle of the rows, keyed by bucket); rows of buckets of
   one are dropped;
3. buckets of at most ``bucket_limit`` members: every pair of members (a self-join on
   ``(band, key)``, already partitioned so);
4. larger (oversize) buckets: members ordered by their whole signature (big-endian
   bytes, ties by text number — the order of ``np.lexsort`` over stable, sorted
   members) and each paired with its next `OVERSIZE_NEIGHBOURS` members (``lead`` over
   a window ordered so: streamed, spilled when large);
5. pairs ``(least, greatest)`` made distinct (a shuffle keyed by pair).

Each oversize bucket is summarized by its size, smallest member, five smallest members
and a fingerprint of its member set (an xor and a sum of two 64-bit hashes of the
members): buckets of different bands with the same members are one warning, as on
one machine. Two different member sets share a fingerprint with probability about
2^-128.

Exhaustive candidates for Jaccard (every pair sharing a shingle, as
`exhaustive_candidate_pairs`) are a self-join of ``(shingle, t)`` rows keyed by shingle;
the exact searches of containment and cosine run on the driver (`driver_search`).
"""

from __future__ import annotations

from collections.abc import Iterator

import numpy as np
import pyarrow as pa

from ...candidates.lsh import OVERSIZE_NEIGHBOURS
from .columns import ddl, packed_values

__all__ = ["shared_buckets", "lsh_pairs", "oversize_buckets", "exhaustive_pairs", "SHINGLE_ROWS"]

SHINGLE_ROWS = pa.schema([("shingle", pa.int64()), ("t", pa.int64())])
# Members of an oversize bucket shown in its warning.
SAMPLE = 5


def _bucket_rows(sketched):
    """``(band, key, t, size)`` of texts that share their bucket with another."""
    from pyspark.sql import Window
    from pyspark.sql import functions as F

    rows = sketched.where("kind = 0").select("t", F.posexplode("keys").alias("band", "key"))
    bucket = Window.partitionBy("band", "key")
    return rows.withColumn("size", F.count(F.lit(1)).over(bucket)).where("size >= 2")


def shared_buckets(sketched):
    """``(band, key, t, size)``: the rows of every bucket of two or more texts (to persist:
    the candidate pairs and the oversize warnings both read them)."""
    return _bucket_rows(sketched)


def lsh_pairs(sketched, members, bucket_limit: int):
    """Candidate pairs ``(left < right)`` of the sketched texts, from the rows of their
    shared buckets (`shared_buckets`), and the rows of oversize buckets (for
    `oversize_buckets`). Neither is computed until used."""
    from pyspark.sql import Window
    from pyspark.sql import functions as F

    small = members.where(F.col("size") <= bucket_limit).select("band", "key", "t")
    left = small.withColumnRenamed("t", "left")
    right = small.withColumnRenamed("t", "right")
    small_pairs = left.join(right, ["band", "key"]).where("left < right").select("left", "right")
    big = members.where(F.col("size") > bucket_limit).select("band", "key", "t", "size")
    signed = big.join(sketched.where("kind = 0").select("t", "signature"), "t")
    order = Window.partitionBy("band", "key").orderBy("signature", "t")
    ahead = F.array(*[F.lead("t", step).over(order) for step in range(1, OVERSIZE_NEIGHBOURS + 1)])
    # The window first, then the explode: a generator cannot hold window functions.
    near = signed.select("t", ahead.alias("ahead")).select("t", F.explode("ahead").alias("u"))
    near = near.where(F.col("u").isNotNull())
    big_pairs = near.select(F.least("t", "u").alias("left"), F.greatest("t", "u").alias("right"))
    pairs = small_pairs.unionByName(big_pairs).distinct()
    return pairs, big


def oversize_buckets(big) -> list[dict]:
    """The oversize-bucket entries `lsh_candidate_pairs` returns (size, bands, members —
    here the smallest members, all a warning shows), in its order: largest first, then
    by smallest member, then as first met (by band, then by unsigned bucket key)."""
    from pyspark.sql import Window
    from pyspark.sql import functions as F

    h1, h2 = F.xxhash64("t"), F.xxhash64("t", F.lit(1))
    buckets = big.groupBy("band", "key").agg(
        F.count(F.lit(1)).alias("size"),
        F.min("t").alias("smallest"),
        F.bit_xor(h1).alias("x1"),
        F.bit_xor(h2).alias("x2"),
        F.sum(F.pmod(h1, F.lit(2**31))).alias("s1"),
    )
    first = Window.partitionBy("band", "key").orderBy("t")
    samples = (
        big.withColumn("rank", F.row_number().over(first))
        .where(F.col("rank") <= SAMPLE)
        .groupBy("band", "key")
        .agg(F.array_sort(F.collect_list("t")).alias("sample"))
    )
    rows = buckets.join(samples, ["band", "key"]).collect()
    entries: dict[tuple, dict] = {}
    for row in sorted(rows, key=lambda r: (r["band"], int(np.int64(r["key"]).view(np.uint64)))):
        fingerprint = (row["size"], row["smallest"], row["x1"], row["x2"], row["s1"])
        entry = entries.setdefault(
            fingerprint,
            {"size": int(row["size"]), "bands": [], "members": np.asarray(row["sample"], np.int64)},
        )
        entry["bands"].append(int(row["band"]))
    return sorted(entries.values(), key=lambda e: (-e["size"], int(e["members"][0])))


def shingle_rows(batches: Iterator[pa.RecordBatch]) -> Iterator[pa.RecordBatch]:
    """Map over sets (``t``, ``shingles``): one ``(shingle, t)`` row per shingle of a text."""
    for batch in batches:
        values, offsets = packed_values(batch.column("shingles"), np.uint64)
        t = np.asarray(batch.column("t").to_numpy(), np.int64)
        arrays = [pa.array(values.view(np.int64)), pa.array(np.repeat(t, np.diff(offsets)))]
        yield pa.RecordBatch.from_arrays(arrays, schema=SHINGLE_ROWS)


def exhaustive_pairs(sets):
    """Every pair ``(left < right)`` of texts sharing a shingle (the Jaccard exact search,
    as `dedup.candidates.exhaustive_candidate_pairs`).

    Cost: O(sum over shingles of df²) rows, as the sparse product on one machine.
    """
    rows = sets.select("t", "shingles").mapInArrow(shingle_rows, ddl(SHINGLE_ROWS))
    left = rows.withColumnRenamed("t", "left")
    right = rows.withColumnRenamed("t", "right")
    return left.join(right, "shingle").where("left < right").select("left", "right").distinct()
