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
    [PrunedTreeClassifier(random_state=0, cv=3), PrunedTreeRegressor(random_state=0, cv=3)]
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
    ],
)
def test_bad_parameters_name_the_parameter(params, name):
    X, y = load_iris(return_X_y=True)
    with pytest.raises(InvalidParameterError) as err:
        PrunedTreeClassifier(**params).fit(X, y)
    message = str(err.value)
    assert message.startswith(f"The {name!r} parameter of PrunedTreeClassifier must be")
    assert "Got" in message and message.endswith("instead.")


def test_regressor_refuses_error_risk():
    X, y = load_diabetes(return_X_y=True)
    message = "'prune_risk' parameter of PrunedTreeRegressor"
    with pytest.raises(InvalidParameterError, match=message):
        PrunedTreeRegressor(prune_risk="error").fit(X, y)
