"""How close the signature stage is to the limit of the hardware.

Times, on the same files in one run:
  bare    read the bytes of every file and split them into tokens in compiled code (a count
          of space-separated tokens: the least work any pipeline must do);
  ours    dedup's signature stage as the audit runs it: read → decode → normalize (NFKC and
          case folding for non-ASCII texts, compiled line and space folding) → word hashes →
          shingle hashes → MinHash signatures (128 permutations).
The ratio ours / bare says how much of our time goes beyond reading and splitting.

Run: ``python -m benchmarks.signature_limit [--pages N]``
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

from benchmarks.corpus import iter_manpages


def bare_pass(files: list[Path]) -> int:
    from dedup.features import hashing
    from dedup.features.shingles import pack_bytes

    data = [f.read_bytes() for f in files]
    buf, offsets = pack_bytes(data)
    return int(hashing.count_tokens(buf, offsets).sum())


def signature_stage(files: list[Path]) -> np.ndarray:
    import dedup
    from dedup.features.shingles import features_from_buffer
    from dedup.normalize.canonical_bytes import canonical_packed
    from dedup.sketch import minhash_signatures

    data = [f.read_bytes() for f in files]
    # The audit keeps each text's UTF-8 bytes beside its string, so the kernel reads those;
    # lines joined by spaces are the canonical text.
    buf, offsets, _ = canonical_packed([d.decode("utf-8") for d in data], encoded=data, separator=b" ")
    # MinHash needs no shingle set: repeats do not change a minimum.
    scheme = dedup.AuditSettings().hash_scheme  # the audit's own shingle and MinHash scheme
    features = features_from_buffer(buf, offsets, shingle_size=5, hash_scheme=scheme, distinct=False)
    return minhash_signatures(
        features.shingles, features.shingle_offsets, num_perm=128, hash_scheme=scheme
    ).values


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--pages", type=int, default=6000)
    parser.add_argument("--repeat", type=int, default=7, help="runs of each pass; the fastest counts")
    args = parser.parse_args(argv)
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        for name, text in iter_manpages(limit=args.pages):
            (folder / f"{name}.txt").write_text(text, encoding="utf-8")
        files = sorted(folder.glob("*.txt"))
        megabytes = sum(f.stat().st_size for f in files) / 1e6
        bare_pass(files[:10])
        signature_stage(files[:10])  # compile or load the kernels before timing
        bare, ours = [], []
        for _ in range(args.repeat):
            t = time.perf_counter()
            bare_pass(files)
            bare.append(time.perf_counter() - t)
            t = time.perf_counter()
            signature_stage(files)
            ours.append(time.perf_counter() - t)
    b, o = min(bare), min(ours)
    print(f"{len(files):,} files, {megabytes:.1f} MB (Debian man pages turned to text)")
    print(f"bare read + split: {b:.3f} s ({megabytes / b:.0f} MB/s)")
    print(f"signature stage:   {o:.3f} s ({megabytes / o:.0f} MB/s)")
    print(f"ratio signature stage / bare pass: {o / b:.1f}x")
    return 0


if __name__ == "__main__":
    sys.exit(main())
