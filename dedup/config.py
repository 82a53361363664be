"""Options from a file: ``dedup.toml``, or the ``[tool.dedup]`` table of a ``pyproject.toml``.

A team that audits the same folder again and again writes its choices down once, next to
the documents, instead of in every command line. The file is TOML::

    threshold = 0.85              # top level: every command that has the option
    exclude = ["drafts/**"]

    [audit]                       # dedup audit only
    keeper = "newest"
    fail_on = ["any", "skipped"]

    [check]                       # dedup check only
    min_words = 20

    [index]                       # dedup index build and update

Which file
    ``--config FILE``; else, unless ``--no-config``, ``dedup.toml`` in the first folder
    given to the command, else that folder's ``pyproject.toml`` when it has a
    ``[tool.dedup]`` table (``[tool.dedup.audit]`` … for the sections). A file found that
    way is part of what is being read, so it may not set where dedup writes or what else
    it reads (``index``, ``work_dir``, ``follow_links``, ``include_hidden`` …: see
    ``dedup.cli``); and ``dedup check`` never looks for one in a class's folder.
Keys
    An option's setting name (``keeper_policy``) or its flag without the dashes
    (``keeper``); ``-`` and ``_`` alike. Every key of the file is checked, whatever the
    command: an unknown key or section is an error that names it and the file. Not in a
    file: the paths, the options a command requires (``--out``, the index commands'
    ``--index``), ``--config`` and ``--no-config``.
Values
    What the flag takes, as TOML: a number or text for an option with a value, turned into
    the value by the flag's own parser and choices (so a file is checked as a command line
    is, and the settings are then validated as always); a list (or one text) for a
    repeatable option; ``true`` / ``false`` for a switch. A switch named by its setting sets
    the setting (``boilerplate = false``); named by its flag, ``true`` gives the flag
    (``keep-boilerplate = true``) and ``false`` leaves it out. A file or folder named in a
    value is relative to the folder of the config file.
Precedence
    An option given on the command line wins over the command's section, which wins over
    the top level, which wins over the default.

The functions here read and check a file against the options of an `argparse` parser;
`dedup.cli` decides which file and applies the values. Cost: one small file read and parsed.
"""

from __future__ import annotations

import argparse
import difflib
import os
import sys
from collections.abc import Iterable, Mapping
from typing import Any

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover - Python 3.10
    import tomli as tomllib

__all__ = [
    "ConfigError",
    "CONFIG_FILE",
    "PROJECT_FILE",
    "SECTIONS",
    "find_config",
    "read_config",
    "config_values",
]

CONFIG_FILE = "dedup.toml"
PROJECT_FILE = "pyproject.toml"
# The sections of a file and the commands they are for ("index": index build and update).
SECTIONS = ("audit", "check", "index")
# Options whose value names a file or folder (by their metavar): relative to the config file.
PATH_METAVARS = frozenset({"FILE", "DIR", "REFERENCE"})
# Options never taken from a file (besides positionals and required options).
_NOT_IN_FILE = frozenset({"help", "version", "config", "no_config"})


class ConfigError(ValueError):
    """A config file that cannot be used; the message names the file and the key."""


def find_config(folder: str) -> str | None:
    """The config file of ``folder``: its `CONFIG_FILE`, else its `PROJECT_FILE` when that
    has a ``[tool.dedup]`` table, else None.

    A ``pyproject.toml`` that does not mention ``tool.dedup`` is not parsed: a broken one
    that is not ours never stops an audit.
    """
    own = os.path.join(folder, CONFIG_FILE)
    if os.path.isfile(own):
        return own
    project = os.path.join(folder, PROJECT_FILE)
    try:
        with open(project, "rb") as handle:
            mentions = b"tool.dedup" in handle.read()
    except OSError:
        return None
    return project if mentions else None


def read_config(path: str) -> dict[str, Any]:
    """The options table of the config file ``path`` (of a ``pyproject.toml``: its ``[tool.dedup]``).

    Raises
    ------
    ConfigError
        The file cannot be read, is not TOML, or (``pyproject.toml``) has no ``[tool.dedup]`` table.
    """
    try:
        with open(path, "rb") as handle:
            data = tomllib.load(handle)
    except OSError as err:
        raise ConfigError(f"cannot read the config file {path}: {err.strerror or err}") from None
    except ValueError as err:  # TOMLDecodeError, UnicodeDecodeError
        raise ConfigError(f"the config file {path} is not valid TOML: {err}") from None
    if os.path.basename(path) != PROJECT_FILE:
        return data
    table = data.get("tool", {}).get("dedup") if isinstance(data.get("tool"), dict) else None
    if not isinstance(table, dict):
        raise ConfigError(f"{path} has no [tool.dedup] table of dedup options")
    return table


def config_values(
    table: Mapping[str, Any],
    path: str,
    section: str,
    target: argparse.ArgumentParser,
    offered: Mapping[str, Iterable[argparse.ArgumentParser]],
) -> dict[str, Any]:
    """The values the file gives the command ``target`` (of ``section``), by argument name.

    Every key of ``table`` is checked against ``offered`` (section -> the parsers of its
    commands; a top-level key must belong to one of them), then the top level and the
    ``section`` are converted by ``target``'s own option actions, the section last.

    Raises
    ------
    ConfigError
        An unknown section or key, a key given twice, a value of the wrong kind or refused by
        the option's parser or choices.
    """
    top, sections = _split(table, path)
    every = [parser for parsers in offered.values() for parser in parsers]
    _check_keys(top, every, path, "")
    for name in SECTIONS:
        _check_keys(sections.get(name, {}), list(offered.get(name, ())), path, f"[{name}] ")
    keys = _option_keys(target)
    values: dict[str, Any] = {}
    for where, entries in (("", top), (f"[{section}] ", sections.get(section, {}))):
        for key, value in entries.items():
            found = keys.get(_normal(key))
            if found is not None:  # a top-level option of another command is not for this one
                values.update(_converted(target, *found, f"{path}: {where}{key}", value, path))
    return values


def _split(table: Mapping[str, Any], path: str) -> tuple[dict[str, Any], dict[str, dict]]:
    """The top-level options and the sections of a file."""
    top, sections = {}, {}
    for key, value in table.items():
        if isinstance(value, dict):
            if key not in SECTIONS:
                raise ConfigError(
                    f"{path}: unknown section [{key}]; the sections are "
                    + ", ".join(f"[{s}]" for s in SECTIONS)
                )
            sections[key] = value
        else:
            top[key] = value
    return top, sections


def _normal(key: str) -> str:
    return key.replace("-", "_")


def _option_keys(parser: argparse.ArgumentParser) -> dict[str, tuple[argparse.Action, bool]]:
    """Key -> (the option's action, whether the key is the setting's own name) of every
    option a file may give."""
    keys: dict[str, tuple[argparse.Action, bool]] = {}
    for action in parser._actions:
        if not action.option_strings or action.required or action.dest in _NOT_IN_FILE:
            continue
        for flag in action.option_strings:
            if flag.startswith("--"):
                keys[_normal(flag[2:])] = (action, _normal(flag[2:]) == action.dest)
        keys[action.dest] = (action, True)
    return keys


def _check_keys(
    entries: Mapping[str, Any], parsers: list[argparse.ArgumentParser], path: str, where: str
) -> None:
    """Each key names an option of one of ``parsers``, and no option is named twice."""
    known: dict[str, tuple[argparse.Action, bool]] = {}
    for parser in parsers:
        for key, found in _option_keys(parser).items():
            known.setdefault(key, found)
    named: dict[str, str] = {}
    for key in entries:
        found = known.get(_normal(key))
        if found is None:
            close = difflib.get_close_matches(_normal(key), sorted(known), n=1)
            hint = f" (did you mean {close[0]!r}?)" if close else ""
            raise ConfigError(f"{path}: unknown key {where}{key!r}: no dedup option has this name{hint}")
        dest = found[0].dest
        if dest in named:
            raise ConfigError(f"{path}: {where}{named[dest]!r} and {key!r} are the same option: give it once")
        named[dest] = key


def _converted(
    parser: argparse.ArgumentParser, action: argparse.Action, by_name: bool, label: str, value: Any, path: str
) -> dict[str, Any]:
    """The arguments one file entry sets, made by the option's own action as a flag would."""
    if isinstance(action, argparse._StoreConstAction):  # switches (store_true/false derive from it)
        if not isinstance(value, bool):
            raise ConfigError(f"{label} = {value!r}: give true or false")
        if by_name:
            return {action.dest: value}
        return {action.dest: action.const} if value else {}
    many = isinstance(action, argparse._AppendAction) or action.nargs in ("+", "*")
    many = many or getattr(action, "repeatable", False)
    items = value if isinstance(value, list) else [value]
    if isinstance(value, list) and not many:
        raise ConfigError(f"{label} = {value!r}: this option takes one value, not a list")
    if any(isinstance(item, bool) or not isinstance(item, (str, int, float)) for item in items):
        raise ConfigError(
            f"{label} = {value!r}: give text or a number" + (" (or a list of them)" if many else "")
        )
    words = [_relative(str(item), path) if action.metavar in PATH_METAVARS else str(item) for item in items]
    namespace = argparse.Namespace()
    flag = action.option_strings[-1]
    try:
        if action.nargs in ("+", "*"):
            action(parser, namespace, parser._get_values(action, words), flag)
        else:
            for word in words:
                action(parser, namespace, parser._get_values(action, [word]), flag)
    except argparse.ArgumentError as err:
        raise ConfigError(f"{label} = {value!r}: {err.message}") from None
    return vars(namespace)


def _relative(word: str, path: str) -> str:
    """A file or folder named in a config file, relative to that file's folder."""
    if word == "-" or os.path.isabs(word):
        return word
    return os.path.join(os.path.dirname(path), word)
