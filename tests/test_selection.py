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


# A fixed relative rule reads no curve: alpha = c * R(root) under the path's risk.
FIXED_CASES = [
    # (spelling, name, c)
    ("fixed0.01", "fixed0.01", 0.01),
    ("fixed0", "fixed0", 0.0),
    ("fixed0.5", "fixed0.5", 0.5),
    ("fixed1e-3", "fixed0.001", 0.001),
]


@pytest.mark.parametrize("spelling, name, c", FIXED_CASES)
@pytest.mark.parametrize("risk", ["error", "impurity"])
def test_fixed_rule_contract(spelling, name, c, risk):
    rule = parse_rule(spelling)
    assert rule.name == name and not rule.needs_cv and parse_rule(name) == rule
    X, y = make_classification(300, 5, weights=[0.7, 0.3], flip_y=0.1, random_state=3)
    selection = select_alpha(DecisionTreeClassifier(random_state=0), X, y, risk=risk, rules=[rule])
    # no inner CV: only T_max is grown, and the curve is empty
    assert selection.n_fits == 1 and selection.fold_losses.shape[0] == 0
    assert selection.curve["mean"].isna().all()
    # by hand: R(root) is the minority share under "error", the root's Gini under "impurity"
    share = np.bincount(y) / y.size
    root = share.min() if risk == "error" else 1 - np.sum(share**2)
    assert selection.alpha(rule) == pytest.approx(c * root, rel=1e-12)


@pytest.mark.parametrize("bad", ["fixed", "fixed-1", "fixedx", "fixed 1", "0.01fixed"])
def test_parse_rule_refuses_bad_fixed_spellings(bad):
    with pytest.raises(InvalidParameterError, match="fixed0.01"):
        parse_rule(bad)


def test_fixed_and_cv_rules_together_grow_the_folds_once():
    X, y = make_classification(300, 5, flip_y=0.1, random_state=4)
    selection = select_alpha(
        DecisionTreeClassifier(random_state=0), X, y, cv=4, risk="error", rules=["1se", "fixed0.02"]
    )
    assert selection.n_fits == 5
    assert selection.alpha("fixed0.02") == pytest.approx(0.02 * selection.path.node_risk[0])
    assert "1se" in selection.chosen and "fixed0.02" not in selection.chosen


# ---------------------------------------------------------------------------
# The CV loss that chooses alpha (select_by): one pass per fold, checked against
# scikit-learn's GridSearchCV, which refits a tree per candidate and fold.


@pytest.mark.parametrize("seed", [0, 1])
@pytest.mark.parametrize(
    "select_by, scoring, sign",
    [("auc", "roc_auc", 1.0), ("brier", "neg_brier_score", 0.0)],
)
def test_curve_equals_grid_search_for_auc_and_brier(seed, select_by, scoring, sign):
    # scikit-learn as reference library: cv_curve mean = 1 - mean_test_score (roc_auc)
    # and -mean_test_score (neg_brier_score) over the same candidates and splitter
    X, y = make_classification(
        500, 8, n_informative=4, weights=[0.85, 0.15], flip_y=0.1, random_state=seed
    )
    tree = DecisionTreeClassifier(min_samples_leaf=2, random_state=seed)
    splitter = StratifiedKFold(5, shuffle=True, random_state=seed)
    selection = select_alpha(
        tree, X, y, cv=splitter, risk="impurity", rules=["min"], select_by=select_by
    )
    grid = GridSearchCV(
        tree, {"ccp_alpha": list(selection.candidates)}, cv=splitter, scoring=scoring
    ).fit(X, y)
    expected = sign - grid.cv_results_["mean_test_score"]
    np.testing.assert_allclose(selection.curve["mean"], expected, atol=1e-12)
    folds = np.vstack([grid.cv_results_[f"split{i}_test_score"] for i in range(5)])
    np.testing.assert_allclose(selection.fold_losses, sign - folds, atol=1e-12)


def test_select_alphas_scores_every_pair_from_one_fit_per_fold():
    from prunebench.selection import select_alphas

    X, y = make_classification(400, 6, n_informative=4, flip_y=0.1, random_state=2)
    tree = DecisionTreeClassifier(random_state=0)
    splitter = StratifiedKFold(4, shuffle=True, random_state=0)
    L = np.array([[0.0, 1.0], [4.0, 0.0]])
    risks, losses = ("error", "impurity", "cost"), ("error", "cost", "brier", "log_loss", "auc")
    together = select_alphas(
        tree,
        X,
        y,
        cv=splitter,
        risks=risks,
        select_by=losses,
        rules=["min", "1se"],
        loss_matrix=L,
    )
    assert set(together) == {(r, s) for r in risks for s in losses}
    assert all(sel.n_fits == 5 for sel in together.values())
    for (risk, loss), sel in together.items():
        alone = select_alpha(
            tree,
            X,
            y,
            cv=splitter,
            risk=risk,
            rules=["min", "1se"],
            select_by=loss,
            loss_matrix=L,
        )
        np.testing.assert_array_equal(sel.fold_losses, alone.fold_losses)
        assert sel.chosen == alone.chosen and (sel.risk, sel.select_by) == (risk, loss)


def test_default_curve_is_unchanged_by_the_one_pass_losses():
    # the error curve of the default settings is the old misclassified-rows count
    # over the fold size: compare against PruningPath.losses refitted by hand
    from sklearn.base import clone

    from prunebench.pruning import pruning_path

    X, y = make_classification(300, 5, flip_y=0.2, n_classes=3, n_informative=3, random_state=6)
    tree = DecisionTreeClassifier(random_state=0)
    splitter = StratifiedKFold(3, shuffle=True, random_state=1)
    selection = select_alpha(tree, X, y, cv=splitter, risk="error")
    for i, (train, test) in enumerate(splitter.split(X, y)):
        path = pruning_path(clone(tree).fit(X[train], y[train]), "error")
        expected = path.losses(X[test], y[test], selection.candidates) / len(test)
        np.testing.assert_array_equal(selection.fold_losses[i], expected)


@pytest.mark.parametrize(
    "class_weight, priors", [("balanced", "data"), (None, "equal"), ("balanced", "equal")]
)
def test_weighted_trees_choose_by_balanced_error(class_weight, priors):
    # scikit-learn as reference library: with class_weight="balanced" (or equal
    # priors) each fold's loss is 1 - balanced_accuracy_score of that fold's pruned tree
    from sklearn.base import clone
    from sklearn.metrics import balanced_accuracy_score

    from prunebench.pruning import pruning_path

    X, y = make_classification(
        500, 6, n_informative=4, weights=[0.9, 0.1], flip_y=0.05, random_state=3
    )
    tree = DecisionTreeClassifier(class_weight=class_weight, random_state=0)
    splitter = StratifiedKFold(4, shuffle=True, random_state=2)
    selection = select_alpha(tree, X, y, cv=splitter, risk="error", priors=priors)
    for i, (train, test) in enumerate(splitter.split(X, y)):
        path = pruning_path(clone(tree).fit(X[train], y[train]), "error", priors=priors)
        for j, alpha in enumerate(selection.candidates):
            pred = path.predict(X[test], alpha)
            expected = 1 - balanced_accuracy_score(y[test], pred)
            assert selection.fold_losses[i, j] == pytest.approx(expected, abs=1e-12)


def test_sample_weights_weight_the_held_out_loss():
    # scikit-learn as reference library: weighted accuracy of each fold's pruned tree
    from sklearn.base import clone
    from sklearn.metrics import accuracy_score

    from prunebench.pruning import pruning_path

    X, y = make_classification(300, 5, flip_y=0.15, random_state=8)
    w = np.random.default_rng(0).uniform(0.2, 3.0, y.size)
    tree = DecisionTreeClassifier(random_state=0)
    splitter = StratifiedKFold(3, shuffle=True, random_state=0)
    selection = select_alpha(tree, X, y, cv=splitter, risk="error", sample_weight=w)
    for i, (train, test) in enumerate(splitter.split(X, y)):
        path = pruning_path(clone(tree).fit(X[train], y[train], sample_weight=w[train]), "error")
        for j, alpha in enumerate(selection.candidates):
            expected = 1 - accuracy_score(
                y[test], path.predict(X[test], alpha), sample_weight=w[test]
            )
            assert selection.fold_losses[i, j] == pytest.approx(expected, abs=1e-12)


def test_select_by_is_checked_against_the_task():
    X, y = load_diabetes(return_X_y=True)
    with pytest.raises(InvalidParameterError, match="'select_by' parameter of select_alphas"):
        select_alpha(DecisionTreeRegressor(), X, y, risk="squared_error", select_by="auc")


def test_fixed_rules_alone_skip_every_inner_fit_for_every_pair():
    from prunebench.selection import select_alphas

    X, y = make_classification(300, 5, flip_y=0.1, random_state=5)
    out = select_alphas(
        DecisionTreeClassifier(random_state=0),
        X,
        y,
        risks=("error", "impurity"),
        select_by=("error", "auc"),
        rules=["fixed0.01", "fixed0.1"],
    )
    assert all(sel.n_fits == 1 and sel.fold_losses.shape[0] == 0 for sel in out.values())
    for (risk, _), sel in out.items():
        assert sel.path.risk == risk
        # alpha = c * R(root) of that risk's path (by definition of the rule)
        assert sel.alpha("fixed0.1") == pytest.approx(0.1 * sel.path.risks[-1], rel=1e-12)
        k = sel.path.subtree_index(sel.alpha("fixed0.1"))
        assert sel.path.prune(sel.alpha("fixed0.1")).get_n_leaves() == sel.path.n_leaves[k]
