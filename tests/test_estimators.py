"""Tests of PrunedTreeClassifier and PrunedTreeRegressor (prunebench.estimators)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from sklearn.base import clone
from sklearn.datasets import load_breast_cancer, load_diabetes, load_iris
from sklearn.model_selection import StratifiedKFold, cross_val_score
from sklearn.tree import DecisionTreeClassifier, export_text
from sklearn.utils.estimator_checks import parametrize_with_checks

from prunebench import PrunedTreeClassifier, PrunedTreeRegressor
from prunebench.exceptions import InvalidParameterError


@parametrize_with_checks(
    # cv=3: some checks fit on 10 to 20 rows, too few for the default 10 folds
    [
        PrunedTreeClassifier(random_state=0, cv=3),
        PrunedTreeRegressor(random_state=0, cv=3),
        # priors other than "data" would override class_weight, which one check tests
        PrunedTreeClassifier(random_state=0, cv=3, select_by="brier", smoothing="laplace"),
        PrunedTreeClassifier(random_state=0, cv=3, select_by="auc", prune_risk="cost"),
        PrunedTreeClassifier(random_state=0, rule="fixed0.2", prune_risk="cost"),
    ]
)
def test_sklearn_estimator_checks(estimator, check):
    # scikit-learn's own conformance suite; the array-API check skips itself
    # unless SCIPY_ARRAY_API is set, as it does for every estimator
    check(estimator)


def test_classifier_attributes_and_prediction():
    X, y = load_breast_cancer(return_X_y=True)
    model = PrunedTreeClassifier(random_state=0, rule="1se").fit(X, y)
    curve = model.cv_curve_
    assert list(curve.columns) == ["alpha", "n_leaves", "mean", "se"]
    assert model.ccp_alpha_ in set(curve["alpha"])
    chosen = curve.loc[curve["alpha"] == model.ccp_alpha_].iloc[0]
    assert model.get_n_leaves() == chosen["n_leaves"]
    assert model.get_n_leaves() < model.full_tree_.get_n_leaves()
    np.testing.assert_array_equal(model.predict(X), model.pruned_tree_.predict(X))
    np.testing.assert_allclose(model.predict_proba(X).sum(axis=1), 1.0)
    assert model.tree_ is model.pruned_tree_.tree_
    assert model.path_.risk == "error"
    assert "class:" in export_text(model.pruned_tree_)


def test_min_rule_is_never_a_smaller_tree_than_one_se():
    X, y = load_breast_cancer(return_X_y=True)
    one_se = PrunedTreeClassifier(random_state=0, rule="1se").fit(X, y)
    minimum = clone(one_se).set_params(rule="min").fit(X, y)
    assert minimum.ccp_alpha_ <= one_se.ccp_alpha_
    assert minimum.get_n_leaves() >= one_se.get_n_leaves()
    # both chose on the same curve
    pd.testing.assert_frame_equal(minimum.cv_curve_, one_se.cv_curve_)


def test_impurity_risk_with_min_rule_equals_sklearn_ccp_alpha_tree():
    # scikit-learn as reference library: pruning with the impurity risk at the
    # chosen alpha is scikit-learn's own ccp_alpha pruning
    X, y = load_iris(return_X_y=True)
    model = PrunedTreeClassifier(prune_risk="impurity", rule="min", random_state=0).fit(X, y)
    reference = DecisionTreeClassifier(random_state=0, ccp_alpha=model.ccp_alpha_).fit(X, y)
    if model.ccp_alpha_ > 0:
        assert model.get_n_leaves() == reference.get_n_leaves()
    np.testing.assert_array_equal(model.predict(X), reference.predict(X))


def test_regressor_prunes_and_scores():
    X, y = load_diabetes(return_X_y=True)
    model = PrunedTreeRegressor(random_state=0, min_samples_leaf=5).fit(X, y)
    assert model.get_n_leaves() < model.full_tree_.get_n_leaves()
    assert model.path_.risk == "squared_error"
    # the pruned tree generalises better than the full one on held-out folds
    cv = 5
    pruned = cross_val_score(model, X, y, cv=cv).mean()
    full = cross_val_score(model.full_tree_, X, y, cv=cv).mean()
    assert pruned > full


def test_cv_accepts_a_splitter_and_pandas_input():
    X, y = load_iris(return_X_y=True, as_frame=True)
    model = PrunedTreeClassifier(cv=StratifiedKFold(3, shuffle=True, random_state=1)).fit(X, y)
    assert list(model.feature_names_in_) == list(X.columns)
    assert model.selection_.fold_losses.shape[0] == 3
    assert model.score(X, y) > 0.9


def test_fitting_is_reproducible_with_a_seed():
    X, y = load_breast_cancer(return_X_y=True)
    a = PrunedTreeClassifier(random_state=7).fit(X, y)
    b = PrunedTreeClassifier(random_state=7).fit(X, y)
    assert a.ccp_alpha_ == b.ccp_alpha_
    pd.testing.assert_frame_equal(a.cv_curve_, b.cv_curve_)


@pytest.mark.parametrize(
    "params, name",
    [
        ({"rule": "2sd"}, "rule"),
        ({"rule": "-1se"}, "rule"),
        ({"prune_risk": "squared_error"}, "prune_risk"),
        ({"cv": 1}, "cv"),
        ({"cv": "ten"}, "cv"),
        ({"max_depth": 0}, "max_depth"),
        ({"min_samples_leaf": 0}, "min_samples_leaf"),
        ({"rule": "fixed"}, "rule"),
        ({"select_by": "mse"}, "select_by"),
        ({"select_by": "average_precision"}, "select_by"),  # iris has three classes
        ({"loss_matrix": np.ones((3, 3))}, "loss_matrix"),
        ({"loss_matrix": [[0, 1], [1, 0]]}, "loss_matrix"),
        ({"priors": [0.2, 0.8]}, "priors"),
        ({"priors": "flat"}, "priors"),
        ({"smoothing": "m0"}, "smoothing"),
        ({"smoothing": "add-one"}, "smoothing"),
    ],
)
def test_bad_parameters_name_the_parameter(params, name):
    X, y = load_iris(return_X_y=True)
    with pytest.raises(InvalidParameterError) as err:
        PrunedTreeClassifier(**params).fit(X, y)
    message = str(err.value)
    assert message.startswith(f"The {name!r} parameter of PrunedTreeClassifier must be")
    assert "Got" in message and message.endswith("instead.")


def test_regressor_refuses_classification_losses():
    X, y = load_diabetes(return_X_y=True)
    with pytest.raises(InvalidParameterError, match="'select_by' parameter of PrunedTreeRegressor"):
        PrunedTreeRegressor(select_by="auc").fit(X, y)


def test_loss_matrix_moves_predictions_to_the_costly_class():
    # CART's loss matrix (Breiman et al. 1984, ch. 4): missing a positive costs 10, so
    # the leaves predict the positive class whenever it carries over 1/11 of the cost
    X, y = load_breast_cancer(return_X_y=True)
    y = 1 - y  # malignant = 1, the rarer class
    L = np.array([[0.0, 1.0], [10.0, 0.0]])
    plain = PrunedTreeClassifier(random_state=0, rule="min").fit(X, y)
    costly = PrunedTreeClassifier(
        random_state=0, rule="min", prune_risk="cost", select_by="cost", loss_matrix=L
    ).fit(X, y)
    assert costly.path_.risk == "cost"
    assert np.sum(costly.predict(X) == 1) > np.sum(plain.predict(X) == 1)
    np.testing.assert_array_equal(costly.predict(X), costly.path_.predict(X, costly.ccp_alpha_))
    # by hand: every leaf predicts positive iff 10 * (positives) > (negatives), as counts
    leaves = costly.full_tree_.apply(X)
    node = costly.path_.leaf_map(costly.ccp_alpha_)[leaves]
    counts = costly.path_.node_counts[node]
    np.testing.assert_array_equal(costly.predict(X), (10 * counts[:, 1] > counts[:, 0]).astype(int))
    # the curve is the mean cost per row, the default prediction unchanged in plain
    np.testing.assert_array_equal(plain.predict(X), plain.pruned_tree_.predict(X))


def test_smoothing_is_opt_in_and_follows_laplace():
    X, y = load_iris(return_X_y=True)
    raw = PrunedTreeClassifier(random_state=0).fit(X, y)
    np.testing.assert_array_equal(raw.predict_proba(X), raw.pruned_tree_.predict_proba(X))
    smooth = clone(raw).set_params(smoothing="laplace").fit(X, y)
    # Laplace (Provost & Domingos 2003): (n_c + 1) / (n + K) from the leaf's class counts
    counts = smooth.path_.node_counts[
        smooth.path_.leaf_map(smooth.ccp_alpha_)[smooth.full_tree_.apply(X)]
    ]
    np.testing.assert_allclose(
        smooth.predict_proba(X), (counts + 1) / (counts.sum(axis=1, keepdims=True) + 3)
    )
    assert smooth.predict_proba(X).min() > 0
    np.testing.assert_allclose(smooth.predict_log_proba(X), np.log(smooth.predict_proba(X)))


def test_fixed_rule_needs_no_inner_cv():
    X, y = load_breast_cancer(return_X_y=True)
    model = PrunedTreeClassifier(random_state=0, rule="fixed0.02").fit(X, y)
    assert model.selection_.n_fits == 1
    # by hand: 0.02 times the root's misclassification rate (the minority share)
    assert model.ccp_alpha_ == pytest.approx(0.02 * np.bincount(y).min() / y.size)
    assert model.get_n_leaves() == model.path_.n_leaves[model.path_.subtree_index(model.ccp_alpha_)]


def test_balanced_class_weight_chooses_by_balanced_error():
    # scikit-learn as reference library: the curve of a tree grown with
    # class_weight="balanced" is the mean over folds of 1 - balanced_accuracy_score
    from sklearn.base import clone as sk_clone
    from sklearn.metrics import balanced_accuracy_score

    from prunebench.pruning import pruning_path

    X, y = load_breast_cancer(return_X_y=True)
    splitter = StratifiedKFold(4, shuffle=True, random_state=0)
    model = PrunedTreeClassifier(class_weight="balanced", cv=splitter, random_state=0).fit(X, y)
    tree = DecisionTreeClassifier(class_weight="balanced", random_state=0)
    folds = []
    for train, test in splitter.split(X, y):
        path = pruning_path(sk_clone(tree).fit(X[train], y[train]), "error")
        folds.append(
            [
                1 - balanced_accuracy_score(y[test], path.predict(X[test], a))
                for a in model.cv_curve_["alpha"]
            ]
        )
    np.testing.assert_allclose(model.cv_curve_["mean"], np.mean(folds, axis=0), atol=1e-12)


def test_auc_curve_equals_grid_search():
    # scikit-learn as reference library: GridSearchCV(scoring="roc_auc") over the same
    # candidates and splitter, with the impurity risk that ccp_alpha prunes by
    from sklearn.model_selection import GridSearchCV

    X, y = load_breast_cancer(return_X_y=True)
    splitter = StratifiedKFold(5, shuffle=True, random_state=3)
    model = PrunedTreeClassifier(
        prune_risk="impurity", select_by="auc", cv=splitter, random_state=0
    ).fit(X, y)
    grid = GridSearchCV(
        DecisionTreeClassifier(random_state=0),
        {"ccp_alpha": list(model.cv_curve_["alpha"])},
        cv=splitter,
        scoring="roc_auc",
    ).fit(X, y)
    np.testing.assert_allclose(
        model.cv_curve_["mean"], 1 - grid.cv_results_["mean_test_score"], atol=1e-12
    )


def test_regressor_refuses_error_risk():
    X, y = load_diabetes(return_X_y=True)
    message = "'prune_risk' parameter of PrunedTreeRegressor"
    with pytest.raises(InvalidParameterError, match=message):
        PrunedTreeRegressor(prune_risk="error").fit(X, y)
