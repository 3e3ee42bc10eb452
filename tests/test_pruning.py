"""Tests of the weakest-link pruning engine (prunebench.pruning)."""

from __future__ import annotations

import itertools

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from sklearn.datasets import make_classification
from sklearn.tree import DecisionTreeClassifier, DecisionTreeRegressor, export_text, plot_tree

from prunebench.exceptions import InvalidParameterError
from prunebench.pruning import cart_candidates, merge_close, node_risks, pruning_path


@st.composite
def datasets(draw, regression: bool):
    """Small data sets with tied feature values and duplicated rows."""
    rng = np.random.default_rng(draw(st.integers(0, 2**32 - 1)))
    n = draw(st.integers(12, 90))
    p = draw(st.integers(1, 4))
    levels = draw(st.integers(2, 12))
    X = rng.integers(0, levels, size=(n, p)).astype(float)
    if regression:
        y = X @ rng.normal(size=p) + rng.normal(scale=draw(st.floats(0.1, 3.0)), size=n)
        y = np.round(y, draw(st.integers(0, 2)))
    else:
        k = draw(st.integers(2, 4))
        y = (X[:, 0] + rng.integers(0, k, size=n)) % k
    dup = rng.integers(0, n, size=draw(st.integers(0, n // 2)))
    X, y = np.vstack([X, X[dup]]), np.concatenate([y, y[dup]])
    params = {
        "min_samples_leaf": draw(st.integers(1, 3)),
        "max_depth": draw(st.sampled_from([None, 2, 3, 5])),
        "random_state": draw(st.integers(0, 1000)),
    }
    if regression:
        params["criterion"] = "squared_error"
    else:
        params["criterion"] = draw(st.sampled_from(["gini", "entropy"]))
    return X, y, params


def _compare_with_sklearn(model_class, X, y, params):
    full = model_class(**params).fit(X, y)
    path = pruning_path(full, "impurity")
    # scikit-learn as reference library: its path repeats tied alphas one branch
    # at a time; the distinct values (up to rounding) must be ours
    theirs = merge_close(full.cost_complexity_pruning_path(X, y).ccp_alphas)
    # a split that gains nothing gets alpha 1e-16 or so there, from rounding; 0 here
    theirs = np.unique(np.where(theirs <= 1e-12 * path.node_risk[0], 0.0, theirs))
    assert theirs.size == path.alphas.size
    np.testing.assert_allclose(theirs, path.alphas, rtol=1e-9, atol=1e-15)
    candidates = cart_candidates(path.alphas)
    # c_m = a_m sits exactly on the root's collapse point, where either library's
    # last rounding bit decides; step just past it
    candidates[-1] *= 1 + 1e-9
    rng = np.random.default_rng(0)
    X_new = np.vstack([X, rng.permutation(X)])
    y_new = np.concatenate([y, rng.permutation(y)])
    losses = path.losses(X_new, y_new, candidates)
    for j, alpha in enumerate(candidates):
        ours = path.prune(alpha)
        # at alpha = 0 scikit-learn keeps splits that gain nothing; ours are
        # collapsed (the smaller tree on ties) with the same predictions
        reference = full if j == 0 else model_class(ccp_alpha=alpha, **params).fit(X, y)
        np.testing.assert_array_equal(ours.predict(X_new), reference.predict(X_new))
        if j > 0:
            assert ours.get_n_leaves() == reference.get_n_leaves()
            assert path.n_leaves[path.subtree_index(alpha)] == reference.get_n_leaves()
        if model_class is DecisionTreeClassifier:
            expected = np.sum(reference.predict(X_new) != y_new)
        else:
            expected = np.sum((reference.predict(X_new) - y_new) ** 2)
        assert losses[j] == pytest.approx(expected, rel=1e-9, abs=1e-9)


@settings(
    max_examples=150, deadline=None, derandomize=True, suppress_health_check=[HealthCheck.too_slow]
)
@given(datasets(regression=False))
def test_impurity_path_matches_sklearn_classification(data):
    X, y, params = data
    _compare_with_sklearn(DecisionTreeClassifier, X, y, params)


@settings(
    max_examples=100, deadline=None, derandomize=True, suppress_health_check=[HealthCheck.too_slow]
)
@given(datasets(regression=True))
def test_impurity_path_matches_sklearn_regression(data):
    X, y, params = data
    _compare_with_sklearn(DecisionTreeRegressor, X, y, params)


def _all_prunings(left, right, node):
    """Every pruned subtree rooted at node, as a frozenset of its leaves."""
    if left[node] == -1:
        return [frozenset([node])]
    own = [frozenset([node])]
    pairs = itertools.product(
        _all_prunings(left, right, left[node]), _all_prunings(left, right, right[node])
    )
    return own + [a | b for a, b in pairs]


@pytest.mark.parametrize("seed", range(25))
def test_error_path_matches_brute_force(seed):
    # hand check by exhaustive search: the optimal subtree at alpha minimises
    # R(T) + alpha * |leaves(T)|, the smaller tree winning ties
    X, y = make_classification(
        60,
        4,
        n_informative=3,
        n_redundant=0,
        flip_y=0.25,
        n_classes=3,
        n_clusters_per_class=1,
        random_state=seed,
    )
    full = DecisionTreeClassifier(max_leaf_nodes=6 + seed % 7, random_state=seed).fit(X, y)
    assert full.get_n_leaves() <= 12
    path = pruning_path(full, "error")
    risk = node_risks(full, "error")
    left, right = full.tree_.children_left, full.tree_.children_right
    subtrees = _all_prunings(left, right, 0)
    probe = np.unique(np.r_[path.alphas, cart_candidates(path.alphas), path.alphas[-1] * 1.5])
    for alpha in probe:
        costs = np.array([risk[list(s)].sum() + alpha * len(s) for s in subtrees])
        sizes = np.array([len(s) for s in subtrees])
        tied = np.flatnonzero(costs <= costs.min() + 1e-12)
        best = subtrees[tied[np.argmin(sizes[tied])]]
        assert set(np.flatnonzero(path.leaf_mask(alpha))) == set(best), alpha
        k = path.subtree_index(alpha)
        assert path.n_leaves[k] == len(best)
        assert path.risks[k] == pytest.approx(risk[list(best)].sum(), abs=1e-12)


def _two_way_split(left_counts, right_counts, criterion):
    """A depth-1 tree on one binary feature whose root split has the given class counts."""
    X = np.repeat([0.0, 1.0], [sum(left_counts), sum(right_counts)])[:, None]
    y = np.concatenate([np.repeat([0, 1], left_counts), np.repeat([0, 1], right_counts)])
    return DecisionTreeClassifier(max_depth=1, criterion=criterion).fit(X, y)


@pytest.mark.parametrize(
    "left_counts, right_counts, risk, criterion, expected",
    [
        # Hastie, Tibshirani & Friedman, ESL 2nd ed. §9.2.3: a (400, 400) node split
        # into (300, 100)/(100, 300) or into (200, 400)/(200, 0)
        ((300, 100), (100, 300), "error", "gini", 0.25),
        ((200, 400), (200, 0), "error", "gini", 0.25),
        ((300, 100), (100, 300), "impurity", "gini", 0.375),
        ((200, 400), (200, 0), "impurity", "gini", 1 / 3),
        ((300, 100), (100, 300), "impurity", "entropy", 0.8113),
        ((200, 400), (200, 0), "impurity", "entropy", 0.6887),
    ],
)
def test_esl_split_risks(left_counts, right_counts, risk, criterion, expected):
    tree = _two_way_split(left_counts, right_counts, criterion)
    leaves = tree.tree_.children_left == -1
    assert node_risks(tree, risk)[leaves].sum() == pytest.approx(expected, abs=5e-5)


def _tie_case():
    # DESIGN.md tie case: 20 rows, one feature; the left half is 9 x class 0 and
    # 1 x class 1, the right half mirrored
    X = np.arange(20, dtype=float)[:, None]
    y = np.array([1] + [0] * 9 + [1] * 9 + [0])
    return X, y, DecisionTreeClassifier(random_state=0).fit(X, y)


def test_tie_case_matches_sklearn_and_collapses_both_branches():
    X, y, tree = _tie_case()
    sk = tree.cost_complexity_pruning_path(X, y)
    # scikit-learn 1.9 as reference library, and by hand: Gini 0.18 per half
    np.testing.assert_allclose(sk.ccp_alphas, [0, 0.09, 0.09, 0.32])
    np.testing.assert_allclose(sk.impurities, [0, 0.09, 0.18, 0.5])
    path = pruning_path(tree, "impurity")
    # CART prunes both tied weakest links at the same alpha: 4 -> 2 -> 1 leaves
    np.testing.assert_allclose(path.alphas, [0, 0.09, 0.32])
    np.testing.assert_array_equal(path.n_leaves, [4, 2, 1])
    np.testing.assert_allclose(path.risks, [0, 0.18, 0.5])
    # scikit-learn cannot reach the 3-leaf tree between its two tied steps;
    # neither can we: no alpha gives 3 leaves
    assert 3 not in path.n_leaves
    # by hand under misclassification: each half errs 1/20, so g = 0.05; root 0.4
    error_path = pruning_path(tree, "error")
    np.testing.assert_allclose(error_path.alphas, [0, 0.05, 0.4])
    np.testing.assert_array_equal(error_path.n_leaves, [4, 2, 1])


def test_node_alpha_is_monotone_and_exposes_collapse_points():
    X, y, tree = _tie_case()
    path = pruning_path(tree, "impurity")
    has_parent = path.parent >= 0
    assert np.all(path.node_alpha[has_parent] <= path.node_alpha[path.parent[has_parent]])
    assert path.node_alpha[0] == pytest.approx(0.32)
    leaves = tree.tree_.children_left == -1
    assert np.all(path.node_alpha[leaves] == 0)


def test_pruned_tree_is_an_ordinary_sklearn_tree():
    X, y, tree = _tie_case()
    path = pruning_path(tree, "impurity")
    pruned = path.prune(0.1)
    assert pruned.get_n_leaves() == 2 and pruned.get_depth() == 1
    assert tree.get_n_leaves() == 4  # the full tree is not modified
    np.testing.assert_allclose(pruned.predict_proba([[3.0]]), [[0.9, 0.1]])
    assert set(pruned.apply(X)) == {1, 2}
    np.testing.assert_array_equal(pruned.predict(X), np.repeat([0, 1], 10))
    text = export_text(pruned, feature_names=["x"])
    assert text.count("class:") == 2
    import matplotlib

    matplotlib.use("Agg")
    annotations = plot_tree(pruned)
    boxes = [a.get_text() for a in annotations if "samples =" in a.get_text()]
    assert len(boxes) == 3  # root and two leaves
    assert "value = [9, 1]" in boxes[1]


def test_squared_error_risk_for_other_regression_criteria():
    rng = np.random.default_rng(3)
    X = rng.normal(size=(200, 3))
    y = X[:, 0] * 3 + rng.normal(size=200)
    tree = DecisionTreeRegressor(criterion="absolute_error", max_depth=4, random_state=0).fit(X, y)
    with pytest.raises(InvalidParameterError, match="training rows"):
        node_risks(tree, "squared_error")
    risk = node_risks(tree, "squared_error", X, y)
    # the root predicts the median; its risk is the mean squared error about it
    assert risk[0] == pytest.approx(np.mean((y - np.median(y)) ** 2), rel=1e-6)
    leaves = tree.apply(X)
    pred = tree.tree_.value[leaves, 0, 0]
    path = pruning_path(tree, "squared_error", X, y)
    assert path.risks[0] == pytest.approx(np.mean((y - pred) ** 2), rel=1e-6)


def test_bad_risk_is_refused_with_one_message():
    X, y, tree = _tie_case()
    with pytest.raises(InvalidParameterError, match="The 'risk' parameter of pruning_path must be"):
        pruning_path(tree, "squared_error")
    with pytest.raises(InvalidParameterError, match="'risk'"):
        pruning_path(tree, "deviance")


def test_cart_candidates_are_geometric_midpoints():
    np.testing.assert_allclose(cart_candidates([0, 0.01, 0.04, 0.09]), [0, 0.02, 0.06, 0.09])
    np.testing.assert_allclose(cart_candidates([0, 0.5]), [0, 0.5])


def test_unseen_validation_labels_count_as_errors_at_every_alpha():
    X, y, tree = _tie_case()
    path = pruning_path(tree, "error")
    X_new = np.array([[0.0], [15.0], [3.0]])
    y_new = np.array([2, 2, 0])  # class 2 never seen in training
    losses = path.losses(X_new, y_new, cart_candidates(path.alphas))
    assert np.all(losses >= 2)
    np.testing.assert_array_equal(
        losses,
        [2 + int(path.prune(a).predict([[3.0]])[0] != 0) for a in cart_candidates(path.alphas)],
    )


def test_sample_weights_follow_sklearn():
    # scikit-learn as reference library: weighted node risks and refits
    rng = np.random.default_rng(8)
    X = rng.integers(0, 6, size=(150, 3)).astype(float)
    y = (X[:, 0] + rng.integers(0, 3, 150)) % 3
    w = rng.uniform(0.2, 3.0, 150)
    tree = DecisionTreeClassifier(random_state=0).fit(X, y, sample_weight=w)
    path = pruning_path(tree, "impurity")
    theirs = merge_close(tree.cost_complexity_pruning_path(X, y, sample_weight=w).ccp_alphas)
    theirs = np.unique(np.where(theirs <= 1e-12 * path.node_risk[0], 0.0, theirs))
    np.testing.assert_allclose(path.alphas, theirs, rtol=1e-9, atol=1e-15)
    for alpha in cart_candidates(path.alphas)[1:-1]:
        reference = DecisionTreeClassifier(random_state=0, ccp_alpha=alpha).fit(
            X, y, sample_weight=w
        )
        np.testing.assert_array_equal(path.prune(alpha).predict(X), reference.predict(X))


def test_missing_values_are_routed_as_the_full_tree_routes_them():
    # scikit-learn's trees send NaN down a learned side; pruned trees keep that
    rng = np.random.default_rng(9)
    X = rng.normal(size=(300, 3))
    y = X[:, 0] * 2 + rng.normal(size=300)
    X[rng.uniform(size=X.shape) < 0.15] = np.nan
    tree = DecisionTreeRegressor(min_samples_leaf=5, random_state=0).fit(X, y)
    path = pruning_path(tree, "squared_error")
    candidates = cart_candidates(path.alphas)
    candidates[-1] *= 1 + 1e-9
    losses = path.losses(X, y, candidates)
    for j, alpha in enumerate(candidates[1:], start=1):
        reference = DecisionTreeRegressor(min_samples_leaf=5, random_state=0, ccp_alpha=alpha).fit(
            X, y
        )
        np.testing.assert_allclose(path.prune(alpha).predict(X), reference.predict(X))
        assert losses[j] == pytest.approx(np.sum((reference.predict(X) - y) ** 2), rel=1e-9)


def test_subtree_probabilities_without_rebuilding():
    X, y = make_classification(300, 5, n_informative=3, n_classes=3, random_state=2)
    tree = DecisionTreeClassifier(random_state=0).fit(X, y)
    path = pruning_path(tree, "error")
    for alpha in cart_candidates(path.alphas):
        np.testing.assert_allclose(path.predict_proba(X, alpha), path.prune(alpha).predict_proba(X))


# ---------------------------------------------------------------------------
# Contract: every pruning risk through one table of cases.  Each row names the
# risk, how to grow a small tree for it, and an independent reference for R(t)
# written from the definition (DESIGN.md "Weakest-link pruning").


def _class_counts(tree):
    return tree.tree_.value[:, 0, :] * tree.tree_.weighted_n_node_samples[:, None]


def _ref_error(tree, X, y):
    # by hand: the node's rows not of its majority class, over all rows
    counts = _class_counts(tree)
    return (counts.sum(axis=1) - counts.max(axis=1)) / counts[0].sum()


def _ref_impurity(tree, X, y):
    # scikit-learn as reference library: its pruning path charges each node
    # weighted_n_node_samples * impurity / total weight
    t = tree.tree_
    return t.weighted_n_node_samples * t.impurity / t.weighted_n_node_samples[0]


def _ref_squared_error(tree, X, y):
    # by hand: the node's rows' squared error about the node's prediction, over all rows
    member = tree.decision_path(X).toarray().astype(bool)
    pred = tree.tree_.value[:, 0, 0]
    return np.array([np.sum((y[member[:, t]] - pred[t]) ** 2) for t in range(pred.size)]) / len(y)


def _classification_case(seed):
    X, y = make_classification(
        80,
        4,
        n_informative=3,
        n_redundant=0,
        flip_y=0.2,
        n_classes=3,
        n_clusters_per_class=1,
        random_state=seed,
    )
    return X, y, DecisionTreeClassifier(max_leaf_nodes=7 + seed % 5, random_state=seed)


def _regression_case(seed, criterion="squared_error"):
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(80, 3))
    y = X[:, 0] * 2 + rng.normal(size=80)
    return (
        X,
        y,
        DecisionTreeRegressor(criterion=criterion, max_leaf_nodes=7 + seed % 5, random_state=seed),
    )


_UNEQUAL_LOSS = np.array([[0.0, 1.0, 2.0], [5.0, 0.0, 1.0], [1.0, 8.0, 0.0]])
_PRIORS = np.array([0.2, 0.5, 0.3])


def _ref_cost(loss, priors):
    def reference(tree, X, y):
        # Breiman et al. 1984, ch. 4, by hand: R(t) = min_j sum_i L(i, j) pi_i N_i(t) / N_i
        counts = _class_counts(tree)
        totals = counts[0]
        pi = totals / totals.sum() if priors is None else priors
        risks = []
        for row in counts:
            risks.append(
                min(
                    sum(loss[i, j] * pi[i] * row[i] / totals[i] for i in range(len(row)))
                    for j in range(len(row))
                )
            )
        return np.array(risks)

    return reference


RISK_CASES = {
    "error": (_classification_case, {}, _ref_error),
    "impurity-gini": (_classification_case, {}, _ref_impurity),
    "impurity-regression": (_regression_case, {}, _ref_impurity),
    "squared_error": (_regression_case, {}, _ref_squared_error),
    "cost-unequal": (
        _classification_case,
        {"costs": {"loss_matrix": _UNEQUAL_LOSS}},
        _ref_cost(_UNEQUAL_LOSS, None),
    ),
    "cost-priors": (
        _classification_case,
        {"costs": {"loss_matrix": _UNEQUAL_LOSS, "priors": _PRIORS}},
        _ref_cost(_UNEQUAL_LOSS, _PRIORS),
    ),
    "cost-zero_one": (
        _classification_case,
        {"costs": {"loss_matrix": 1 - np.eye(3)}},
        _ref_error,
    ),
    "error-equal_priors": (
        _classification_case,
        {"costs": {"priors": "equal"}},
        _ref_cost(1 - np.eye(3), np.full(3, 1 / 3)),
    ),
    "squared_error-absolute": (
        lambda s: _regression_case(s, "absolute_error"),
        {"rows": True},
        _ref_squared_error,
    ),
}


def _risk_name(case: str) -> str:
    # "cost-zero_one" is the cost risk, "error-equal_priors" the error risk, ...
    return case.split("-")[0]


@pytest.mark.parametrize("seed", range(4))
@pytest.mark.parametrize("case", sorted(RISK_CASES))
def test_risk_contract(case, seed):
    make, options, reference = RISK_CASES[case]
    X, y, template = make(seed)
    tree = template.fit(X, y)
    risk = _risk_name(case)
    rows = (X, y) if options.get("rows") else (None, None)
    settings = options.get("costs", {})
    r = node_risks(tree, risk, *rows, **settings)
    np.testing.assert_allclose(r, reference(tree, X, y), rtol=1e-9, atol=1e-12)
    path = pruning_path(tree, risk, *rows, **settings)
    # the path's shape: alphas increase from 0, the trees shrink to the root
    assert path.alphas[0] == 0 and np.all(np.diff(path.alphas) > 0)
    assert np.all(np.diff(path.n_leaves) < 0) and path.n_leaves[-1] == 1
    assert path.risks[-1] == pytest.approx(r[0], abs=1e-12)
    # hand check by exhaustive search: T(alpha) minimises R(T) + alpha |T|, the
    # smaller tree winning ties, at every path alpha and every candidate
    left, right = tree.tree_.children_left, tree.tree_.children_right
    subtrees = _all_prunings(left, right, 0)
    sizes = np.array([len(s) for s in subtrees])
    probe = np.unique(np.r_[path.alphas, cart_candidates(path.alphas), path.alphas[-1] * 1.5])
    for alpha in probe:
        costs = np.array([r[list(s)].sum() + alpha * len(s) for s in subtrees])
        tied = np.flatnonzero(costs <= costs.min() + 1e-12)
        best = subtrees[tied[np.argmin(sizes[tied])]]
        assert set(np.flatnonzero(path.leaf_mask(alpha))) == set(best), (case, alpha)
        assert path.prune(alpha).get_n_leaves() == len(best)
    if settings:
        # by hand: each leaf predicts the class of least expected cost
        loss = settings.get("loss_matrix", 1 - np.eye(3))
        counts = _class_counts(tree)
        pi = settings.get("priors")
        pi = (
            counts[0] / counts[0].sum()
            if pi is None
            else np.full(3, 1 / 3)
            if isinstance(pi, str)
            else pi
        )
        cost = (counts * pi / counts[0]) @ loss
        # the chosen class costs the least (exact ties, as 2 x 1 + 3 x 8 = 2 x 2 + 22 x 1,
        # go to the first class; rounding in this reference may order them either way)
        chosen = cost[np.arange(cost.shape[0]), path.node_class]
        np.testing.assert_allclose(chosen, cost.min(axis=1), rtol=1e-12, atol=1e-15)
        leaf = path.leaf_map(path.alphas[1])[tree.apply(X)]
        np.testing.assert_array_equal(
            path.predict(X, path.alphas[1]), tree.classes_[path.node_class[leaf]]
        )


@pytest.mark.parametrize("seed", range(6))
@pytest.mark.parametrize("n_classes", [2, 3])
def test_cost_risk_with_zero_one_loss_and_data_priors_is_the_error_path(seed, n_classes):
    # Breiman et al. 1984, ch. 4: with 0-1 loss and the data's priors the expected cost
    # is the misclassification rate, so the two paths are the same path
    X, y = make_classification(
        300, 5, n_informative=3, n_classes=n_classes, flip_y=0.2, random_state=seed
    )
    tree = DecisionTreeClassifier(min_samples_leaf=1 + seed % 3, random_state=seed).fit(X, y)
    error = pruning_path(tree, "error")
    cost = pruning_path(tree, "cost", loss_matrix=1 - np.eye(n_classes), priors="data")
    np.testing.assert_allclose(cost.node_risk, error.node_risk, rtol=1e-12, atol=1e-15)
    np.testing.assert_allclose(cost.alphas, error.alphas, rtol=1e-10)
    np.testing.assert_array_equal(cost.n_leaves, error.n_leaves)
    np.testing.assert_array_equal(cost.node_class, error.node_class)
    # the same subtree at every candidate; the last candidate sits exactly on the root's
    # collapse point, where the last rounding bit of either sum decides: step past it
    candidates = cart_candidates(error.alphas)
    candidates[-1] *= 1 + 1e-9
    for alpha in candidates:
        np.testing.assert_array_equal(cost.leaf_mask(alpha), error.leaf_mask(alpha))


@pytest.mark.parametrize("seed", range(6))
def test_equal_priors_equal_the_error_risk_of_a_balanced_tree(seed):
    # Breiman et al. 1984, ch. 4: equal priors weigh class i's rows by 1 / N_i, which is
    # what class_weight="balanced" does (weight N / (K N_i)); on a tree grown balanced,
    # its error risk and the equal-priors risk are the same path
    X, y = make_classification(
        400, 5, n_informative=3, weights=[0.85, 0.15], flip_y=0.1, random_state=seed
    )
    balanced = DecisionTreeClassifier(class_weight="balanced", random_state=seed).fit(X, y)
    error = pruning_path(balanced, "error")
    equal = pruning_path(balanced, "cost", priors="equal")
    np.testing.assert_allclose(equal.node_risk, error.node_risk, rtol=1e-12, atol=1e-15)
    np.testing.assert_allclose(equal.alphas, error.alphas, rtol=1e-10)
    np.testing.assert_array_equal(equal.n_leaves, error.n_leaves)
    # and on an unweighted tree: equal priors are the error risk under balanced
    # weights, computed by hand from the unweighted class counts
    plain = DecisionTreeClassifier(random_state=seed).fit(X, y)
    counts = _class_counts(plain)
    w = y.size / (2 * np.bincount(y))
    weighted = counts * w
    by_hand = (weighted.sum(axis=1) - weighted.max(axis=1)) / weighted[0].sum()
    np.testing.assert_allclose(
        node_risks(plain, "cost", priors="equal"), by_hand, rtol=1e-12, atol=1e-15
    )


def test_regression_paths_refuse_costs():
    rng = np.random.default_rng(0)
    X = rng.normal(size=(50, 2))
    tree = DecisionTreeRegressor(max_depth=3).fit(X, X[:, 0])
    with pytest.raises(InvalidParameterError, match="'loss_matrix'"):
        pruning_path(tree, "squared_error", loss_matrix=np.zeros((1, 1)))
