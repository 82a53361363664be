"""Options from a config file: dedup.toml in the first folder given, [tool.dedup] of its
pyproject.toml, or --config FILE; checked as flags are, and overridden by the command line."""

from __future__ import annotations

import json
import os

import pytest

from dedup.cli import main
from dedup.config import ConfigError, find_config, read_config

TEXTS = {
    "a.md": "Keepers of the hill orchard prune the pear trees in the first dry week of spring and "
    "stack the cut branches by the north wall, where the wind cannot scatter them.",
    "b.md": "Keepers of the hill orchard prune the pear trees in the first dry week of spring and "
    "stack the cut branches by the east wall, where the wind cannot scatter them.",
    "c.md": "The ferry to the island leaves twice a day; the crew checks the ropes, the engine and "
    "the weather board before the first passengers come aboard with their bicycles.",
}


def _settings(out) -> dict:
    return json.loads((out / "audit.json").read_text(encoding="utf-8"))["settings"]


@pytest.fixture
def corpus(write_corpus):
    return write_corpus(TEXTS)


def test_dedup_toml_of_the_folder_sets_options_and_the_command_line_wins(corpus, tmp_path, capsys):
    (corpus / "dedup.toml").write_text(
        'threshold = 0.55\nexclude = ["c.md"]\n\n[audit]\nkeeper = "shortest-path"\nprefer = ["a*"]\n'
        "\n[check]\nmin_words = 30\n",
        encoding="utf-8",
    )
    out = tmp_path / "out"
    assert main(["audit", str(corpus), "-o", str(out), "-q"]) == 0
    settings = _settings(out)
    assert (settings["threshold"], settings["exclude"]) == (0.55, ["c.md"])
    assert (settings["keeper_policy"], settings["prefer"]) == ("shortest-path", ["a*"])
    err = capsys.readouterr().err
    assert f"options from {corpus / 'dedup.toml'}" in err and "--no-config" in err
    # Given on the command line, a value and a repeatable option replace the file's.
    argv = ["audit", str(corpus), "-o", str(out), "-q", "-t", "0.9", "--exclude", "b.md", "--exclude", "x"]
    assert main(argv) == 0
    settings = _settings(out)
    assert (settings["threshold"], settings["exclude"], settings["keeper_policy"]) == (
        0.9,
        ["b.md", "x"],
        "shortest-path",
    )
    capsys.readouterr()
    assert main(["audit", str(corpus), "-o", str(out), "-q", "--no-config"]) == 0
    assert _settings(out)["threshold"] == 0.8 and "options from" not in capsys.readouterr().err


def test_run_json_names_the_config_file_that_gave_options(corpus, tmp_path):
    import jsonschema

    from dedup.schemas import load_schema

    (corpus / "dedup.toml").write_text("threshold = 0.55\n", encoding="utf-8")
    out = tmp_path / "out"
    runs = []
    for extra in ([], ["--no-config"]):
        assert main(["audit", str(corpus), "-o", str(out), "-q", *extra]) == 0
        runs.append(json.loads((out / "run.json").read_text(encoding="utf-8")))
        jsonschema.validate(runs[-1], load_schema("run"))
    assert runs[0]["config_file"] == os.path.abspath(corpus / "dedup.toml")
    assert "config_file" not in runs[1]


def test_a_file_gives_the_same_outputs_as_the_same_flags(corpus, tmp_path):
    config = tmp_path / "team.toml"
    config.write_text('threshold = 0.5\nmeasure = "containment"\nkeep-boilerplate = true\n', encoding="utf-8")
    flags = ["--threshold", "0.5", "--measure", "containment", "--keep-boilerplate"]
    assert main(["audit", str(corpus), "-o", str(tmp_path / "by-file"), "-q", "--config", str(config)]) == 0
    assert main(["audit", str(corpus), "-o", str(tmp_path / "by-flags"), "-q", *flags]) == 0
    for name in ("audit.json", "pairs.csv", "clusters.csv", "ledger.csv"):
        assert (tmp_path / "by-file" / name).read_bytes() == (tmp_path / "by-flags" / name).read_bytes(), name
    assert _settings(tmp_path / "by-file")["boilerplate"] is False


def test_pyproject_tool_table_is_read_and_dedup_toml_comes_first(corpus, tmp_path):
    (corpus / "pyproject.toml").write_text(
        '[project]\nname = "x"\n\n[tool.dedup]\nthreshold = 0.6\n', encoding="utf-8"
    )
    assert find_config(str(corpus)) == str(corpus / "pyproject.toml")
    assert main(["audit", str(corpus), "-o", str(tmp_path / "o1"), "-q"]) == 0
    assert _settings(tmp_path / "o1")["threshold"] == 0.6
    (corpus / "dedup.toml").write_text("threshold = 0.7\n", encoding="utf-8")
    assert main(["audit", str(corpus), "-o", str(tmp_path / "o2"), "-q"]) == 0
    assert _settings(tmp_path / "o2")["threshold"] == 0.7


def test_a_pyproject_without_our_table_is_not_read_even_when_broken(corpus, tmp_path):
    (corpus / "pyproject.toml").write_text("[project\nname = ", encoding="utf-8")
    assert find_config(str(corpus)) is None
    assert main(["audit", str(corpus), "-o", str(tmp_path / "out"), "-q"]) == 0
    with pytest.raises(ConfigError, match=r"no \[tool.dedup\] table"):
        (corpus / "pyproject.toml").write_text('[project]\nname = "x"\n', encoding="utf-8")
        read_config(str(corpus / "pyproject.toml"))


@pytest.mark.parametrize(
    "content, message",
    [
        ("treshold = 0.5\n", "unknown key 'treshold'"),
        ("[audit]\nmin_words = 3\n", "unknown key [audit] 'min_words'"),  # an option of check only
        ("[audits]\nthreshold = 0.5\n", "unknown section [audits]"),
        ("threshold = true\n", "threshold = True: give text or a number"),
        ("threshold = [0.5]\n", "takes one value, not a list"),
        ('threshold = "high"\n', "invalid float value: 'high'"),
        ('measure = "overlap"\n', "invalid choice: 'overlap'"),
        ('include-hidden = "yes"\n', "give true or false"),
        ('keeper = "newest"\nkeeper_policy = "oldest"\n', "are the same option"),
        ("shingle_size = 5.5\n", "invalid int value"),
        ("threshold = 1.5\n", "threshold must be above 0 and at most 1"),  # validated as flags are
        ("threshold = \n", "not valid TOML"),
        ('fail_on = ["sometimes"]\n', "invalid choice: 'sometimes'"),
        ('out = "elsewhere"\n', "unknown key 'out'"),  # required options come from the command line
    ],
)
def test_a_bad_file_is_a_usage_error_naming_the_file_and_the_key(corpus, tmp_path, capsys, content, message):
    config = tmp_path / "bad.toml"
    config.write_text(content, encoding="utf-8")
    out = tmp_path / "out"
    assert main(["audit", str(corpus), "-o", str(out), "--config", str(config)]) == 2
    err = capsys.readouterr().err
    assert message in err and str(config) in err and "Traceback" not in err
    assert not (out / "audit.json").exists()


def test_a_missing_config_file_is_a_usage_error(corpus, tmp_path, capsys):
    assert (
        main(["audit", str(corpus), "-o", str(tmp_path / "out"), "--config", str(tmp_path / "none.toml")])
        == 2
    )
    assert "no such config file" in capsys.readouterr().err


def test_switches_by_setting_name_and_by_flag(corpus, tmp_path):
    def run(content: str) -> dict:
        config = tmp_path / "c.toml"
        config.write_text(content, encoding="utf-8")
        assert main(["audit", str(corpus), "-o", str(tmp_path / "out"), "-q", "--config", str(config)]) == 0
        return _settings(tmp_path / "out")

    assert run("boilerplate = false\n")["boilerplate"] is False
    assert run("keep_boilerplate = true\n")["boilerplate"] is False
    assert run("keep-boilerplate = false\n")["boilerplate"] is True  # the flag left out
    assert run("include-hidden = true\nmax_file_bytes = 1000\n")["include_hidden"] is True
    # A setting by its field name, that name with dashes, or its flag's name.
    for key in ("unique_min_words", "unique-min-words", "min-unique-words", "min_unique_words"):
        assert run(f"{key} = 12\n")["unique_min_words"] == 12, key
    assert run('text-field = ["title", "body"]\n')["text_fields"] == ["title", "body"]
    assert run('text_fields = "body"\n')["text_fields"] == ["body"]


def test_files_named_in_a_config_file_are_relative_to_it(corpus, tmp_path):
    team = tmp_path / "team"
    team.mkdir()
    (team / "known.txt").write_text("a line every page carries\n", encoding="utf-8")
    (team / "dedup.toml").write_text('ignore-text = "known.txt"\n', encoding="utf-8")
    config = os.path.relpath(team / "dedup.toml")
    assert main(["audit", str(corpus), "-o", str(tmp_path / "out"), "-q", "--config", config]) == 0
    assert _settings(tmp_path / "out")["ignore_text_file"] == os.path.join(
        os.path.dirname(config), "known.txt"
    )


def test_fail_on_from_a_file(corpus, tmp_path, capsys):
    (corpus / "broken.md").write_bytes(b"\x00\x01\x02")
    assert main(["audit", str(corpus), "-o", str(tmp_path / "o1"), "-q"]) == 0
    (corpus / "dedup.toml").write_text('[audit]\nfail_on = ["any", "skipped"]\n', encoding="utf-8")
    assert main(["audit", str(corpus), "-o", str(tmp_path / "o2"), "-q"]) == 4
    assert "--fail-on skipped" in capsys.readouterr().err


def test_check_and_index_read_their_sections(tmp_path, capsys):
    subs = tmp_path / "subs"
    subs.mkdir()
    for name, body in TEXTS.items():
        (subs / name.replace(".md", ".txt")).write_text(body, encoding="utf-8")
    (subs / "dedup.toml").write_text(
        "threshold = 0.6\nshingle_size = 4\n[check]\nmin_words = 12\n[index]\nnum_perm = 64\n",
        encoding="utf-8",
    )
    out = tmp_path / "out"
    config = ["--config", str(subs / "dedup.toml")]  # a check never looks for one in the class's folder
    assert main(["check", str(subs), "-o", str(out), "-q", *config]) == 0
    check_settings = json.loads((out / "check.json").read_text(encoding="utf-8"))["settings"]
    assert (check_settings["min_words"], check_settings["shingle_size"]) == (12, 4)
    index = str(tmp_path / "x.index")
    assert main(["index", "build", str(subs), "--index", index, "-q"]) == 0  # threshold: not an index option
    capsys.readouterr()
    assert main(["index", "info", "--index", index, "--json"]) == 0
    info = json.loads(capsys.readouterr().out)
    assert (info["settings"]["num_perm"], info["settings"]["shingle_size"]) == (64, 4)


def test_a_file_found_in_the_folder_may_not_say_where_to_write_or_what_else_to_read(corpus, tmp_path, capsys):
    (corpus / "dedup.toml").write_text(
        f'follow_links = true\nindex = "{tmp_path / "other.index"}"\n', encoding="utf-8"
    )
    out = tmp_path / "out"
    assert main(["audit", str(corpus), "-o", str(out), "-q"]) == 2
    err = capsys.readouterr().err
    assert "may not set follow_links, index" in err and "--config" in err
    assert not (tmp_path / "other.index").exists() and not out.exists()
    # Given with --config, the same file is the user's own choice.
    assert main(["audit", str(corpus), "-o", str(out), "-q", "--config", str(corpus / "dedup.toml")]) == 0
    assert _settings(out)["follow_links"] is True


def test_a_check_takes_options_only_from_a_file_given_with_config(corpus, tmp_path, capsys):
    (corpus / "dedup.toml").write_text("min_words = 1000\n", encoding="utf-8")
    out = tmp_path / "out"
    assert main(["check", str(corpus), "-o", str(out), "-q"]) in (0, 1)
    assert "options from" not in capsys.readouterr().err
    check = json.loads((out / "check.json").read_text(encoding="utf-8"))
    assert check["settings"]["min_words"] == 15
