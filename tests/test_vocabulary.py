"""Tests of the vocabulary (prunebench.vocabulary): names declared once, and a metric added."""

from __future__ import annotations

import csv
import io
import json
import sqlite3

import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner

from prunebench import evaluate, vocabulary
from prunebench.cli import main
from prunebench.execute import Progress, conduct
from prunebench.study import parse_study
from prunebench.vocabulary import (
    CLASSIFICATION,
    REGRESSION,
    Configuration,
    Metric,
    config_label,
    default_metric,
    family_of,
    growth_factors,
    higher_is_better,
    metric_names,
)


@pytest.mark.parametrize(
    "task, family",
    [
        ("binary", CLASSIFICATION),
        ("multiclass", CLASSIFICATION),
        ("regression", REGRESSION),
        (CLASSIFICATION, CLASSIFICATION),
    ],
)
def test_family_of(task, family):
    assert family_of(task) == family


def test_metric_names_are_the_stored_columns_in_order(small_db):
    columns = [r[1] for r in sqlite3.connect(small_db).execute("PRAGMA table_info(folds)")]
    stored = columns[columns.index("test_fingerprint") + 1 : columns.index("n_leaves")]
    assert stored == metric_names()
    assert metric_names(REGRESSION) == ["mse", "mae", "r2"]
    assert (default_metric("binary"), default_metric("regression")) == ("error", "mse")
    assert {m for m in metric_names() if higher_is_better(m)} == {
        "accuracy",
        "balanced_accuracy",
        "auc",
        "average_precision",
        "r2",
    }


def test_margins_of_practical_equivalence():
    # DESIGN.md: 0.01 of error rate, 0.01 Brier, 0.02 log loss, 1% of the loss for MSE
    m = vocabulary.METRICS
    assert (m["error"].margin, m["brier"].margin, m["log_loss"].margin) == (0.01, 0.01, 0.02)
    assert m["mse"].margin == 0.01 and m["mse"].relative and not m["error"].relative


def test_defaults_are_what_a_study_without_factors_sweeps():
    study = parse_study('name = "d"\nseed = 1\ndatasets = ["iris", "diabetes"]\n')
    assert study.factors[CLASSIFICATION] == {
        "criterion": ["gini"],
        "max_depth": ["none"],
        "min_samples_leaf": [1],
        "inner_folds": [10],
        "rule": ["1se"],
        "prune_risk": ["error"],
        "select_by": ["error"],
        "class_weight": ["none"],
    }
    assert study.factors[REGRESSION]["criterion"] == ["squared_error"]
    assert study.factors[REGRESSION]["select_by"] == ["mse"]
    assert study.factors[REGRESSION]["prune_risk"] == ["squared_error"]


def test_prune_risk_names_are_the_pruning_engines():
    from prunebench.pruning import PRUNE_RISKS

    assert vocabulary.prune_risk_names() == PRUNE_RISKS


def test_growth_factors_are_those_that_change_the_tree():
    # class weights change the grown tree; the loss that chooses alpha does not
    assert growth_factors() == ["criterion", "max_depth", "min_samples_leaf", "class_weight"]


def test_configuration_from_a_row_with_missing_levels():
    row = pd.Series(
        {
            "criterion": "entropy",
            "max_depth": pd.NA,
            "min_samples_leaf": np.int64(5),
            "inner_folds": 10.0,
            "rule": "1se",
            "prune_risk": "error",
            "other": 3,
        }
    )
    config = Configuration.of(row)
    assert config.max_depth is None and config.label() == "entr d=none l=5 k=10 1se err"
    assert config_label(row) == config.label()
    assert config == Configuration.of(("entropy", None, 5, 10, "1se", "error"))
    unpruned = config.unpruned()
    assert not unpruned.pruned and unpruned.label() == "entr d=none l=5 unpruned"
    assert (unpruned.inner_folds, unpruned.prune_risk) == (None, None)
    assert {config: 1}[Configuration.of(config.levels())] == 1  # hashable, equal by levels


# ---- a metric added in one place flows to the store, the statistics and the exports ------


@pytest.fixture
def doubled_error(monkeypatch):
    """A throw-away metric: one vocabulary entry plus its computation."""
    monkeypatch.setitem(
        vocabulary.METRICS, "doubled_error", Metric("doubled_error", CLASSIFICATION, False, 0.02)
    )
    scores = evaluate.fold_metrics

    def with_doubled(*args, **kwargs):
        out = scores(*args, **kwargs)
        return {**out, "doubled_error": 2 * out["error"]}

    monkeypatch.setattr(evaluate, "fold_metrics", with_doubled)
    return "doubled_error"


def test_an_added_metric_reaches_folds_compare_and_export(doubled_error, tmp_path):
    study = parse_study(
        'name = "added-metric"\nseed = 2\ndatasets = ["iris"]\n[outer]\nrepeats = 1\nfolds = 3\n'
        '[factors]\ninner_folds = [3]\nrule = ["min", "1se"]\n'
    )
    db = tmp_path / "r.sqlite"
    conduct(study, db, progress=Progress(0, io.StringIO()))  # one worker: in this process
    conn = sqlite3.connect(db)
    rows = conn.execute("SELECT error, doubled_error FROM folds").fetchall()
    assert len(rows) == 2 * 3 * 2 and all(d == pytest.approx(2 * e) for e, d in rows)
    view = conn.execute("SELECT error, doubled_error FROM arm_summary").fetchall()
    assert all(d == pytest.approx(2 * e) for e, d in view)

    result = CliRunner().invoke(main, ["compare", "--db", str(db), "--metric", doubled_error])
    assert result.exit_code == 0, result.output
    assert "metric: doubled_error (lower is better)" in result.output
    as_json = CliRunner().invoke(
        main, ["compare", "--db", str(db), "--metric", doubled_error, "--json"]
    )
    by_error = CliRunner().invoke(main, ["compare", "--db", str(db), "--json"])
    doubled, plain = json.loads(as_json.output), json.loads(by_error.output)
    assert {r["metric"] for r in doubled} == {doubled_error}
    for d, p in zip(doubled, plain, strict=True):
        assert d["diff"] == pytest.approx(2 * p["diff"])
        assert d["ci_high"] - d["ci_low"] == pytest.approx(2 * (p["ci_high"] - p["ci_low"]))

    out = tmp_path / "export"
    assert CliRunner().invoke(main, ["export", "--db", str(db), "--out", str(out)]).exit_code == 0
    for name in ("folds", "fold_differences"):
        with open(out / f"{name}.csv", newline="") as f:
            table = list(csv.DictReader(f))
        assert all(float(r["doubled_error"]) == pytest.approx(2 * float(r["error"])) for r in table)


@pytest.mark.parametrize(
    "n, noun, plural, expected",
    [
        (1, "row", None, "1 row"),
        (0, "row", None, "0 rows"),
        (2, "tree fit", None, "2 tree fits"),
        (1, "class", None, "1 class"),
        (3, "class", None, "3 classes"),
        (2, "study", None, "2 studies"),
        (2, "day", None, "2 days"),
        (1, "leaf", "leaves", "1 leaf"),
        (7, "leaf", "leaves", "7 leaves"),
    ],
)
def test_counted_puts_the_noun_in_the_number_it_needs(n, noun, plural, expected):
    from prunebench.vocabulary import counted

    assert counted(n, noun, plural) == expected


def test_select_by_levels_are_the_scoring_engines_and_defaults_compare_equal():
    from prunebench.scoring import SELECT_BY

    assert vocabulary.SELECT_BY == SELECT_BY
    assert vocabulary.FACTORS["select_by"].levels == SELECT_BY
    assert not vocabulary.FACTORS["select_by"].changes_tree
    # labels leave out the default levels (studies written before these factors) and show
    # the others
    old = Configuration("gini", None, 1, 10, "1se", "error", "error", "none")
    assert old.label() == Configuration.of(old.key()[:6]).label() == "gini d=none l=1 k=10 1se err"
    new = Configuration("gini", 4, 1, 10, "min", "cost", "auc", "balanced")
    assert new.label() == "gini d=4 l=1 cw=bal k=10 min cost by=auc"
    assert new.unpruned() == Configuration("gini", 4, 1, None, "unpruned", None, None, "balanced")
    assert new.unpruned().label() == "gini d=4 l=1 cw=bal unpruned"


def test_labels_of_configurations_that_differ_in_any_level_differ():
    levels = [
        Configuration("gini", None, 1, 5, rule, "cost", select_by, weight)
        for rule in ("min", "1se")
        for select_by in vocabulary.SELECT_BY[CLASSIFICATION]
        for weight in vocabulary.CLASS_WEIGHTS[CLASSIFICATION]
    ]
    for named in (False, True):
        assert len({c.label(named=named) for c in levels}) == len(levels)
    c = Configuration("entropy", 4, 5, 10, "1se", "error", "average_precision", "balanced")
    assert c.label() == "entr d=4 l=5 cw=bal k=10 1se err by=ap"
    assert c.label(named=True) == (
        "entropy depth=4 leaf=5 class_weight=balanced k=10 1se error select_by=average_precision"
    )
    assert c.shows("select_by") and not Configuration.of(c.key()[:6]).shows("select_by")


def test_machine_outputs_spell_each_level_one_way():
    from prunebench.vocabulary import integer_factors, spelled_level

    assert integer_factors() == ["max_depth", "min_samples_leaf", "inner_folds"]
    assert spelled_level("inner_folds", 5.0) == 5
    assert isinstance(spelled_level("max_depth", 4.0), int)
    assert spelled_level("max_depth", float("nan")) is None
    assert spelled_level("max_depth", "none") is None
    for missing in (None, "none", float("nan"), pd.NA):
        assert spelled_level("class_weight", missing) == "none"
    assert spelled_level("class_weight", "balanced") == "balanced"
    record = Configuration("gini", 4.0, 1.0, None, "unpruned", None, None, None).record()
    assert record == {
        "criterion": "gini",
        "max_depth": 4,
        "min_samples_leaf": 1,
        "inner_folds": None,
        "rule": "unpruned",
        "prune_risk": None,
        "select_by": None,
        "class_weight": "none",
    }
