"""Tests of the checks a study gets once its data sets are loaded (prunebench.study_checks)."""

from __future__ import annotations

import textwrap

import pytest
from helpers import GOOD

from prunebench.study import StudyError, parse_study
from prunebench.study_checker import _Checker
from prunebench.study_checks import _check_factor


def test_mixed_tasks_need_per_task_factors():
    mixed = GOOD.replace('["iris", "wine"]', '["iris", "diabetes"]')
    with pytest.raises(StudyError, match=r"factors.criterion.*'gini' does not fit the regression"):
        parse_study(mixed)
    per_task = mixed.replace('criterion = ["gini", "entropy"]\n', "") + textwrap.dedent(
        """
        [factors.classification]
        criterion = ["gini", "entropy"]

        [factors.regression]
        criterion = ["squared_error"]
        min_samples_leaf = [5]
        """
    )
    study = parse_study(per_task)
    reg = [t for t in study.trials() if t.dataset == "diabetes"]
    assert {t.criterion for t in reg} == {"squared_error"}
    assert {t.prune_risk for t in reg} == {"squared_error"}
    assert {t.min_samples_leaf for t in reg} == {5}
    cls = [t for t in study.trials() if t.dataset == "iris"]
    assert {t.criterion for t in cls} == {"gini", "entropy"}


def test_max_tree_fits_bounds_the_plan_exactly():
    # the reference count: every trial group's outer folds, each growing the full tree and
    # one tree per inner fold, from the expansion in trials.py
    study = parse_study(GOOD)
    fits = sum(study.repeats * study.folds * (1 + g.inner_folds) for g in study.groups())
    assert fits == 8 * 2 * 3 * (1 + 3)
    allowed = GOOD.replace("seed = 5", f"seed = 5\nmax_tree_fits = {fits}")
    assert parse_study(allowed).repeats == 2
    with pytest.raises(StudyError, match=f"{fits} tree fits, more than max_tree_fits = {fits - 1}"):
        parse_study(GOOD.replace("seed = 5", f"seed = 5\nmax_tree_fits = {fits - 1}"))


def test_a_huge_plan_runs_only_when_the_study_says_so():
    huge = GOOD.replace("repeats = 2", "repeats = 1000000000")
    with pytest.raises(StudyError) as refused:
        parse_study(huge, source="huge.toml")
    # the line of the number that made the plan huge
    line = GOOD.splitlines().index("repeats = 2") + 1
    assert str(refused.value).startswith(f"huge.toml:{line}: key 'max_tree_fits': ")
    assert "96,000,000,000 tree fits" in str(refused.value)
    said = parse_study(huge.replace("seed = 5", "seed = 5\nmax_tree_fits = 96000000000"))
    assert said.repeats == 1_000_000_000


def test_the_largest_leaf_may_fill_the_smallest_outer_training_part():
    # iris: 150 rows in 3 outer folds of 50, so every outer-training part has 100 rows
    text = GOOD.replace("inner_folds = [3]", "inner_folds = [3]\nmin_samples_leaf = [100]")
    study = parse_study(text)
    assert study.factors["classification"]["min_samples_leaf"] == [100]


def test_friedman_mse_is_a_regression_criterion_a_study_can_sweep(tmp_path):
    # the pruning engine handles friedman_mse (its impurity is the node's squared error);
    # studies now accept it too, and its trees are grown, pruned and stored
    import io
    import sqlite3

    from prunebench.execute import Progress, conduct

    study = parse_study(
        'name = "fmse"\nseed = 1\ndatasets = ["diabetes"]\n[outer]\nrepeats = 1\nfolds = 3\n'
        '[factors]\ncriterion = ["squared_error", "friedman_mse"]\ninner_folds = [3]\n'
    )
    assert study.factors["regression"]["criterion"] == ["squared_error", "friedman_mse"]
    db = tmp_path / "r.sqlite"
    summary = conduct(study, db, progress=Progress(0, io.StringIO()))
    assert (summary.done, summary.failed) == (2, 0)
    rows = sqlite3.connect(db).execute(
        "SELECT t.criterion, COUNT(*), MIN(f.mse) FROM folds f JOIN trials t USING (trial_id) "
        "WHERE f.arm = 'pruned' GROUP BY t.criterion"
    )
    counts = {c: (n, m) for c, n, m in rows}
    assert counts["friedman_mse"][0] == 3 and counts["friedman_mse"][1] > 0
    with pytest.raises(StudyError, match="'friedman_mse' is not a classification criterion"):
        parse_study(
            'name = "x"\nseed = 1\ndatasets = ["iris"]\n[factors]\ncriterion = ["friedman_mse"]\n'
        )


def test_regression_takes_neither_class_weights_nor_other_losses():
    text = 'name = "r"\nseed = 1\ndatasets = ["diabetes"]\n[factors]\n'
    with pytest.raises(StudyError, match="'balanced' is not a regression class weight"):
        parse_study(text + 'class_weight = ["balanced"]\n')
    with pytest.raises(StudyError, match="'auc' is not a regression loss"):
        parse_study(text + 'select_by = ["auc"]\n')
    assert {t.select_by for t in parse_study(text).trials()} == {"mse"}


def test_check_factor_spells_rules_canonically_and_refuses_one_rule_twice():
    check = _Checker('[factors]\nrule = ["1se", "1.0se"]\n', "f.toml")
    rules = _check_factor(
        check, "factors.rule", "rule", ["min", "1.0se", "0.50se"], "classification"
    )
    assert rules == ["min", "1se", "0.5se"]
    with pytest.raises(StudyError, match=r"^f.toml:2: key 'factors.rule': names one rule twice"):
        _check_factor(check, "factors.rule", "rule", ["1se", "1.0se"], "classification")
