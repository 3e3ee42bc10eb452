"""Tests of the command line (prunebench.cli)."""

from __future__ import annotations

import re

import pytest
from click.testing import CliRunner

from prunebench.cli import main

COMMANDS = sorted(main.commands)


def test_top_level_help_lists_every_command():
    result = CliRunner().invoke(main, ["--help"])
    assert result.exit_code == 0
    for name in COMMANDS:
        assert re.search(rf"^\s+{name}\s", result.output, re.MULTILINE), name


def test_help_lists_the_commands_in_workflow_order():
    from prunebench.cli import WORKFLOW

    output = CliRunner().invoke(main, ["--help"]).output
    listed = re.findall(r"^  (\w+)\s", output.split("Commands:")[1], re.MULTILINE)
    expected = [c for c in WORKFLOW if c in main.commands]
    assert listed[: len(expected)] == expected and sorted(listed) == COMMANDS
    assert listed.index("check") < listed.index("conduct") < listed.index("report")


@pytest.mark.parametrize("name", COMMANDS)
def test_every_command_has_help_text(name):
    result = CliRunner().invoke(main, [name, "--help"])
    assert result.exit_code == 0
    assert main.commands[name].help, f"{name} has no docstring"
    assert "Options:" in result.output and len(result.output.splitlines()) > 4


@pytest.mark.parametrize("name", COMMANDS)
def test_every_command_is_in_the_readme(name):
    from pathlib import Path

    readme = (Path(__file__).resolve().parents[1] / "README.md").read_text()
    assert f"prunebench {name}" in readme


def test_demo_prints_curve_and_chosen_alpha():
    result = CliRunner().invoke(main, ["demo", "--dataset", "iris", "--cv", "5", "--rule", "min"])
    assert result.exit_code == 0, result.output
    lines = result.output.splitlines()
    assert sum("<- chosen" in line for line in lines) == 1
    assert re.search(r"rule min: alpha = [0-9.e-]+, \d+ leaves", result.output)


def test_demo_bad_rule_is_one_line_and_exit_2():
    result = CliRunner().invoke(main, ["demo", "--rule", "2sd"])
    assert result.exit_code == 2
    assert result.output.strip().count("\n") == 0
    assert "'rule'" in result.output


def test_datasets_lists_every_kind_as_json():
    import json

    result = CliRunner().invoke(main, ["datasets", "--json"])
    assert result.exit_code == 0
    rows = {r["name"]: r for r in json.loads(result.output)}
    assert {r["kind"] for r in rows.values()} == {"bundled", "vendored", "simulated"}
    assert (rows["letter"]["rows"], rows["letter"]["classes"]) == (20000, 26)
    assert rows["twonorm"]["task"] == "binary" and rows["twonorm"]["params"]["n_samples"] == 1000
    table = CliRunner().invoke(main, ["datasets"]).output.splitlines()
    assert table[0].split()[:3] == ["name", "kind", "task"] and len(table) == len(rows) + 1


@pytest.mark.parametrize(
    "message, shown",
    [
        (
            "r.sqlite holds several studies (a, b); pick one with study=...",
            "pick one with --study ...",
        ),
        ("The 'fmt' parameter must be csv; use fmt=csv", "use --format csv"),
        ("a seed=3 stays as it is", "a seed=3 stays as it is"),
    ],
)
def test_library_keywords_are_shown_as_flags(message, shown):
    from prunebench.cli import _as_flags

    assert shown in _as_flags(message)


@pytest.mark.parametrize(
    "args",
    [["--help"], ["sql", "--db", "missing.sqlite", "SELECT 1"], ["progress", "--db", "m.sqlite"]],
)
def test_light_commands_import_no_plotting_or_search_library(args, tmp_path):
    # scikit-learn comes in through the package's __init__ until it loads estimators lazily;
    # matplotlib and Optuna must wait for the commands that draw or search
    import subprocess
    import sys

    code = (
        "import sys; from prunebench.cli import main\n"
        f"try:\n    main({args!r})\nexcept SystemExit:\n    pass\n"
        "print(sorted(m for m in ('matplotlib', 'optuna', 'seaborn') if m in sys.modules))"
    )
    out = subprocess.run(
        [sys.executable, "-c", code], capture_output=True, text=True, cwd=tmp_path, check=True
    )
    assert out.stdout.strip().splitlines()[-1] == "[]"
