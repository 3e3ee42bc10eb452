"""Tests of the [decision] section and a stored study text's readers (prunebench.study_decision)."""

from __future__ import annotations

import pytest
from click.testing import CliRunner
from helpers import GOOD

from prunebench.cli import main
from prunebench.study import StudyError, parse_study
from prunebench.study_decision import decision_of_text, levels_of_text


def test_decision_defaults_follow_the_design():
    # DESIGN.md "Decision": error / mse, margins 0.01 of error and 1% of the unpruned MSE,
    # alpha 0.05
    assert decision_of_text(GOOD, ["classification"]) == {
        "alpha": 0.05,
        "metric": {"classification": "error"},
        "margin": {"classification": 0.01},
    }
    both = decision_of_text("[decision]\nmetric = 'log_loss'\n", ["classification"])
    assert both["margin"] == {"classification": 0.02}  # log loss's own default margin


def test_decision_per_family_and_overall():
    text = (
        "[decision]\nalpha = 0.1\nmargin = 0.03\n"
        "[decision.classification]\nmetric = 'brier'\n"
        "[decision.regression]\nmetric = 'mae'\nmargin = 0.05\n"
    )
    got = decision_of_text(text, ["classification", "regression"])
    assert got == {
        "alpha": 0.1,
        "metric": {"classification": "brier", "regression": "mae"},
        "margin": {"classification": 0.03, "regression": 0.05},
    }
    parse_study(GOOD + "\n[decision]\nmetric = 'accuracy'\nmargin = 0.02\nalpha = 0.5\n")


@pytest.mark.parametrize(
    "section, key, words",
    [
        ("alpha = 0.7", "decision.alpha", "(0, 0.5]"),
        ("alpha = 0", "decision.alpha", "(0, 0.5]"),
        ("alpha = true", "decision.alpha", "(0, 0.5]"),
        ("margin = -0.01", "decision.margin", "> 0"),
        ("margin = 'wide'", "decision.margin", "> 0"),
        ("metric = 'mse'", "decision.metric", "not a classification metric"),
        ("metric = 'bogus'", "decision.metric", "use one of error"),
        ("cutoff = 1", "decision.cutoff", "not a decision key"),
        ("[decision.regression]\nmetric = 'mse'", "decision.regression", "no regression"),
        ("[decision.classification]\nalpha = 0.1", "decision.classification.alpha", "not a"),
    ],
)
def test_bad_decision_sections_give_one_line_naming_the_key(section, key, words, tmp_path):
    path = tmp_path / "s.toml"
    path.write_text(GOOD + "\n[decision]\n" + section + "\n")
    result = CliRunner().invoke(main, ["check", str(path)])
    assert result.exit_code == 2
    message = result.output.strip()
    assert len(message.splitlines()) == 1
    assert f"key '{key}'" in message and words in message and str(path) in message


def test_a_metric_for_both_families_must_suit_both(tmp_path):
    with pytest.raises(StudyError, match=r"decision\.metric.*\[decision\.regression\]"):
        decision_of_text("[decision]\nmetric = 'brier'\n", ["classification", "regression"])


def test_levels_of_text_keep_the_files_order():
    levels = levels_of_text(GOOD, "classification")
    assert levels["criterion"] == ["gini", "entropy"] and levels["max_depth"] == ["none", 3]
    assert levels["rule"] == ["min", "1se", "0.5se"]
    assert levels["min_samples_leaf"] == [1]  # the vocabulary's default
