"""Tests of what the commands share (prunebench.cli_options)."""

from __future__ import annotations

import pytest
from click.testing import CliRunner

from prunebench.cli import main
from prunebench.cli_options import _as_flags


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
    assert shown in _as_flags(message, main.commands)


def test_a_library_parameter_set_by_the_running_commands_option_is_named_as_that_option():
    message = "The 'rule' parameter of PrunedTreeClassifier must be \"min\". Got '1SE' instead."
    shown = _as_flags(message, main.commands, {"rule": "--rule"}, "demo")
    assert shown == "The '--rule' option of prunebench demo must be \"min\". Got '1SE' instead."
    # a parameter the command has no option for stays the library's
    assert _as_flags(message, main.commands, {"folds": "--folds"}, "demo") == message


@pytest.mark.parametrize(
    "args, shown",
    [
        (["demo", "--rule", "1SE"], "The '--rule' option of prunebench demo must be"),
        (["effects", "--margin", "-1"], "The '--margin' option of prunebench effects must be"),
        (["recommend", "--margin", "nan"], "The '--margin' option of prunebench recommend"),
        (
            ["report", "--margin", "0", "--out", "r.html"],
            "The '--margin' option of prunebench report",
        ),
    ],
)
def test_command_line_errors_name_the_option_not_the_library(args, shown, small_db):
    result = CliRunner().invoke(main, [*args, "--db", str(small_db)] if args[0] != "demo" else args)
    assert result.exit_code == 2, result.output
    assert result.output.startswith(f"error: {shown}") and result.output.count("\n") == 1
    assert "{" not in result.output  # no per-family dict of margins


def test_json_keeps_small_p_values_the_csv_keeps(capsys):
    import csv
    import io
    import json

    import pandas as pd

    from prunebench.cli_options import _emit

    frame = pd.DataFrame({"p": [8.950422389471835e-14, 0.0625], "k": pd.array([5, None], "Int64")})
    assert _emit(frame, True, False)
    as_json = json.loads(capsys.readouterr().out)
    assert _emit(frame, False, True)
    as_csv = list(csv.DictReader(io.StringIO(capsys.readouterr().out)))
    assert [r["p"] for r in as_json] == [float(r["p"]) for r in as_csv]
    assert as_json[0]["p"] == pytest.approx(8.950422389471835e-14, rel=1e-12)
    assert [r["k"] for r in as_json] == [5, None]
