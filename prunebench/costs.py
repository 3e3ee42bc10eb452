"""CART's priors and loss matrix (Breiman et al. 1984, ch. 4), checked and applied to tree nodes.

``L[i, j]`` is the cost of predicting class ``j`` when the truth is ``i``; the
priors ``pi`` replace the training data's class shares. A node's expected cost
of predicting ``j`` is ``sum_i L(i, j) pi_i N_i(t) / N_i``; the node predicts
the cheapest class, and the ``"cost"`` pruning risk is that least cost.
"""

from __future__ import annotations

import numpy as np
from sklearn.tree import BaseDecisionTree

from .exceptions import parameter_error

__all__ = ["check_costs", "node_class_costs"]


def check_costs(
    classes: np.ndarray, loss_matrix=None, priors="data", owner: str = "pruning_path"
) -> tuple[np.ndarray | None, str | np.ndarray]:
    """Validate a loss matrix and priors given in ``classes`` order.

    Parameters
    ----------
    classes : ndarray of shape (n_classes,)
        The class labels the matrix and the priors are indexed by.
    loss_matrix : array-like of shape (n_classes, n_classes), optional
        ``L[i, j]``: the cost of predicting class ``j`` when the truth is ``i``;
        finite, non-negative, zero on the diagonal. ``None`` means 0-1 loss.
    priors : "data", "equal" or array-like of shape (n_classes,), default="data"
        Class priors ``pi``: the training data's class shares, equal shares, or
        given probabilities (non-negative, summing to 1).
    owner : str
        Who is asking, for the error message.

    Returns
    -------
    (ndarray or None, "data" or ndarray)
        The loss matrix as floats, and the priors (``"equal"`` turned into an array).
    """
    k = len(classes)
    if loss_matrix is not None:
        L = np.asarray(loss_matrix, dtype=float) if _numeric(loss_matrix) else None
        if (
            L is None
            or L.shape != (k, k)
            or not np.all(np.isfinite(L))
            or np.any(L < 0)
            or np.any(np.diag(L) != 0)
        ):
            raise parameter_error(
                "loss_matrix",
                owner,
                f"a {k} x {k} array in classes_ order {list(classes)} (rows: true class, "
                "columns: predicted class), finite, non-negative, with a zero diagonal",
                loss_matrix,
            )
        loss_matrix = L
    if isinstance(priors, str) and priors in ("data", "equal"):
        return loss_matrix, ("data" if priors == "data" else np.full(k, 1.0 / k))
    pi = np.asarray(priors, dtype=float) if _numeric(priors) else None
    if (
        pi is None
        or pi.shape != (k,)
        or not np.all(np.isfinite(pi))
        or np.any(pi < 0)
        or abs(pi.sum() - 1.0) > 1e-9
    ):
        raise parameter_error(
            "priors",
            owner,
            f'"data", "equal" or {k} non-negative probabilities summing to 1 in classes_ '
            f"order {list(classes)}",
            priors,
        )
    return loss_matrix, pi


def _numeric(value) -> bool:
    try:
        np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        return False
    return not isinstance(value, (str, bytes))


def node_class_costs(
    estimator: BaseDecisionTree, loss_matrix=None, priors="data", classes=None
) -> tuple[np.ndarray, np.ndarray]:
    """Every node's expected cost of predicting each class, and the node's best class.

    With priors ``pi`` and training class totals ``N_i``, predicting class ``j`` at
    node ``t`` costs ``sum_i L(i, j) pi_i N_i(t) / N_i`` (Breiman et al. 1984, ch. 4);
    with data priors ``pi_i = N_i / N`` this is ``sum_i L(i, j) N_i(t) / N``.
    Counts are weighted by the training weights the tree was grown with.

    Parameters
    ----------
    estimator : DecisionTreeClassifier
        A fitted single-output classification tree.
    loss_matrix, priors
        As in :func:`check_costs`, in ``classes`` order; ``None`` is 0-1 loss.
    classes : ndarray, optional
        The labels ``loss_matrix`` and ``priors`` are indexed by (by default the
        tree's ``classes_``); the tree's classes must be among them.

    Returns
    -------
    cost : ndarray of shape (node_count, n_tree_classes)
        ``cost[t, j]``, as a share of the training weight.
    best : ndarray of shape (node_count,)
        The index (in the tree's ``classes_``) of the cheapest class; ties go to
        the first.
    """
    tree = estimator.tree_
    own = np.asarray(estimator.classes_)
    classes = own if classes is None else np.asarray(classes)
    L, pi = check_costs(classes, loss_matrix, priors)
    pos = np.searchsorted(classes, own)
    if np.any(pos >= classes.size) or np.any(classes[np.minimum(pos, classes.size - 1)] != own):
        raise parameter_error("classes", "node_class_costs", f"a superset of {list(own)}", classes)
    counts = tree.value[:, 0, :] * tree.weighted_n_node_samples[:, None]
    if isinstance(pi, str):
        adjusted = counts / tree.weighted_n_node_samples[0]
    else:
        sub = pi[pos]
        if sub.sum() <= 0:
            raise parameter_error("priors", "node_class_costs", "positive on some class", priors)
        # a class with no training weight (all its rows weighted 0) has no rows in any node
        per_row = np.divide(sub / sub.sum(), counts[0], out=np.zeros_like(sub), where=counts[0] > 0)
        adjusted = counts * per_row
    k = own.size
    L = 1.0 - np.eye(k) if L is None else L[np.ix_(pos, pos)]
    cost = adjusted @ L
    return cost, np.argmin(cost, axis=1)


def _is_data(priors) -> bool:
    return isinstance(priors, str) and priors == "data"
