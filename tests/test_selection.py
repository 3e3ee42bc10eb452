"""Tests of the CV choice of alpha (prunebench.selection)."""

from __future__ import annotations

import numpy as np
import pytest
from sklearn.datasets import load_diabetes, make_classification
from sklearn.model_selection import GridSearchCV, KFold, StratifiedKFold
from sklearn.tree import DecisionTreeClassifier, DecisionTreeRegressor

from prunebench.exceptions import InvalidParameterError
from prunebench.selection import (
    MinimumRule,
    StandardErrorRule,
    parse_rule,
    select_alpha,
)


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_curve_mean_equals_grid_search_classification(seed):
    # scikit-learn as reference library: GridSearchCV refits one tree per
    # candidate and fold; our curve scores every candidate from one fit per fold
    X, y = make_classification(400, 8, n_informative=4, flip_y=0.15, random_state=seed)
    tree = DecisionTreeClassifier(random_state=seed)
    splitter = StratifiedKFold(5, shuffle=True, random_state=seed)
    selection = select_alpha(tree, X, y, cv=splitter, risk="impurity", rules=["min", "1se"])
    grid = GridSearchCV(tree, {"ccp_alpha": list(selection.candidates)}, cv=splitter).fit(X, y)
    np.testing.assert_allclose(
        selection.curve["mean"], 1 - grid.cv_results_["mean_test_score"], atol=1e-12
    )
    assert selection.n_fits == 6  # T_max and one tree per fold


def test_curve_mean_equals_grid_search_regression():
    X, y = load_diabetes(return_X_y=True)
    tree = DecisionTreeRegressor(min_samples_leaf=5, random_state=0)
    splitter = KFold(5, shuffle=True, random_state=0)
    selection = select_alpha(tree, X, y, cv=splitter, risk="squared_error", rules=["min"])
    grid = GridSearchCV(
        tree,
        {"ccp_alpha": list(selection.candidates)},
        cv=splitter,
        scoring="neg_mean_squared_error",
    ).fit(X, y)
    np.testing.assert_allclose(
        selection.curve["mean"], -grid.cv_results_["mean_test_score"], rtol=1e-9
    )
    # the se is the fold standard deviation (ddof=1) over sqrt(K)
    folds = -np.vstack([grid.cv_results_[f"split{i}_test_score"] for i in range(5)])
    np.testing.assert_allclose(
        selection.curve["se"], folds.std(axis=0, ddof=1) / np.sqrt(5), rtol=1e-9
    )


def test_curve_columns_and_leaf_counts():
    X, y = make_classification(300, 5, flip_y=0.1, random_state=4)
    selection = select_alpha(DecisionTreeClassifier(random_state=0), X, y, cv=4, risk="error")
    curve = selection.curve
    assert list(curve.columns) == ["alpha", "n_leaves", "mean", "se"]
    assert curve["alpha"].is_monotonic_increasing
    assert curve["n_leaves"].is_monotonic_decreasing
    assert curve["n_leaves"].iloc[-1] == 1
    assert selection.fold_losses.shape == (4, len(curve))
    assert selection.fold_sizes.sum() == 300


def test_hand_computed_curve_min_and_one_se_differ():
    # by hand: the minimum is 0.20 at index 2 with se 0.03, so the 1-SE bound is
    # 0.23; the largest alpha with mean <= 0.23 is index 3 (0.22); 0.5-SE's bound
    # 0.215 admits only index 2
    mean = np.array([0.30, 0.25, 0.20, 0.22, 0.24, 0.40])
    se = np.array([0.05, 0.04, 0.03, 0.03, 0.02, 0.01])
    assert MinimumRule().choose(mean, se) == 2
    assert StandardErrorRule(1).choose(mean, se) == 3
    assert StandardErrorRule(0.5).choose(mean, se) == 2
    assert StandardErrorRule(4).choose(mean, se) == 4  # bound 0.32
    assert StandardErrorRule(0).choose(mean, se) == MinimumRule().choose(mean, se)


def test_ties_go_to_the_larger_alpha():
    mean = np.array([0.2, 0.1, 0.3, 0.1, 0.5])
    assert MinimumRule().choose(mean, np.zeros(5)) == 3
    # sums in another order differ in the last bits; still a tie
    assert MinimumRule().choose(np.array([0.3, 0.1 + 0.2, 0.5]), np.zeros(3)) == 1


@pytest.mark.parametrize(
    "spelling, name", [("min", "min"), ("1se", "1se"), ("0.5se", "0.5se"), ("2.0se", "2se")]
)
def test_parse_rule_spellings(spelling, name):
    assert parse_rule(spelling).name == name


@pytest.mark.parametrize("bad", ["max", "se", "-1se", "1 se", "1.se", 1, None])
def test_parse_rule_refuses_bad_spellings(bad):
    with pytest.raises(InvalidParameterError, match="The 'rule' parameter"):
        parse_rule(bad)


def test_rules_share_one_curve_and_one_se_picks_a_smaller_tree():
    X, y = make_classification(1000, 10, n_informative=4, flip_y=0.2, random_state=1)
    selection = select_alpha(
        DecisionTreeClassifier(random_state=0), X, y, cv=10, risk="error", rules=["min", "1se"]
    )
    assert selection.n_fits == 11
    assert selection.alpha("1se") >= selection.alpha("min")
    leaves = selection.curve["n_leaves"].to_numpy()
    assert leaves[selection.chosen["1se"]] <= leaves[selection.chosen["min"]]


# ---------------------------------------------------------------------------
# Contract: every selection rule through one table of cases.  Each row: the
# rule's spelling, a CV curve (mean, se) and the index it must choose, worked
# by hand from the rule's definition (Breiman et al. 1984, §3.4.3 for k-SE).
_MEAN = np.array([0.30, 0.25, 0.20, 0.22, 0.24, 0.40])
_SE = np.array([0.05, 0.04, 0.03, 0.03, 0.02, 0.01])
_FLAT = np.array([0.2, 0.1, 0.3, 0.1, 0.5])
RULE_CASES = [
    # (spelling, mean, se, expected index, why)
    ("min", _MEAN, _SE, 2, "lowest mean 0.20"),
    ("min", _FLAT, np.zeros(5), 3, "tie at 0.1 goes to the larger alpha"),
    ("1se", _MEAN, _SE, 3, "bound 0.23 admits 0.22 at index 3"),
    ("0.5se", _MEAN, _SE, 2, "bound 0.215 admits only the minimum"),
    ("4se", _MEAN, _SE, 4, "bound 0.32 admits 0.24 at index 4"),
    ("0se", _MEAN, _SE, 2, "k = 0 is the min rule"),
    ("1se", _FLAT, np.full(5, 0.05), 3, "bound 0.15; 0.3 and 0.5 are out"),
    ("2se", _FLAT, np.full(5, 0.1), 3, "bound 0.3 admits 0.3 at index 2, but 3 is larger"),
    ("5se", _FLAT, np.full(5, 0.1), 4, "bound 0.6 admits 0.5 at index 4"),
    ("1se", np.array([0.1]), np.array([0.0]), 0, "one candidate"),
]


@pytest.mark.parametrize("spelling, mean, se, expected, why", RULE_CASES)
def test_rule_contract(spelling, mean, se, expected, why):
    rule = parse_rule(spelling)
    assert parse_rule(rule) is rule and parse_rule(rule.name) == rule
    chosen = rule.choose(mean, se)
    assert chosen == expected, why
    # every CV rule picks a candidate no better than the minimum and, among the
    # candidates it admits, the largest alpha
    best = MinimumRule().choose(mean, se)
    assert mean[chosen] >= mean[best] and chosen >= best
