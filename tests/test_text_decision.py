"""Tests of the plain-text decision tables (prunebench.text_decision)."""

from __future__ import annotations

import pandas as pd

from prunebench.text_decision import effects_text


def test_effects_text_shows_the_ratio_both_intervals_and_the_verdict():
    common = {"family": "classification", "factor": "rule", "level": "1se", "reference": "min",
              "n_datasets": 5, "note": "", "tau2": 0.0, "i2": 0.0, "margin": 0.01}  # fmt: skip
    table = pd.DataFrame(
        [
            {**common, "metric": "error", "estimate": 0.004, "ci_low": -0.002, "ci_high": 0.01,
             "pi_low": -0.02, "pi_high": 0.03, "verdict": "undecided"},
            {**common, "metric": "n_leaves", "estimate": -0.46, "ci_low": -0.6, "ci_high": -0.33,
             "pi_low": -0.9, "pi_high": 0.0, "verdict": "smaller", "ratio": 0.63,
             "ratio_low": 0.55, "ratio_high": 0.72, "margin": float("nan")},
        ]
    )  # fmt: skip
    text = effects_text(table, 0.05)
    (row,) = [line for line in text.splitlines() if line.startswith("rule 1se vs min")]
    assert "+0.004 [-0.002,+0.010]" in row and "[-0.020,+0.030]" in row
    assert "×0.63 [0.55, 0.72]" in row and row.split()[-2:] == ["undecided", "smaller"]
    assert "across 5 data sets; margin ±0.01" in text
    assert max(len(line) for line in text.splitlines()) <= 100


def _rec(**more) -> dict:
    config = {"criterion": "gini", "max_depth": None, "min_samples_leaf": 1, "inner_folds": 5,
              "rule": "1se", "prune_risk": "cost", "select_by": "average_precision",
              "class_weight": "balanced"}  # fmt: skip
    accept = [{"config": {**config, "select_by": s}, "mean_loss": 0.1, "mean_leaves": 4.0,
               "upper_bound": 0.0} for s in ("auc", "average_precision")]  # fmt: skip
    return {
        "family": "classification", "decided": True, "metric": "expected_cost",
        "margin": 0.02, "alpha": 0.05, "config": config, "label": "l", "mean_loss": 0.1,
        "mean_leaves": 4.0, "best": {"label": "l", "mean_loss": 0.1, "mean_leaves": 4.0},
        "acceptable": accept, "n_configurations": 2, "datasets": ["a", "b"],
        "held_out": None, "trials": None,
        "stability": [{"dataset": "a", "n_folds": 4, "root_feature": "", "root_share": 1.0,
                       "jaccard": 1.0, "leaves_p10": 1, "leaves_p90": 1, "alpha_p10": 0.1,
                       "alpha_p90": 0.2}],
        **more,
    }  # fmt: skip


def test_recommend_text_names_every_acceptable_configuration_whole():
    from prunebench.snippets import CAUTION
    from prunebench.text_decision import recommend_text
    from prunebench.vocabulary import config_label

    text = recommend_text([_rec()])
    for a in _rec()["acceptable"]:
        assert f"   {config_label(a['config'])} " in text  # by=auc and by=ap, not by=a
    assert "by=auc" in text and "by=ap" in text
    # a single-leaf tree's root reads "leaf", explained under the table
    (row,) = [line for line in text.splitlines() if line.startswith("   a  ")]
    assert row.split()[2] == "leaf" and "leaf: most folds' trees are a single" in text
    assert " ".join(CAUTION.split()) in " ".join(text.split())
    assert max(len(line) for line in text.splitlines()) <= 100


def test_recommend_text_words_the_caution_for_own_data():
    from prunebench.snippets import CAUTION, CAUTION_OWN_DATA
    from prunebench.text_decision import recommend_text

    flat = " ".join(recommend_text([_rec(own_data=True)]).split())
    assert " ".join(CAUTION_OWN_DATA.split()) in flat and CAUTION not in flat
