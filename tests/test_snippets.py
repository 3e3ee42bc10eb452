"""Tests of the code a recommendation prints (prunebench.snippets)."""

from __future__ import annotations

import json
import tomllib

import pytest
from helpers import COST_CONFIG

from prunebench import PrunedTreeClassifier, PrunedTreeRegressor
from prunebench.snippets import (
    CAUTION,
    CAUTION_OWN_DATA,
    caution_for,
    decision_sentence,
    estimator_block,
    estimator_for,
    estimator_params,
    long_label,
    own_data,
    recommendation_records,
    rule_words,
    study_fragment,
    with_study,
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
        "select_by": ["error"],
        "class_weight": ["none"],
    }
    study = parse_study(f'name = "f"\nseed = 1\ndatasets = ["iris"]\n{fragment}\n')
    assert len(study.trials()) == 1 and study.trials()[0].max_depth == 4
    growth_only = tomllib.loads(study_fragment({"family": "classification", "config": UNPRUNED}))
    assert set(growth_only["factors"]["classification"]) == {
        "criterion",
        "max_depth",
        "min_samples_leaf",
        "class_weight",
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
    assert record["caution"] == "Caution: " + CAUTION and record["own_data"] is False
    assert _model(record["estimator"]).get_params()["rule"] == "0.5se"
    assert tomllib.loads(record["study_fragment"])["factors"]["classification"]["rule"] == ["0.5se"]
    undecided = {**rec, "decided": False, "config": None, "reason": "no finished trial"}
    (record,) = recommendation_records([undecided])
    assert record["estimator"] is None and record["study_fragment"] is None
    # the team's own data (every data set from a manifest): the caution says so
    (record,) = recommendation_records(with_study([rec], OWN_STUDY))
    assert record["own_data"] is True and record["caution"] == "Caution: " + CAUTION_OWN_DATA


OWN_STUDY = 'name = "o"\nseed = 1\ndatasets = [{ manifest = "m.toml" }]\n'


def test_own_data_is_every_data_set_from_a_manifest():
    assert own_data(OWN_STUDY)
    assert not own_data('name = "b"\nseed = 1\ndatasets = ["iris", { manifest = "m.toml" }]\n')
    assert not own_data('name = "b"\nseed = 1\ndatasets = ["iris"]\n')


def test_a_fragment_pasted_into_a_study_that_sweeps_every_factor_gives_the_choice_alone():
    # the study-wide lists would fill any factor the fragment left out
    config = {**PRUNED, "select_by": "error", "class_weight": None}
    fragment = study_fragment({"family": "classification", "config": config})
    sweeping = (
        'name = "s"\nseed = 1\ndatasets = ["breast_cancer"]\n[factors]\n'
        'select_by = ["error", "auc"]\nclass_weight = ["none", "balanced"]\n'
    )
    study = parse_study(f"{sweeping}{fragment}\n")
    (trial,) = study.trials()
    assert (trial.select_by, trial.class_weight) == ("error", "none")


COST_STUDY = """name = "c"
seed = 1
datasets = ["yeast4", "rare_logistic"]
smoothing = "laplace"
[costs]
loss = { positive = { negative = 10 }, negative = { positive = 1 } }
priors = "equal"
[costs.rare_logistic]
loss = { 1 = { 0 = 10 }, 0 = { 1 = 1 } }
priors = "equal"
"""


def _cost_rec(study_text: str, datasets: list[str]) -> dict:
    rec = {"family": "classification", "config": COST_CONFIG, "datasets": datasets}
    return with_study([rec], study_text)[0]


def test_the_estimator_block_builds_the_configuration_the_study_chose_with_its_costs():
    import numpy as np

    rec = _cost_rec(COST_STUDY, ["rare_logistic", "yeast4"])
    model = _model(estimator_block(rec))
    params = model.get_params()
    # every level of the recommended configuration, under the study's costs
    expected = {
        "criterion": "gini",
        "max_depth": None,
        "min_samples_leaf": 1,
        "cv": 5,
        "rule": "1se",
        "prune_risk": "cost",
        "select_by": "auc",
        "class_weight": None,
        "priors": "equal",
        "smoothing": "laplace",
    }
    assert {k: params[k] for k in expected} == expected
    # classes_ order negative, positive (and 0, 1): a missed positive costs 10
    np.testing.assert_array_equal(params["loss_matrix"], [[0, 1], [10, 0]])
    assert {k: params[k] for k in estimator_params(rec)} == estimator_params(rec)
    assert "negative, positive (yeast4)" in estimator_block(rec)
    # and it fits: the cost risk needs the matrix, which 0-1 loss would not give
    X = np.random.default_rng(0).normal(size=(80, 3))
    y = np.where(X[:, 0] > 1.0, "positive", "negative")
    assert model.fit(X, y).get_n_leaves() >= 1


def test_costs_that_differ_by_data_set_are_given_per_data_set():
    text = COST_STUDY.replace("{ 1 = { 0 = 10 }", "{ 1 = { 0 = 3 }")
    rec = _cost_rec(text, ["rare_logistic", "yeast4"])
    block = estimator_block(rec)
    namespace: dict = {}
    exec(block, namespace)
    assert namespace["COSTS"]["yeast4"]["loss_matrix"] == [[0, 1], [10, 0]]
    assert namespace["COSTS"]["rare_logistic"]["loss_matrix"] == [[0, 1], [3, 0]]
    assert namespace["model"].get_params()["loss_matrix"] == [[0, 1], [3, 0]]
    assert namespace["model"].get_params()["select_by"] == "auc"


def test_without_costs_the_estimator_keeps_zero_one_loss():
    rec = _cost_rec('name = "n"\nseed = 1\ndatasets = ["iris"]\n', ["iris"])
    params = _model(estimator_block(rec)).get_params()
    assert params["loss_matrix"] is None and params["priors"] == "data"
    assert params["smoothing"] is None and "loss_matrix" not in estimator_block(rec)




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
    weighted = decision_sentence({**PRUNED, "select_by": "auc", "class_weight": "balanced"})
    assert "at least 5 rows, balanced class weights;" in weighted
    assert weighted.endswith("on impurity, scoring the held-out folds by AUC.")
    assert decision_sentence({**PRUNED, "select_by": "error", "class_weight": "none"}) == (
        decision_sentence(PRUNED)
    )


def test_long_label_writes_every_level_out():
    assert long_label({**PRUNED, "max_depth": None, "rule": "min", "prune_risk": "error"}) == (
        "entropy · no cap · leaf ≥ 5 · 10-fold · min · error risk"
    )
    assert long_label(PRUNED) == "entropy · depth ≤ 4 · leaf ≥ 5 · 10-fold · 0.5se · impurity risk"
    assert long_label(UNPRUNED) == "entropy · no cap · leaf ≥ 5 · unpruned"
    regression = {**PRUNED, "criterion": "squared_error", "prune_risk": "squared_error"}
    assert long_label(regression).endswith("squared error risk")
    assert long_label(regression).startswith("squared error · ")
    # a loss to choose alpha by and a class weight other than the defaults are written out
    levels = {**PRUNED, "select_by": "brier", "class_weight": "balanced"}
    assert long_label(levels) == (
        "entropy · depth ≤ 4 · leaf ≥ 5 · balanced class weights · 10-fold · 0.5se · "
        "impurity risk · alpha by Brier score"
    )
    variants = [
        {**PRUNED, "select_by": s, "class_weight": w}
        for s in ("error", "cost", "brier", "log_loss", "auc", "average_precision")
        for w in ("none", "balanced")
    ]
    assert len({long_label(v) for v in variants}) == len(variants)


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
