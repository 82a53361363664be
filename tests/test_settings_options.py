"""The command-line options of the settings are declared once, on `AuditSettings`, and generated.

The expected flags and their mapping below were collected from the command line as it was when
every option was still written out by hand in `dedup.cli` and `dedup.cli_index`; the generated
parser must accept exactly the same flags and turn them into exactly the same settings.
"""

from __future__ import annotations

import argparse
import dataclasses
import json

import pytest

from dedup.cli import FAIL_ON, add_setting_options, build_parser, main, settings_from_args
from dedup.cli_index import SKETCH_SETTINGS
from dedup.settings import AuditSettings, Option, setting_options

# `dedup audit` before the options were generated, in the order they were declared, and
# the command-line options added since (they are no settings).
ADDED_RUN_FLAGS = ["--no-report", "--engine", "--spark-master", "--accept", "--json"]
# Short flags of the common options, the exit-code options and the config file, added since.
SHORT_RUN_FLAGS = ["-o", "-q"]
CHECK_RUN_FLAGS = ["--max-skipped-share", "--config", "--no-config"]
ADDED_SETTING_FLAGS = [
    "-t",
    "--min-passage-words",
    "--min-unique-words",
    "--base-url",
    "--follow-links",
    "--max-archive-members",
    "--max-run-members",
]
AUDIT_FLAGS = [
    "--out",
    "--threshold",
    "--measure",
    "--shingle-size",
    "--char-ngrams",
    "--candidates",
    "--exhaustive-max-docs",
    "--candidate-threshold",
    "--num-perm",
    "--seed",
    "--bands",
    "--rows",
    "--bucket-limit",
    "--hash-scheme",
    "--tfidf-features",
    "--sublinear-tf",
    "--keeper",
    "--prefer",
    "--date-field",
    "--retire-coverage",
    "--keep-boilerplate",
    "--boilerplate-share",
    "--boilerplate-min-texts",
    "--boilerplate-max-text-share",
    "--ignore-text",
    "--id-field",
    "--text-field",
    "--max-file-bytes",
    "--include-hidden",
    "--include-vcs",
    "--include",
    "--exclude",
    "--max-text-chars",
    "--max-archive-ratio",
    "--max-archive-bytes",
    "--html-keep-all",
    "--fail-on",
    "--index",
    "--quiet",
    "--work-dir",
    "--keep-work",
    "--workers",
    *ADDED_RUN_FLAGS,
    *SHORT_RUN_FLAGS,
    *CHECK_RUN_FLAGS,
    *ADDED_SETTING_FLAGS,
]
# Options of `dedup audit` that are about the run, not the audit: not settings.
AUDIT_RUN_FLAGS = {
    "--out",
    "--fail-on",
    "--index",
    "--quiet",
    "--work-dir",
    "--keep-work",
    "--workers",
    *ADDED_RUN_FLAGS,
    *SHORT_RUN_FLAGS,
    *CHECK_RUN_FLAGS,
}
# `dedup index build` / `update` before, and the reading options they take since.
INDEX_FLAGS = [
    "--index",
    "--json",
    "--quiet",
    "--shingle-size",
    "--char-ngrams",
    "--num-perm",
    "--seed",
    "--hash-scheme",
    "--tfidf-features",
    "--sublinear-tf",
    "--id-field",
    "--text-field",
    "--max-file-bytes",
    "--include-hidden",
]
INDEX_ADDED_FLAGS = [
    "--include",
    "--exclude",
    "--include-vcs",
    "--html-keep-all",
    "--max-text-chars",
    "--max-archive-ratio",
    "--max-archive-bytes",
    "--follow-links",
    "--max-archive-members",
    "--max-run-members",
    "-q",
    "--fail-on",
    *CHECK_RUN_FLAGS,
]
# Settings deliberately not on the command line.
NOT_ON_COMMAND_LINE = {"false_positive_weight"}

# Every setting flag, what it was given and the setting it set (checked against the old parser).
FLAG_CASES = [
    (["--threshold", "0.7"], "threshold", 0.7),
    (["-t", "0.6"], "threshold", 0.6),
    (["--measure", "containment"], "measure", "containment"),
    (["--shingle-size", "3"], "shingle_size", 3),
    (["--char-ngrams", "4"], "char_ngrams", 4),
    (["--candidates", "lsh"], "candidates", "lsh"),
    (["--exhaustive-max-docs", "10"], "exhaustive_max_docs", 10),
    (["--candidate-threshold", "0.4"], "candidate_threshold", 0.4),
    (["--num-perm", "64"], "num_perm", 64),
    (["--seed", "7"], "seed", 7),
    (["--bands", "16"], "bands", 16),
    (["--rows", "4"], "rows", 4),
    (["--bucket-limit", "50"], "bucket_limit", 50),
    (["--hash-scheme", "stable64"], "hash_scheme", "stable64"),
    (["--tfidf-features", "1024"], "tfidf_features", 1024),
    (["--sublinear-tf"], "sublinear_tf", True),
    (["--keeper", "newest"], "keeper_policy", "newest"),
    (["--prefer", "current/**", "--prefer", "docs/**"], "prefer", ("current/**", "docs/**")),
    (["--date-field", "updated"], "date_field", "updated"),
    (["--retire-coverage", "0.5"], "retire_coverage", 0.5),
    (["--min-passage-words", "25"], "passage_min_words", 25),
    (["--min-unique-words", "40"], "unique_min_words", 40),
    (["--base-url", "https://wiki.example.org/"], "base_url", "https://wiki.example.org/"),
    (["--keep-boilerplate"], "boilerplate", False),
    (["--boilerplate-share", "0.1"], "boilerplate_share", 0.1),
    (["--boilerplate-min-texts", "4"], "boilerplate_min_texts", 4),
    (["--boilerplate-max-text-share", "0.3"], "boilerplate_max_text_share", 0.3),
    (["--ignore-text", "known.txt"], "ignore_text_file", "known.txt"),
    (["--id-field", "id"], "id_field", "id"),
    (["--text-field", "title", "--text-field", "body"], "text_fields", ("title", "body")),
    (["--max-file-bytes", "1000"], "max_file_bytes", 1000),
    (["--include-hidden"], "include_hidden", True),
    (["--include-vcs"], "include_vcs", True),
    (["--include", "*.md", "--include", "*.txt"], "include", ("*.md", "*.txt")),
    (["--exclude", "drafts/**"], "exclude", ("drafts/**",)),
    (["--max-text-chars", "100"], "max_text_chars", 100),
    (["--max-archive-ratio", "10"], "max_archive_ratio", 10.0),
    (["--max-archive-bytes", "5000"], "max_archive_bytes", 5000),
    (["--html-keep-all"], "html_keep_all", True),
    (["--follow-links"], "follow_links", True),
    (["--max-archive-members", "50"], "max_archive_members", 50),
    (["--max-run-members", "500"], "max_run_members", 500),
]


def _subparser(*names: str) -> argparse.ArgumentParser:
    parser = build_parser()
    for name in names:
        parser = next(a for a in parser._actions if isinstance(a, argparse._SubParsersAction)).choices[name]
    return parser


def _flags(parser: argparse.ArgumentParser) -> list[str]:
    return [flag for a in parser._actions for flag in a.option_strings if flag not in ("-h", "--help")]


def _audit(*argv: str) -> AuditSettings:
    return settings_from_args(build_parser().parse_args(["audit", "docs", "--out", "out", *argv]))


def _sample(name: str, option: Option) -> tuple[list[str], object]:
    """Words for ``option`` that set its setting to something other than the default, and that value."""
    default = getattr(AuditSettings(), name)
    flag = option.flags[0]
    if option.form in ("switch", "inverse"):
        return [flag], option.form == "switch"
    if option.form == "many":
        return [flag, "first", flag, "second"], ("first", "second")
    if option.choices:
        value = next(choice for choice in option.choices if choice != default)
        return [flag, value], value
    value = {int: 7 if default != 7 else 8, float: 0.25, None: "sample"}[option.parse]
    return [flag, str(value)], value


def test_audit_takes_exactly_the_flags_it_took_before():
    flags = _flags(_subparser("audit"))
    assert sorted(flags) == sorted(AUDIT_FLAGS)
    assert len(flags) == len(set(flags))


def test_index_build_and_update_take_their_flags_and_every_reading_option():
    for action in ("build", "update"):
        flags = _flags(_subparser("index", action))
        assert sorted(flags) == sorted(INDEX_FLAGS + INDEX_ADDED_FLAGS), action
        assert len(flags) == len(set(flags))


@pytest.mark.parametrize("argv, name, value", FLAG_CASES, ids=[case[0][0] for case in FLAG_CASES])
def test_every_flag_sets_its_setting_as_before(argv, name, value):
    settings = _audit(*argv)
    assert getattr(settings, name) == value and type(getattr(settings, name)) is type(value)
    assert settings == AuditSettings().replace(**{name: value})  # and nothing else


def test_flag_cases_cover_every_setting_flag():
    assert sorted(argv[0] for argv, _, _ in FLAG_CASES) == sorted(set(AUDIT_FLAGS) - AUDIT_RUN_FLAGS)


def test_no_options_give_the_default_settings():
    assert _audit() == AuditSettings()
    assert _audit().text_fields == ("text",) and _audit().boilerplate is True


@pytest.mark.parametrize(
    "argv",
    [
        ["--threshold", "high"],
        ["--measure", "overlap"],
        ["--keeper", "biggest"],
        ["--seed", "1.5"],
        ["--fail-on", "sometimes"],
        ["--workers", "0"],
    ],
)
def test_bad_values_are_usage_errors(argv, capsys):
    with pytest.raises(SystemExit) as stop:
        build_parser().parse_args(["audit", "docs", "--out", "out", *argv])
    assert stop.value.code == 2
    err = capsys.readouterr().err
    assert "dedup: error: argument " in err and f"{argv[0]}: " in err


def test_settings_fields_and_generated_flags_correspond_one_to_one():
    fields = {f.name for f in dataclasses.fields(AuditSettings)}
    offered = dict(setting_options())
    assert fields - set(offered) == NOT_ON_COMMAND_LINE
    declared = [flag for option in offered.values() for flag in option.flags]
    assert len(declared) == len(set(declared))
    audit = _subparser("audit")
    assert set(declared) == set(_flags(audit)) - AUDIT_RUN_FLAGS
    by_flag = {flag: a for a in audit._actions for flag in a.option_strings}
    for name, option in offered.items():
        assert {by_flag[flag].dest for flag in option.flags} == {name}
    # The run's own options never land on a setting's name.
    run_dests = {by_flag[flag].dest for flag in AUDIT_RUN_FLAGS} | {"paths"}
    assert not run_dests & fields


def test_every_option_reaches_its_setting_from_audit_and_index_build():
    reading = {name for name, option in setting_options() if option.group == "inputs"}
    for name, option in setting_options():
        words, value = _sample(name, option)
        assert _audit(*words) == AuditSettings().replace(**{name: value}), name
        if name in reading or name in SKETCH_SETTINGS:
            args = build_parser().parse_args(["index", "build", "docs", "--index", "f", *words])
            assert settings_from_args(args) == AuditSettings().replace(**{name: value}), name


def test_index_commands_take_the_settings_the_index_records():
    from dedup.index.store import SKETCH_KEYS, read_keys

    assert set(SKETCH_SETTINGS) == set(SKETCH_KEYS)
    reading = {name for name, option in setting_options() if option.group == "inputs"}
    assert reading == set(read_keys())


def test_update_changes_only_the_options_given():
    recorded = AuditSettings(seed=9, include_hidden=True, text_fields=("body",), exclude=("old",))
    args = build_parser().parse_args(["index", "update", "--index", "f", "--include", "*.md"])
    assert settings_from_args(args, recorded) == recorded.replace(include=("*.md",))
    args = build_parser().parse_args(["index", "update", "--index", "f"])
    assert settings_from_args(args, recorded) == recorded


def test_index_build_reads_with_the_new_reading_options(write_corpus, tmp_path, capsys):
    words = "a paragraph with a handful of ordinary words about {} written for this check"
    root = write_corpus(
        {
            "a/one.txt": words.format("apples"),
            "a/two.md": words.format("pears"),
            "drafts/three.txt": words.format("plums"),
            "CVS/notes.txt": words.format("cherries"),
        }
    )
    index = str(tmp_path / "x.index")

    def present() -> dict:
        assert main(["index", "info", "--index", index, "--json"]) == 0
        return json.loads(capsys.readouterr().out)

    argv = ["index", "build", str(root), "--index", index, "--quiet"]
    assert main([*argv, "--exclude", "drafts", "--include", "*.txt", "--include-vcs"]) == 0
    info = present()
    assert info["documents"] == {"present": 2}  # a/one.txt and CVS/notes.txt
    assert (info["settings"]["include"], info["settings"]["exclude"]) == (["*.txt"], ["drafts"])
    assert info["settings"]["include_vcs"] is True
    # An update without reading options reads as the index records.
    assert main(["index", "update", "--index", index, "--quiet"]) == 0
    assert present()["documents"] == {"present": 2}
    # Given, a reading option replaces the recorded one; the others stay as recorded.
    assert main(["index", "update", "--index", index, "--quiet", "--exclude", "nothing-matches"]) == 0
    info = present()
    assert info["documents"] == {"present": 3}  # drafts/three.txt too; a/two.md still not *.txt
    assert (info["settings"]["include"], info["settings"]["exclude"]) == (["*.txt"], ["nothing-matches"])


def test_unknown_setting_names_and_bad_declarations_are_refused():
    with pytest.raises(ValueError, match="no command-line option"):
        add_setting_options(argparse.ArgumentParser(), ["false_positive_weight"])
    with pytest.raises(ValueError, match="group"):
        Option(flags=("--x",), help="x", group="somewhere else")
    with pytest.raises(ValueError, match="form"):
        Option(flags=("--x",), help="x", group="inputs", form="toggle")
    for flags in (("-x",), ("-xy", "--x"), ("x", "--x"), ("-1", "--x")):
        with pytest.raises(ValueError, match="flags"):
            Option(flags=flags, help="x", group="inputs")
    assert Option(flags=("-x", "--ex"), help="x", group="inputs").long_flag == "--ex"


def _option_helps(parser: argparse.ArgumentParser) -> dict[str, str]:
    return {flag: a.help or "" for a in parser._actions for flag in a.option_strings}


@pytest.mark.parametrize("command", [("audit",), ("index", "build"), ("index", "update")])
def test_help_shows_a_default_only_where_it_means_something_and_once(command):
    parser = _subparser(*command)
    text = parser.format_help()
    for empty in ("None", "False", "True", "[]", "()"):
        assert f"default: {empty})" not in text
    for flag, help_text in _option_helps(parser).items():
        assert help_text.count("default") <= 1, flag
        assert "%(default)" not in help_text, flag
    helps = _option_helps(parser)
    if command == ("index", "update"):
        assert all(
            helps[option.flags[0]].endswith("(default: as the index records)")
            for name, option in setting_options()
            if option.flags[0] in helps
        )
    else:
        assert helps["--shingle-size"].endswith("(default: 5)")
        assert helps["--hash-scheme"].endswith("(default: binned)")
        assert helps["--text-field"].endswith("(default: text)")
        assert "default" not in helps["--include"] + helps["--char-ngrams"] + helps["--include-hidden"]


def test_audit_help_keeps_the_cautions_and_the_run_defaults():
    parser = _subparser("audit")
    text = " ".join(parser.format_help().split())
    assert "evidence for a person to review, not a verdict" in text
    assert "never changes, moves or deletes" in text
    helps = _option_helps(parser)
    assert helps["--fail-on"].endswith("(default: none)")
    assert helps["--workers"].count("default") == 1 and "default" not in helps["--out"]


def test_fail_on_is_a_command_line_choice_not_a_setting():
    from dedup.index.history import FAIL_ON as INDEX_FAIL_ON

    assert "fail_on" not in {f.name for f in dataclasses.fields(AuditSettings)}
    assert "fail_on" not in AuditSettings().to_dict()
    assert FAIL_ON == INDEX_FAIL_ON
    by_flag = {flag: a for a in _subparser("audit")._actions for flag in a.option_strings}
    assert (
        tuple(by_flag["--fail-on"].choices) == (*FAIL_ON, "skipped")
        and by_flag["--fail-on"].default == "none"
    )
    args = build_parser().parse_args(["audit", "docs", "--out", "out", "--fail-on", "any"])
    assert args.fail_on == "any" and settings_from_args(args) == AuditSettings()
    assert args.fail_on_skipped is False and args.max_skipped_share == 0.5
    # ``skipped`` comes on top of the condition on clusters; neither is a setting.
    args = build_parser().parse_args(
        ["audit", "docs", "-o", "out", "--fail-on", "skipped", "--fail-on", "new"]
    )
    assert (args.fail_on, args.fail_on_skipped) == ("new", True) and settings_from_args(
        args
    ) == AuditSettings()
    assert "max_skipped_share" not in AuditSettings().to_dict()
