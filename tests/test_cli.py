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


@pytest.mark.parametrize(
    "name", ["compare", "rank", "recommend", "figures", "report", "progress", "sql", "export"]
)
def test_read_commands_say_they_take_the_study_file(name):
    result = CliRunner().invoke(main, [name, "--help"])
    assert "or the study file that names it" in " ".join(result.output.split())
    if name not in ("sql", "export"):
        assert "[DB_OR_STUDY]" in result.output


def test_export_help_names_overwrite():
    result = CliRunner().invoke(main, ["export", "--help"])
    assert "--overwrite" in result.output and "whole or not at all" in result.output


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
    assert "The '--rule' option of prunebench demo" in result.output


@pytest.mark.parametrize(
    "args, named, bound",
    [
        # breast_cancer: 212 malignant of 569 rows; diabetes: 442 rows
        # (scikit-learn's dataset descriptions, from memory)
        (["--cv", "1000"], "'--cv'", "at most 212"),
        (["--dataset", "diabetes", "--cv", "443"], "'--cv'", "at most 442"),
        (["--dataset", "iris", "--criterion", "squared_error"], "'--criterion'", "gini, entropy"),
        (["--criterion", "bogus"], "'--criterion'", "gini, entropy"),
        (["--dataset", "diabetes", "--criterion", "gini"], "'--criterion'", "squared_error"),
    ],
)
def test_demo_bad_folds_or_criterion_is_one_line_and_exit_2(args, named, bound):
    result = CliRunner().invoke(main, ["demo", *args])
    assert result.exit_code == 2, result.output
    assert result.output.startswith("error: ") and result.output.count("\n") == 1
    assert named in result.output and bound in result.output


@pytest.mark.parametrize(
    "args, named",
    [
        (["rank", "--alpha", "2"], "'--alpha'"),
        (["rank", "--alpha", "0"], "'--alpha'"),
        (["rank", "--alpha", "0.6"], "'--alpha'"),
        (["recommend", "--alpha", "-1"], "'--alpha'"),
        (["recommend", "--alpha", "nan"], "'--alpha'"),
        (["progress", "--watch", "-1"], "'--watch'"),
        (["progress", "--watch", "nan"], "'--watch'"),
    ],
)
def test_significance_levels_and_watch_intervals_are_bounded(args, named, small_db):
    result = CliRunner().invoke(main, [*args, "--db", str(small_db)])
    assert result.exit_code == 2, result.output
    assert result.output.startswith("error: ") and result.output.count("\n") == 1
    assert named in result.output and "nan ranks" not in result.output


def test_the_largest_significance_level_is_accepted(small_db):
    result = CliRunner().invoke(main, ["rank", "--alpha", "0.5", "--db", str(small_db)])
    assert result.exit_code == 0, result.output
    assert "critical difference at 0.5 = " in result.output and "nan" not in result.output


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


def test_effects_help_names_the_method_and_options():
    result = CliRunner().invoke(main, ["effects", "--help"])
    assert result.exit_code == 0
    # click wraps at hyphens too: join the lines back before looking for the words
    text = " ".join(re.sub(r"-\n\s*", "-", result.output).split())
    for words in ("reference level", "Hartung-Knapp", "prediction interval", "Holm-adjusted"):
        assert words in text, words
    for option in ("--db", "--study", "--metric", "--margin", "--alpha", "--json", "--csv"):
        assert option in result.output
    assert "--interactions" in result.output


def test_recommend_help_names_the_rule():
    result = CliRunner().invoke(main, ["recommend", "--help"])
    text = " ".join(re.sub(r"-\n\s*", "-", result.output).split())
    assert "fewest leaves" in text and "leaving each dataset out" in text and "--margin" in text


def test_effects_json_rows_are_the_issues_keys(small_db):
    import json
    import math

    from prunebench import open_results

    out = CliRunner().invoke(main, ["effects", "--db", str(small_db), "--json"])
    assert out.exit_code == 0, out.output
    rows = json.loads(out.output)
    keys = [
        "family", "factor", "level", "reference", "metric", "estimate", "ci_low", "ci_high",
        "pi_low", "pi_high", "tau2", "i2", "n_datasets", "p_value", "p_holm", "verdict",
    ]  # fmt: skip
    table = open_results(small_db).effects()
    assert len(rows) == len(table)
    for row, (_, expected) in zip(rows, table.iterrows(), strict=True):
        size = row["metric"] == "n_leaves"
        assert list(row) == keys + (["ratio", "ratio_low", "ratio_high"] if size else [])
        for key in keys[5:-1]:
            value = expected[key]
            if isinstance(value, float) and math.isnan(value):
                assert row[key] is None  # NaN -> null
            else:
                assert row[key] == pytest.approx(value, rel=1e-12)
        if size:
            assert row["ratio"] == pytest.approx(math.exp(row["estimate"]), rel=1e-12)
    depth = [r for r in rows if r["factor"] == "max_depth"]
    assert depth and all(r["level"] == 3 and r["reference"] is None for r in depth)
    text = CliRunner().invoke(main, ["effects", "--db", str(small_db)])
    assert text.exit_code == 0 and "pruned vs unpruned" in text.output and "×" in text.output
    assert max(len(line) for line in text.output.splitlines()) <= 100
    csv = CliRunner().invoke(main, ["effects", "--db", str(small_db), "--csv"])
    assert csv.output.splitlines()[0].startswith("family,factor,level,reference,metric")
    both = CliRunner().invoke(main, ["effects", "--db", str(small_db), "--json", "--csv"])
    assert both.exit_code == 2


def _restudied(mixed_db, tmp_path, datasets: str, more: str = "") -> str:
    """A copy of the mixed database whose stored study file names other data and costs."""
    import shutil
    import sqlite3

    path = tmp_path / "copy.sqlite"
    shutil.copy(mixed_db, path)
    with sqlite3.connect(path) as conn:
        (text,) = conn.execute("SELECT study_text FROM studies").fetchone()
        text = re.sub(r"(?m)^datasets = .*$", f"datasets = {datasets}", text) + more
        conn.execute("UPDATE studies SET study_text = ?", [text])
    conn.close()
    return str(path)


def test_recommend_words_its_caution_for_own_data_as_the_report_does(mixed_db, tmp_path):
    import json

    from prunebench.snippets import CAUTION, CAUTION_OWN_DATA

    manifests = '[{ manifest = "a.toml" }, { manifest = "b.toml" }]'
    own = _restudied(mixed_db, tmp_path, manifests)
    text = CliRunner().invoke(main, ["recommend", "--db", own])
    assert text.exit_code == 0, text.output
    flat = " ".join(text.output.split())
    assert CAUTION_OWN_DATA in flat and CAUTION not in flat
    records = json.loads(CliRunner().invoke(main, ["recommend", "--db", own, "--json"]).output)
    assert all(r["own_data"] and r["caution"] == "Caution: " + CAUTION_OWN_DATA for r in records)
    plain = CliRunner().invoke(main, ["recommend", "--db", str(mixed_db), "--json"])
    bench = json.loads(plain.output)
    assert all(not r["own_data"] and r["caution"] == "Caution: " + CAUTION for r in bench)


def test_recommend_estimator_carries_the_stored_studys_costs(mixed_db, tmp_path):
    import json

    costs = "\n[costs.breast_cancer]\nloss = { 1 = { 0 = 5 }, 0 = { 1 = 1 } }\n"
    path = _restudied(mixed_db, tmp_path, '["iris", "wine", "breast_cancer", "diabetes"]', costs)
    records = json.loads(CliRunner().invoke(main, ["recommend", "--db", path, "--json"]).output)
    (cls,) = [r for r in records if r["family"] == "classification"]
    namespace: dict = {}
    exec(cls["estimator"], namespace)
    # costs only on breast_cancer: each data set's own, the model taking the first's
    # rows true, columns predicted: a missed 1 (true 1, predicted 0) costs 5
    assert namespace["COSTS"]["breast_cancer"] == {"loss_matrix": [[0, 1], [5, 0]]}
    assert namespace["COSTS"]["iris"] == {}
    params = namespace["model"].get_params()
    for name in ("criterion", "min_samples_leaf", "rule", "prune_risk", "select_by"):
        assert params[name] == cls["config"][name]
    config = cls["config"]
    assert (params["max_depth"], params["cv"]) == (config["max_depth"], config["inner_folds"])


def test_conduct_with_failed_trials_exits_1_and_a_rerun_counts_them_apart(tmp_path, monkeypatch):
    from prunebench import runners

    def broken(group, *args, **kwargs):
        raise FloatingPointError("injected failure")

    study_file = tmp_path / "f.toml"
    study_file.write_text(
        'name = "f"\nseed = 1\ndatasets = ["iris"]\n[outer]\nrepeats = 1\nfolds = 2\n'
        '[factors]\ninner_folds = [2]\nrule = ["min", "1se"]\n'
    )
    db = tmp_path / "f.sqlite"
    monkeypatch.setattr(runners, "evaluate_group", broken)
    first = CliRunner().invoke(main, ["conduct", str(study_file), "--db", str(db)])
    assert first.exit_code == 1, first.output
    assert "0 trials done, 2 failed, 0 already finished, of 2;" in first.output
    assert "error: 2 of 2 trials failed in this run" in first.output
    # run again without --retry-failed: nothing fails now, and the earlier failures are not
    # called "already finished"
    again = CliRunner().invoke(main, ["conduct", str(study_file), "--db", str(db)])
    assert again.exit_code == 0, again.output
    assert (
        "0 trials done, 0 failed, 0 already finished, 2 failed before (not run again: "
        "--retry-failed), of 2;" in again.output
    )
