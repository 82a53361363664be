"""Which found files and archive members are read: hidden names, version-control folders, globs.

A file or folder that is passed over still gets a ledger entry (a folder one entry for
all it holds), so the counts show what was left out and the reason says how to read it.
"""

from __future__ import annotations

import fnmatch

from .options import ReadOptions

__all__ = ["VCS_FOLDERS", "folder_reason", "file_reason", "member_reason", "clean_name"]

# Folders of version-control systems: their files are history, not documents.
VCS_FOLDERS = frozenset({".git", ".hg", ".svn", ".bzr", "_darcs", "CVS", ".fslckout", ".jj", ".pijul"})


def clean_name(name: str) -> str:
    """A file name as printable text: bytes that are not UTF-8 become ``\\xNN``, and a
    backslash of the name itself is doubled.

    POSIX file names are bytes; Python hands undecodable ones over as lone surrogates,
    which no UTF-8 output file can hold. Doubling the name's own backslashes keeps the
    spelling one-to-one: a file literally named ``caf\\xe9.txt`` and one whose name
    holds the byte 0xE9 get different ids (``caf\\\\xe9.txt`` and ``caf\\xe9.txt``), and
    each gets the same id on every run. Cost: one scan of the name when it is all ASCII
    without a backslash (most names), else one encoding and decoding.

    >>> clean_name("caf\\udce9.txt"), clean_name("caf\\\\xe9.txt"), clean_name("plain.txt")
    ('caf\\\\xe9.txt', 'caf\\\\\\\\xe9.txt', 'plain.txt')
    """
    if name.isascii() and "\\" not in name:
        return name
    name = name.replace("\\", "\\\\")
    try:
        raw = name.encode("utf-8", "surrogateescape")
    except UnicodeEncodeError:  # a surrogate that is no escaped byte (not from a POSIX name)
        raw = name.encode("utf-8", "surrogatepass")
    return raw.decode("utf-8", "backslashreplace")


def _matches(pattern: str, rel: str, name: str, folder: bool) -> bool:
    if fnmatch.fnmatchcase(rel, pattern) or (folder and fnmatch.fnmatchcase(rel + "/", pattern)):
        return True
    # A pattern without "/" names a file or folder anywhere, as in .gitignore.
    return "/" not in pattern and fnmatch.fnmatchcase(name, pattern)


def _excluded(rel: str, name: str, folder: bool, opts: ReadOptions) -> str:
    for pattern in opts.exclude:
        if _matches(pattern, rel, name, folder):
            return f"excluded by --exclude {pattern!r}"
    return ""


def _hidden(name: str, kind: str, opts: ReadOptions, shown: str = "") -> str:
    if name in VCS_FOLDERS and kind == "folder" and not opts.include_vcs:
        return f"version-control folder{shown} (read it with --include-vcs)"
    if name.startswith(".") and not opts.include_hidden:
        return f"hidden {kind}{shown} (read it with --include-hidden)"
    return ""


def folder_reason(rel: str, name: str, opts: ReadOptions) -> str:
    """Why a folder found while walking is not entered, or ``""``."""
    return _hidden(name, "folder", opts) or _excluded(rel, name, True, opts)


def file_reason(
    rel: str, name: str, opts: ReadOptions, *, found: bool = True, container: bool = False
) -> str:
    """Why a file is not read, or ``""``.

    Parameters
    ----------
    rel, name : str
        Its id and its bare name.
    found : bool
        Found by walking a folder; a file named by the user is read even when hidden.
    container : bool
        An archive: entered whatever ``include`` says, like a folder.
    """
    reason = _hidden(name, "file", opts) if found else ""
    reason = reason or _excluded(rel, name, False, opts)
    wanted = not opts.include or container or any(_matches(p, rel, name, False) for p in opts.include)
    if not reason and not wanted:
        return "not matched by --include"
    return reason


def member_reason(member_id: str, path: str, opts: ReadOptions, *, container: bool = False) -> str:
    """Why an archive member is not read, or ``""``; its folders are judged like walked folders.

    ``member_id`` is ``archive.zip!/path/in/archive`` and ``path`` the part after ``!/``.
    """
    parts = path.split("/")
    prefix = member_id[: len(member_id) - len(path)]
    for depth, folder in enumerate(parts[:-1]):
        rel = prefix + "/".join(parts[: depth + 1])
        shown = f" {folder}/"
        reason = _hidden(folder, "folder", opts, shown) or _excluded(rel, folder, True, opts)
        if reason:
            return reason if shown in reason else f"{reason} (folder{shown})"
    return file_reason(member_id, parts[-1], opts, container=container)
