"""Tests of CART's priors and loss matrix on tree nodes (prunebench.costs)."""

from __future__ import annotations

import numpy as np
import pytest
from sklearn.tree import DecisionTreeClassifier

from prunebench.costs import check_costs, node_class_costs
from prunebench.exceptions import InvalidParameterError
from prunebench.pruning import pruning_path


def _tie_case():
    # DESIGN.md tie case: 20 rows, one feature; the left half is 9 x class 0 and
    # 1 x class 1, the right half mirrored
    X = np.arange(20, dtype=float)[:, None]
    y = np.array([1] + [0] * 9 + [1] * 9 + [0])
    return X, y, DecisionTreeClassifier(random_state=0).fit(X, y)


@pytest.mark.parametrize(
    "kwargs, name",
    [
        ({"loss_matrix": np.ones((2, 2))}, "loss_matrix"),  # non-zero diagonal
        ({"loss_matrix": [[0, -1], [1, 0]]}, "loss_matrix"),
        ({"loss_matrix": np.zeros((3, 3))}, "loss_matrix"),  # wrong shape
        ({"loss_matrix": "big"}, "loss_matrix"),
        ({"priors": [0.5, 0.6]}, "priors"),
        ({"priors": "uniform"}, "priors"),
        ({"priors": [1.0]}, "priors"),
    ],
)
def test_bad_costs_are_refused_with_one_message(kwargs, name):
    X, y, tree = _tie_case()
    with pytest.raises(InvalidParameterError, match=f"The '{name}' parameter of pruning_path"):
        pruning_path(tree, "cost", **kwargs)


def test_node_costs_by_hand():
    # Breiman et al. 1984, ch. 4, by hand on the tie case: the root holds 10 + 10 rows,
    # its depth-1 children 9 + 1 and 1 + 9. With L = [[0, 1], [4, 0]] and data priors,
    # predicting 0 in the left child costs 4 x 1 / 20 = 0.2 and predicting 1 costs
    # 9 / 20 = 0.45, so it predicts 0; the right child: 4 x 9 / 20 = 1.8 against 1 / 20
    X, y, tree = _tie_case()
    L = np.array([[0.0, 1.0], [4.0, 0.0]])
    cost, best = node_class_costs(tree, L)
    left, right = tree.tree_.children_left[0], tree.tree_.children_right[0]
    np.testing.assert_allclose(cost[0], [40 / 20, 10 / 20])
    np.testing.assert_allclose(cost[left], [0.2, 0.45])
    np.testing.assert_allclose(cost[right], [1.8, 0.05])
    assert best[0] == 1 and best[left] == 0 and best[right] == 1
    # equal priors on these balanced classes change nothing; priors (0.8, 0.2) scale
    # class 0's rows by 0.8 / 10 and class 1's by 0.2 / 10
    np.testing.assert_allclose(node_class_costs(tree, L, "equal")[0], cost)
    cost_p, _ = node_class_costs(tree, L, [0.8, 0.2])
    np.testing.assert_allclose(cost_p[left], [4 * 0.2 * 1 / 10, 0.8 * 9 / 10])
    # a loss matrix over more labels than the tree saw: the tree's rows and columns
    L3 = np.array([[0.0, 1.0, 7.0], [4.0, 0.0, 7.0], [1.0, 1.0, 0.0]])
    cost3, _ = node_class_costs(tree, L3, classes=np.array([0, 1, 2]))
    np.testing.assert_allclose(cost3, cost)


def test_check_costs_returns_floats_and_equal_priors():
    L, pi = check_costs(np.array(["a", "b", "c"]), [[0, 1, 1], [2, 0, 1], [1, 1, 0]], "equal")
    assert L.dtype == float and L[1, 0] == 2
    np.testing.assert_allclose(pi, [1 / 3] * 3)
    assert check_costs(np.array([0, 1]))[1] == "data"
