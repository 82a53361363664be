"""Low-level compiled kernels that more than one stage needs.

A kernel here knows no stage: it works on bytes and integers only. Stages import these
public names (normalize and features both decode UTF-8 and hash bytes), so no stage has
to reach into another's private helpers or import a stage that runs after it.

    utf8     one UTF-8 code point from a byte buffer
    hash64   the project's stable 64-bit hash of bytes (FNV-1a, then fmix64)
    tables   character tables kept on disk between runs
"""
