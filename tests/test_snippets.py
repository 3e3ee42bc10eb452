"""Tests of the code a recommendation prints (prunebench.snippets)."""

from __future__ import annotations

import json
import tomllib

import pytest

from prunebench import PrunedTreeClassifier, PrunedTreeRegressor
from prunebench.snippets import (
    CAUTION,
    CAUTION_OWN_DATA,
    caution_for,
    decision_sentence,
    estimator_block,
    estimator_for,
    long_label,
    recommendation_records,
    rule_words,
    study_fragment,
)
from prunebench.study import parse_study

PRUNED = {
    "criterion": "entropy",
    "max_depth": 4.0,  # as it comes out of a table whose depth column has gaps
    "min_samples_leaf": 5,
    "inner_folds": 10,
    "rule": "0.5se",
    "prune_risk": "impurity",
}
UNPRUNED = {**PRUNED, "max_depth": None, "inner_folds": None, "rule": "unpruned"}


def _model(block: str):
    namespace: dict = {}
    exec(block, namespace)
    return namespace["model"]


def test_estimator_block_builds_the_recommended_pruned_tree():
    model = _model(estimator_block({"family": "classification", "config": PRUNED}))
    assert isinstance(model, PrunedTreeClassifier)
    params = model.get_params()
    assert (params["criterion"], params["max_depth"], params["min_samples_leaf"]) == (
        "entropy",
        4,
        5,
    )
    assert (params["cv"], params["rule"], params["prune_risk"]) == (10, "0.5se", "impurity")


def test_an_unpruned_winner_is_a_plain_scikit_learn_tree():
    from sklearn.tree import DecisionTreeRegressor

    rec = {"family": "regression", "config": {**UNPRUNED, "criterion": "squared_error"}}
    block = estimator_block(rec)
    model = _model(block)
    assert type(model) is DecisionTreeRegressor and model.max_depth is None
    assert block.endswith("# no pruning won")


def test_study_fragment_is_a_factors_table_a_study_accepts():
    fragment = study_fragment({"family": "classification", "config": PRUNED})
    levels = tomllib.loads(fragment)["factors"]["classification"]
    assert levels == {
        "criterion": ["entropy"],
        "max_depth": [4],
        "min_samples_leaf": [5],
        "inner_folds": [10],
        "rule": ["0.5se"],
        "prune_risk": ["impurity"],
    }
    study = parse_study(f'name = "f"\nseed = 1\ndatasets = ["iris"]\n{fragment}\n')
    assert len(study.trials()) == 1 and study.trials()[0].max_depth == 4
    growth_only = tomllib.loads(study_fragment({"family": "classification", "config": UNPRUNED}))
    assert set(growth_only["factors"]["classification"]) == {
        "criterion",
        "max_depth",
        "min_samples_leaf",
    }
    assert growth_only["factors"]["classification"]["max_depth"] == ["none"]


@pytest.mark.parametrize(
    "task, estimator",
    [
        ("binary", PrunedTreeClassifier),
        ("multiclass", PrunedTreeClassifier),
        ("regression", PrunedTreeRegressor),
    ],
)
def test_estimator_for_a_task(task, estimator):
    assert estimator_for(task) is estimator


def test_recommendation_records_are_json_with_code_and_caution():
    import math

    rec = {
        "family": "classification",
        "decided": True,
        "reason": None,
        "metric": "error",
        "margin": 0.01,
        "alpha": 0.05,
        "config": {**PRUNED, "max_depth": 4},
        "label": "x",
        "mean_loss": 0.1,
        "mean_leaves": 6.0,
        "best": {"config": UNPRUNED, "label": "u", "mean_loss": 0.09, "mean_leaves": 20.0},
        "acceptable": [{"config": PRUNED, "upper_bound": 0.004, "mean_leaves": 6.0}],
        "held_out": {"mean_regret": 0.01, "share_over_margin": 0.25, "n_datasets": 4},
        "trials": {"done": 10, "failed": 1, "pending": 2},
        "datasets": ["iris"],
        "n_configurations": 3,
        "stability": [{"dataset": "iris", "jaccard": math.nan}],
    }
    (record,) = json.loads(json.dumps(recommendation_records([rec])))
    assert record["config"]["max_depth"] == 4 and isinstance(record["config"]["max_depth"], int)
    assert record["stability"][0]["jaccard"] is None  # NaN -> null
    assert record["trials"] == {"done": 10, "failed": 1, "pending": 2}
    assert record["acceptable"][0]["upper_bound"] == 0.004
    assert record["caution"] == "Caution: " + CAUTION
    assert _model(record["estimator"]).get_params()["rule"] == "0.5se"
    assert tomllib.loads(record["study_fragment"])["factors"]["classification"]["rule"] == ["0.5se"]
    undecided = {**rec, "decided": False, "config": None, "reason": "no finished trial"}
    (record,) = recommendation_records([undecided])
    assert record["estimator"] is None and record["study_fragment"] is None




def test_decision_sentence_in_plain_words():
    config = {**PRUNED, "max_depth": None, "rule": "min", "prune_risk": "error"}
    assert decision_sentence(config) == (
        "Grow with entropy, no depth cap, leaves of at least 5 rows; choose alpha by "
        "10-fold CV with the minimum rule on misclassification."
    )
    assert decision_sentence(PRUNED).startswith("Grow with entropy, a depth cap of 4,")
    assert "the 0.5-standard-error rule on impurity" in decision_sentence(PRUNED)
    one_se = decision_sentence({**PRUNED, "rule": "1se"})
    assert "the one-standard-error rule" in one_se
    assert decision_sentence(UNPRUNED) == (
        "Grow with entropy, no depth cap, leaves of at least 5 rows; do not prune."
    )
    fixed = decision_sentence({**PRUNED, "rule": "fixed0.01", "inner_folds": None})
    assert "a fixed alpha of 0.01 × the root's risk (no CV)" in fixed and "fold" not in fixed
    single = decision_sentence({**UNPRUNED, "min_samples_leaf": 1})
    assert "at least 1 row;" in single


def test_long_label_writes_every_level_out():
    assert long_label({**PRUNED, "max_depth": None, "rule": "min", "prune_risk": "error"}) == (
        "entropy · no cap · leaf ≥ 5 · 10-fold · min · error risk"
    )
    assert long_label(PRUNED) == "entropy · depth ≤ 4 · leaf ≥ 5 · 10-fold · 0.5se · impurity risk"
    assert long_label(UNPRUNED) == "entropy · no cap · leaf ≥ 5 · unpruned"
    regression = {**PRUNED, "criterion": "squared_error", "prune_risk": "squared_error"}
    assert long_label(regression).endswith("squared error risk")
    assert long_label(regression).startswith("squared error · ")


def test_rule_words_and_caution_for_the_data():
    assert rule_words("min") == "the minimum rule"
    assert rule_words("1se") == "the one-standard-error rule"
    assert rule_words("2se") == "the 2-standard-error rule"
    assert caution_for(False) == CAUTION and "benchmark data" in CAUTION
    assert caution_for(True) == CAUTION_OWN_DATA and "your own data" in CAUTION_OWN_DATA


def test_other_losses_and_class_weights_reach_the_estimator_and_the_fragment():
    config = {
        "criterion": "gini",
        "max_depth": 4,
        "min_samples_leaf": 1,
        "inner_folds": 5,
        "rule": "min",
        "prune_risk": "cost",
        "select_by": "auc",
        "class_weight": "balanced",
    }
    rec = {"family": "classification", "config": config}
    block = estimator_block(rec)
    assert "select_by='auc'" in block and "class_weight='balanced'" in block
    namespace: dict = {}
    exec(block, namespace)  # the block builds the estimator it names
    model = namespace["model"]
    assert (model.select_by, model.class_weight) == ("auc", "balanced")
    levels = tomllib.loads(study_fragment(rec))["factors"]["classification"]
    assert (levels["select_by"], levels["class_weight"]) == (["auc"], ["balanced"])
