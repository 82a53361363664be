"""Help without noise, short flags, ``--out -`` refused, the completion script and ``dedup schema``."""

from __future__ import annotations

import argparse
import json
import shutil
import subprocess
import sys
import types

import pytest

import dedup.cli
from dedup.cli import build_parser, main
from dedup.cli_completion import bash_script
from dedup.settings import HASH_SCHEMES, MEASURES


def _commands(parser: argparse.ArgumentParser, path: tuple[str, ...] = ()):
    yield path, parser
    for action in parser._actions:
        if isinstance(action, argparse._SubParsersAction):
            for name, sub in action.choices.items():
                yield from _commands(sub, (*path, name))


COMMANDS = list(_commands(build_parser()))


@pytest.mark.parametrize("path, parser", COMMANDS, ids=[" ".join(p) or "dedup" for p, _ in COMMANDS])
def test_every_help_says_each_default_at_most_once_and_marks_required_options(path, parser):
    text = parser.format_help()
    flat = " ".join(text.split())
    for empty in ("None", "False", "True", "[]", "()", ""):
        assert f"(default: {empty})" not in text
    for action in parser._actions:
        if not action.option_strings or action.help in (None, argparse.SUPPRESS):
            continue
        assert action.help.count("default") <= 1, action.option_strings
        assert "%(default)" not in action.help
        if action.required:
            assert " ".join(f"{action.help} (required)".split()) in flat, action.option_strings
        else:
            assert "(required)" not in action.help


def _flags(*path: str) -> set[str]:
    parser = dict(COMMANDS)[path]
    return {flag for action in parser._actions for flag in action.option_strings}


def test_short_flags_of_the_common_options():
    assert {"-o", "-t", "-q"} <= _flags("audit")
    assert {"-o", "-q"} <= _flags("check")
    assert "-q" in _flags("index", "build") and "-q" in _flags("index", "update")
    args = build_parser().parse_args(["audit", "docs", "-o", "out", "-t", "0.7", "-q"])
    assert (args.out, args.threshold, args.quiet) == ("out", 0.7, True)


def test_the_audit_help_lists_every_exit_code_and_the_config_file():
    flat = " ".join(dict(COMMANDS)[("audit",)].format_help().split())
    for code in ("0 ran", "1 --fail-on was met", "2 usage error", "3 internal error", "4 inputs not read"):
        assert code in flat
    assert "dedup.toml" in flat and "[tool.dedup]" in flat
    for code in range(5):
        assert f"\n{code}  " in dedup.cli.__doc__


@pytest.mark.parametrize("command", [["audit", "{root}"], ["check", "{root}"]])
def test_out_dash_is_refused_before_anything_is_written(write_corpus, tmp_path, capsys, monkeypatch, command):
    root = write_corpus({"a.txt": "a few words of an invented text about lanterns and their keepers"})
    monkeypatch.chdir(tmp_path)
    with pytest.raises(SystemExit) as stop:
        main([word.format(root=root) for word in command] + ["--out", "-"])
    assert stop.value.code == 2
    err = capsys.readouterr().err
    assert "'-' is not a folder" in err and "Traceback" not in err
    assert not (tmp_path / "-").exists()


def _complete(script: str, words: list[str], cwd) -> list[str]:
    """What the script proposes for the last of ``words`` (bash run as the shell would)."""
    driver = 'source "$1"; shift; COMP_WORDS=("$@"); COMP_CWORD=$((${#COMP_WORDS[@]} - 1)); _dedup; '
    driver += "printf '%s\\n' \"${COMPREPLY[@]}\""
    done = subprocess.run(
        ["bash", "-c", driver, "bash", script, *words], cwd=cwd, capture_output=True, text=True, check=True
    )
    return [line for line in done.stdout.splitlines() if line]


@pytest.mark.skipif(shutil.which("bash") is None, reason="bash is not installed")
def test_the_bash_completion_script_completes_commands_options_and_values(tmp_path, capsys):
    assert main(["completion", "bash"]) == 0
    script = tmp_path / "dedup.bash"
    script.write_text(capsys.readouterr().out, encoding="utf-8")
    assert subprocess.run(["bash", "-n", str(script)]).returncode == 0
    here = tmp_path / "here"
    (here / "folder").mkdir(parents=True)
    (here / "file.txt").write_text("x", encoding="utf-8")
    complete = lambda *words: _complete(str(script), ["dedup", *words], here)  # noqa: E731
    assert complete("au") == ["audit"]
    assert complete("index", "") == ["build", "update", "info", "baseline"]
    assert complete("audit", "--meas") == ["--measure"]
    assert complete("audit", "--measure", "") == list(MEASURES)
    assert complete("index", "build", "--hash-scheme", "") == list(HASH_SCHEMES)
    assert complete("audit", "-o", "") == ["folder"]  # a folder, not a file
    assert sorted(complete("audit", "")) == ["file.txt", "folder"]
    assert complete("audit", "-t", "") == []  # a number: nothing to propose
    assert "--max-skipped-share" in complete("check", "--")
    assert complete("completion", "") == ["bash"]


def test_the_completion_script_follows_the_parser():
    parser = build_parser()
    script = bash_script(parser)
    for path, sub in _commands(parser):
        assert f'"{"/".join(path)}")' in script
        for action in sub._actions:
            for flag in action.option_strings:
                assert flag in script


@pytest.fixture
def schemas(monkeypatch):
    """A stand-in for `dedup.schemas` with two schemas (the CLI only calls its two functions)."""
    module = types.ModuleType("dedup.schemas")
    texts = {"alpha": '{"title": "alpha"}', "beta": '{"title": "beta"}\n'}
    module.schema_names = lambda: sorted(texts)
    module.schema_text = lambda name: texts[name]
    monkeypatch.setitem(sys.modules, "dedup.schemas", module)
    return texts


def test_schema_lists_the_names_and_prints_one(schemas, capsys):
    assert main(["schema"]) == 0
    assert capsys.readouterr().out.split() == ["alpha", "beta"]
    assert main(["schema", "alpha"]) == 0
    assert capsys.readouterr().out == schemas["alpha"] + "\n"
    assert main(["schema", "beta"]) == 0
    assert capsys.readouterr().out == schemas["beta"]


def test_an_unknown_schema_is_a_usage_error_naming_the_known_ones(schemas, capsys):
    assert main(["schema", "gamma"]) == 2
    err = capsys.readouterr().err
    assert "no schema named 'gamma'" in err and "alpha, beta" in err


def test_the_published_schemas_are_json():
    try:
        from dedup.schemas import schema_names
    except ImportError:
        pytest.skip("dedup.schemas is not in this tree")
    for name in schema_names():
        document = json.loads(subprocess.check_output([sys.executable, "-c", _PRINT_SCHEMA, name]))
        assert isinstance(document, dict) and "$schema" in document, name


_PRINT_SCHEMA = "import sys; from dedup.cli import main; sys.exit(main(['schema', sys.argv[1]]))"
