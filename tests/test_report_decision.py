"""Tests of the report's decision box (prunebench.report_decision)."""

from __future__ import annotations

import html

from helpers import COST_CONFIG

from prunebench.report_decision import _decision_box
from prunebench.snippets import estimator_block, with_study

STUDY = """name = "c"
seed = 1
datasets = ["yeast4"]
smoothing = "laplace"
[costs]
loss = { positive = { negative = 10 }, negative = { positive = 1 } }
"""
CONFIG = {**COST_CONFIG, "class_weight": "balanced"}


def test_the_decision_box_shows_the_estimator_with_the_studys_costs():
    rec = {
        "family": "classification", "metric": "expected_cost", "margin": 0.02, "alpha": 0.05,
        "config": CONFIG, "mean_loss": 0.1, "mean_leaves": 4.0, "n_configurations": 1,
        "best": {"config": CONFIG, "mean_loss": 0.1, "mean_leaves": 4.0},
        "acceptable": [{"config": CONFIG, "upper_bound": 0.0, "mean_leaves": 4.0}],
        "held_out": {"n_datasets": 0}, "datasets": ["yeast4"], "stability": None,
        "trials": None,
    }  # fmt: skip
    (rec,) = with_study([rec], STUDY)
    box = html.unescape(_decision_box(rec))
    block = estimator_block(rec)
    assert block in box and "loss_matrix=[[0, 1], [10, 0]]" in block
    assert "smoothing='laplace'" in block and "select_by='auc'" in block
    # the sentence and the written-out label name the loss and the weights too
    assert "balanced class weights" in box and "scoring the held-out folds by AUC" in box
    assert "alpha by AUC" in box
