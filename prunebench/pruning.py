"""Weakest-link (cost-complexity) pruning of a fitted scikit-learn tree.

One grown tree gives the whole nested sequence of optimal subtrees
``T_0 > T_1 > ... > {root}`` under a chosen pruning risk, the alphas where the
sequence changes, and, through :meth:`PruningPath.losses`, the validation loss
of every subtree at every candidate alpha from a single ``apply`` of the full
tree.

How the path is computed
------------------------
For a node ``t`` let ``C_t(alpha)`` be the smallest cost-complexity
``R(S) + alpha * |leaves(S)|`` over the pruned subtrees ``S`` rooted at ``t``.
``C_t`` is concave and piecewise linear, and
``C_t = min(R(t) + alpha, C_left + C_right)``.  Because ``C_left + C_right``
has slope at least 2, it crosses ``R(t) + alpha`` exactly once, at the node's
own collapse point ``beta_t``; node ``t`` is a leaf or gone in every optimal
subtree with ``alpha >= beta_t`` (ties go to the smaller tree).  The alpha at
which the node leaves the optimal tree is then
``A_t = min(beta_t, A_parent)``, and the path alphas are the distinct values of
``A``.  The piecewise-linear functions are kept as lists of pieces
``(start alpha, slope = leaf count, intercept = risk)`` and combined one depth
level at a time with numpy, so the cost is about ``O(nodes * depth)`` with one
Python iteration per level.  All tied weakest links collapse at the same alpha,
which is what Breiman et al. (1984, ch. 3) describe; scikit-learn instead prunes
one branch per step, so its path repeats tied alphas.
"""

from __future__ import annotations

import copy
from dataclasses import dataclass

import numpy as np
from sklearn.base import is_classifier
from sklearn.tree import BaseDecisionTree
from sklearn.tree._tree import Tree
from sklearn.utils.validation import check_is_fitted

from .costs import _is_data, check_costs, node_class_costs
from .exceptions import parameter_error
from .vocabulary import prune_risk_names

__all__ = [
    "PRUNE_RISKS",
    "PruningPath",
    "cart_candidates",
    "check_costs",
    "merge_close",
    "node_class_costs",
    "node_risks",
    "pruning_path",
]

#: The pruning risks R(t) a path can be computed under.
PRUNE_RISKS = prune_risk_names()

_LEAF = -1
# Alphas closer than this (relative) are one alpha: tied weakest links computed
# through different sums differ in their last bits.
_ALPHA_RTOL = 1e-10
# A subtree whose risk is below its root's by less than this share has no gain.
_GAIN_RTOL = 1e-12
# Node risks below this share of the root's are rounding noise of a pure node.
_RISK_RTOL = 1e-14


def node_risks(
    estimator: BaseDecisionTree,
    risk: str,
    X: np.ndarray | None = None,
    y: np.ndarray | None = None,
    sample_weight: np.ndarray | None = None,
    *,
    loss_matrix=None,
    priors="data",
    classes=None,
) -> np.ndarray:
    """Risk R(t) of every node of a fitted tree, as a share of the training weight.

    Parameters
    ----------
    estimator : DecisionTreeClassifier or DecisionTreeRegressor
        A fitted single-output tree.
    risk : {"error", "impurity", "squared_error", "cost"}
        ``"error"``: resubstitution misclassification of the node's majority class
        (classification only; with priors other than the data's, the 0-1 case of
        ``"cost"``). ``"impurity"``: the growing criterion's node impurity, as
        scikit-learn's ``cost_complexity_pruning_path`` uses. ``"squared_error"``:
        the node's sum of squared errors about its prediction over the total weight
        (regression only). ``"cost"``: ``min_j sum_i L(i, j) pi_i N_i(t) / N_i``
        under the loss matrix and priors (classification only; Breiman et al. 1984,
        ch. 4), which is ``"error"`` for 0-1 loss and data priors.
    X, y, sample_weight : array-like, optional
        The training rows. Needed only for ``"squared_error"`` when the tree was not
        grown with a squared-error criterion, whose node impurity is that risk already.
    loss_matrix, priors, classes
        For ``"cost"`` (and ``"error"`` with priors): see :func:`node_class_costs`.

    Returns
    -------
    ndarray of shape (node_count,)
        ``R(t)`` for every node, weighted by the node's share of the training weight.
    """
    tree = estimator.tree_
    if tree.n_outputs != 1:
        raise parameter_error("estimator", "pruning_path", "a single-output tree", estimator)
    classifier = is_classifier(estimator)
    allowed = ("error", "impurity", "cost") if classifier else ("impurity", "squared_error")
    if risk not in allowed:
        task = "classification" if classifier else "regression"
        raise parameter_error("risk", "pruning_path", f"one of {allowed} for {task}", risk)
    weight = tree.weighted_n_node_samples
    total = weight[0]
    if risk == "impurity" or (
        risk == "squared_error" and estimator.criterion in ("squared_error", "friedman_mse")
    ):
        r = weight * tree.impurity / total
    elif risk == "cost" or (risk == "error" and not _is_data(priors)):
        # "error" under priors ignores the loss matrix: it is the 0-1 case
        cost, _ = node_class_costs(
            estimator, loss_matrix if risk == "cost" else None, priors, classes
        )
        r = cost.min(axis=1)
    elif risk == "error":
        class_weight = tree.value[:, 0, :] * weight[:, None]
        r = (weight - class_weight.max(axis=1)) / total
    else:
        if X is None or y is None:
            raise parameter_error(
                "X",
                "node_risks",
                "the training rows when a tree grown with "
                f"criterion={estimator.criterion!r} is pruned by squared error",
                X,
            )
        membership = estimator.decision_path(X).tocsc().T
        sw = np.ones(len(y)) if sample_weight is None else np.asarray(sample_weight, float)
        y = np.asarray(y, float)
        w, s1, s2 = (membership @ v for v in (sw, sw * y, sw * y * y))
        pred = tree.value[:, 0, 0]
        r = (s2 - 2 * pred * s1 + pred * pred * w) / w[0]
    # a pure node's impurity can come out as 1e-16 instead of 0 (weighted sums); such
    # rounding is no risk, or its split would get a meaningless tiny alpha
    r = np.where(r <= _RISK_RTOL * abs(r[0]), 0.0, r)
    return r


def cart_candidates(alphas: np.ndarray) -> np.ndarray:
    """CART's candidate alphas for cross-validation: geometric midpoints of a path.

    Parameters
    ----------
    alphas : ndarray of shape (m + 1,)
        Distinct path alphas ``0 = a_0 < a_1 < ... < a_m``.

    Returns
    -------
    ndarray of shape (m + 1,)
        ``c_0 = 0``, ``c_k = sqrt(a_k * a_{k+1})`` for ``1 <= k < m``, ``c_m = a_m``
        (Breiman et al. 1984, §3.4.2): each lies inside the interval where ``T_k`` is
        optimal, so it selects ``T_k`` on any tree whose path is close to this one.
    """
    alphas = np.asarray(alphas, dtype=float)
    if alphas.size <= 2:
        return alphas.copy()
    mid = np.sqrt(alphas[1:-1] * alphas[2:])
    return np.concatenate([[0.0], mid, alphas[-1:]])


def _depths_and_parents(left: np.ndarray, right: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    n = left.size
    depth = np.zeros(n, dtype=np.intp)
    parent = np.full(n, -1, dtype=np.intp)
    frontier = np.array([0], dtype=np.intp)
    d = 0
    while frontier.size:
        depth[frontier] = d
        inner = frontier[left[frontier] != _LEAF]
        parent[left[inner]] = inner
        parent[right[inner]] = inner
        frontier = np.concatenate([left[inner], right[inner]])
        d += 1
    return depth, parent


def _collapse_points(
    left: np.ndarray, right: np.ndarray, parent: np.ndarray, depth: np.ndarray, risk: np.ndarray
) -> np.ndarray:
    """beta_t for every node: where R(t) + alpha meets the children's optimal cost."""
    n = risk.size
    beta = np.zeros(n)
    is_leaf = left == _LEAF
    max_depth = int(depth.max())
    by_depth = np.argsort(depth, kind="stable")
    bounds = np.searchsorted(depth[by_depth], np.arange(max_depth + 2))
    # pool of pieces (node, start alpha, slope, intercept) for the level below
    p_node = np.empty(0, np.intp)
    p_a = np.empty(0)
    p_slope = np.empty(0)
    p_risk = np.empty(0)
    for d in range(max_depth - 1, -1, -1):
        below = by_depth[bounds[d + 1] : bounds[d + 2]]
        leaves_below = below[is_leaf[below]]
        p_node = np.concatenate([p_node, leaves_below])
        p_a = np.concatenate([p_a, np.zeros(leaves_below.size)])
        p_slope = np.concatenate([p_slope, np.ones(leaves_below.size)])
        p_risk = np.concatenate([p_risk, risk[leaves_below]])

        par = parent[p_node]
        side = (right[par] == p_node).astype(np.int8)
        order = np.lexsort((side, p_a, par))
        par, side, a = par[order], side[order], p_a[order]
        slope, intercept = p_slope[order], p_risk[order]
        idx = np.arange(par.size)
        # latest piece of each child at or before every entry (per parent group)
        last_left = np.maximum.accumulate(np.where(side == 0, idx, 0))
        last_right = np.maximum.accumulate(np.where(side == 1, idx, 0))
        sum_slope = slope[last_left] + slope[last_right]
        sum_risk = intercept[last_left] + intercept[last_right]
        # one combined piece per distinct (parent, start alpha): keep the last entry
        nxt_same = np.zeros(par.size, bool)
        nxt_same[:-1] = (par[1:] == par[:-1]) & (a[1:] == a[:-1])
        keep = ~nxt_same
        par, a, sum_slope, sum_risk = par[keep], a[keep], sum_slope[keep], sum_risk[keep]

        new_group = np.empty(par.size, bool)
        new_group[0] = True
        np.not_equal(par[1:], par[:-1], out=new_group[1:])
        start = np.flatnonzero(new_group)
        group = np.cumsum(new_group) - 1
        a_next = np.empty_like(a)
        a_next[:-1] = a[1:]
        a_next[start - 1] = np.inf  # the last piece of each group (start[0] - 1 is the end)
        gain = risk[par] - sum_risk
        # a split that lowers the risk only by rounding noise is worth nothing
        gain[gain <= _GAIN_RTOL * np.abs(risk[par])] = 0.0
        cross = gain / (sum_slope - 1.0)
        hit = cross <= a_next
        pos = np.where(hit, np.arange(par.size), par.size)
        k = np.minimum.reduceat(pos, start)
        owners = par[start]
        b = np.maximum(cross[k], a[k])
        beta[owners] = b

        pos_in_group = np.arange(par.size) - start[group]
        kept = pos_in_group <= (k - start)[group]
        # the crossing piece ends at beta; from beta on the node is a leaf
        replace = b <= a[k]
        sum_slope[k[replace]] = 1.0
        sum_risk[k[replace]] = risk[owners[replace]]
        add = ~replace
        p_node = np.concatenate([par[kept], owners[add]])
        p_a = np.concatenate([a[kept], b[add]])
        p_slope = np.concatenate([sum_slope[kept], np.ones(add.sum())])
        p_risk = np.concatenate([sum_risk[kept], risk[owners[add]]])
    beta[is_leaf] = 0.0
    return beta


def merge_close(values: np.ndarray, rtol: float = _ALPHA_RTOL) -> np.ndarray:
    """Snap values that differ only by rounding onto one representative (the largest).

    Parameters
    ----------
    values : ndarray
        Non-negative alphas.
    rtol : float, default=1e-10
        Sorted neighbours closer than ``rtol`` times the larger are one value.

    Returns
    -------
    ndarray
        ``values`` with every cluster replaced by its largest member.
    """
    values = np.asarray(values, dtype=float)
    uniq = np.unique(values)
    if uniq.size == 0:
        return values
    gap = np.diff(uniq) > rtol * np.abs(uniq[1:])
    cluster = np.r_[0, np.cumsum(gap)]
    rep = np.maximum.reduceat(uniq, np.r_[0, np.flatnonzero(gap) + 1])
    return rep[cluster[np.searchsorted(uniq, values)]]


@dataclass(frozen=True, eq=False)
class PruningPath:
    """The weakest-link pruning path of one fitted tree.

    Attributes
    ----------
    estimator : DecisionTreeClassifier or DecisionTreeRegressor
        The full tree ``T_max`` the path was computed from (not modified).
    risk : str
        The pruning risk R(t) used.
    alphas : ndarray of shape (m + 1,)
        Distinct path alphas, ``alphas[0] == 0``; ``T_k`` is optimal on
        ``[alphas[k], alphas[k + 1])``.
    n_leaves : ndarray of shape (m + 1,)
        Leaf count of each ``T_k``.
    risks : ndarray of shape (m + 1,)
        ``R(T_k)``, the summed leaf risks of each subtree.
    node_alpha : ndarray of shape (node_count,)
        For every node, the alpha from which it is a leaf of the optimal subtree
        (or gone, when its parent collapses at the same alpha). Leaves of the full
        tree have 0.
    parent, depth : ndarray of shape (node_count,)
        Tree structure, for mapping full-tree leaves to subtree leaves.
    node_risk : ndarray of shape (node_count,)
        ``R(t)`` of every node.
    node_class : ndarray of shape (node_count,) or None
        Classifiers: the index (in ``estimator.classes_``) of the class every node
        predicts as a leaf: the majority class, or under a loss matrix or priors
        the class of least expected cost (:func:`node_class_costs`).
    node_counts : ndarray of shape (node_count, n_classes) or None
        Classifiers: the node's training class counts (weighted as the tree was grown).
    loss_matrix : ndarray or None
        The loss matrix the path and ``node_class`` used, in ``classes`` order.
    priors : "data" or ndarray
        The priors they used, in ``classes`` order.
    classes : ndarray or None
        The labels ``loss_matrix`` and ``priors`` are indexed by (a superset of the
        tree's ``classes_``: a fold's tree may lack a rare class).
    """

    estimator: BaseDecisionTree
    risk: str
    alphas: np.ndarray
    n_leaves: np.ndarray
    risks: np.ndarray
    node_alpha: np.ndarray
    parent: np.ndarray
    depth: np.ndarray
    node_risk: np.ndarray
    node_class: np.ndarray | None = None
    node_counts: np.ndarray | None = None
    loss_matrix: np.ndarray | None = None
    priors: str | np.ndarray = "data"
    classes: np.ndarray | None = None

    @property
    def parent_alpha(self) -> np.ndarray:
        """For every node, the alpha from which it no longer exists (inf for the root)."""
        out = np.full(self.node_alpha.size, np.inf)
        has_parent = self.parent >= 0
        out[has_parent] = self.node_alpha[self.parent[has_parent]]
        return out

    def subtree_index(self, alpha: float) -> int:
        """Index ``k`` of the optimal subtree ``T_k`` at ``alpha``."""
        return int(np.searchsorted(self.alphas, alpha, side="right") - 1) if alpha >= 0 else 0

    def leaf_mask(self, alpha: float) -> np.ndarray:
        """Boolean mask of the nodes that are leaves of the optimal subtree at ``alpha``."""
        return (self.node_alpha <= alpha) & (self.parent_alpha > alpha)

    def node_mask(self, alpha: float) -> np.ndarray:
        """Boolean mask of the nodes kept in the optimal subtree at ``alpha``."""
        return self.parent_alpha > alpha

    def leaf_map(self, alpha: float) -> np.ndarray:
        """For every node of the full tree, the node of ``T(alpha)`` whose region holds it."""
        collapsed = self.node_alpha <= alpha
        target = np.arange(self.node_alpha.size)
        order = np.argsort(self.depth, kind="stable")[1:]
        # parents come before children in depth order, so one pass pushes targets down
        for d in range(1, int(self.depth.max()) + 1):
            nodes = order[self.depth[order] == d]
            par = self.parent[nodes]
            up = collapsed[par]
            target[nodes[up]] = target[par[up]]
        return target

    def predict_proba(self, X, alpha: float) -> np.ndarray:
        """Class probabilities of the optimal subtree at ``alpha``, without rebuilding it.

        One ``apply`` of the full tree, then each row's leaf is mapped to its leaf in
        ``T(alpha)``, whose training class fractions are returned (classifiers only).

        Parameters
        ----------
        X : array-like of shape (n_samples, n_features)
        alpha : float

        Returns
        -------
        ndarray of shape (n_samples, n_classes)
        """
        if not is_classifier(self.estimator):
            raise parameter_error(
                "estimator", "PruningPath.predict_proba", "a classifier", self.estimator
            )
        leaves = self.estimator.apply(X)
        return self.estimator.tree_.value[self.leaf_map(alpha)[leaves], 0, :]

    def predict(self, X, alpha: float) -> np.ndarray:
        """Predictions of the optimal subtree at ``alpha``, without rebuilding it.

        For a classifier, each leaf predicts :attr:`node_class` (the cost-minimising
        class under a loss matrix or priors; else the majority class, as the pruned
        tree's own ``predict``); for a regressor, the leaf's value.
        """
        leaves = self.leaf_map(alpha)[self.estimator.apply(X)]
        if self.node_class is None:
            return self.estimator.tree_.value[leaves, 0, 0]
        return np.asarray(self.estimator.classes_)[self.node_class[leaves]]

    def prune(self, alpha: float) -> BaseDecisionTree:
        """A copy of the full tree pruned to the optimal subtree at ``alpha``.

        The copy is an ordinary fitted scikit-learn tree: ``predict``,
        ``predict_proba``, ``apply``, ``get_n_leaves``, ``get_depth``,
        ``sklearn.tree.plot_tree`` and ``export_text`` all work on it.
        """
        return _rebuild(self.estimator, self.node_mask(alpha), self.leaf_mask(alpha))

    def losses(self, X: np.ndarray, y: np.ndarray, alphas: np.ndarray) -> np.ndarray:
        """Total validation loss of the optimal subtree at each of ``alphas``.

        One ``apply`` of the full tree; rows are aggregated per full-tree leaf, then
        each leaf's rows are charged to every ancestor over the alpha interval in
        which that ancestor is their leaf, so the cost is about
        ``O(rows + leaves * depth + len(alphas))`` and no tree is refitted.

        Parameters
        ----------
        X : array-like of shape (n_samples, n_features)
            Validation rows.
        y : array-like of shape (n_samples,)
            Their targets.
        alphas : array-like of shape (n_candidates,)
            Alphas to score, sorted ascending.

        Returns
        -------
        ndarray of shape (n_candidates,)
            Summed loss at each alpha: the number of misclassified rows for a
            classifier, the sum of squared errors for a regressor.
        """
        from .scoring import candidate_losses, leaf_counts

        held = leaf_counts(self.estimator, X, y)
        name = "error" if is_classifier(self.estimator) else "mse"
        return candidate_losses(self, held, alphas, name, totals=True)[name]


def pruning_path(
    estimator: BaseDecisionTree,
    risk: str = "impurity",
    X: np.ndarray | None = None,
    y: np.ndarray | None = None,
    sample_weight: np.ndarray | None = None,
    *,
    loss_matrix=None,
    priors="data",
    classes=None,
) -> PruningPath:
    """Weakest-link pruning path of a fitted tree under a chosen pruning risk.

    Parameters
    ----------
    estimator : DecisionTreeClassifier or DecisionTreeRegressor
        A fitted single-output tree; it is read, never modified.
    risk : {"error", "impurity", "squared_error", "cost"}, default="impurity"
        The pruning risk R(t); see :func:`node_risks`. ``"impurity"`` reproduces
        scikit-learn's ``cost_complexity_pruning_path`` (with tied alphas merged).
    X, y, sample_weight : array-like, optional
        Training rows, needed only by ``"squared_error"`` on a tree grown with a
        criterion other than squared error.
    loss_matrix : array-like of shape (n_classes, n_classes), optional
        ``L[i, j]``, the cost of predicting ``j`` when the truth is ``i`` (rows true,
        columns predicted), in ``classes`` order. Used by the ``"cost"`` risk and by
        every leaf's predicted class (:attr:`PruningPath.node_class`), whatever the risk.
    priors : "data", "equal" or array-like of shape (n_classes,), default="data"
        Class priors, in ``classes`` order; used as the loss matrix is.
    classes : array-like, optional
        The labels ``loss_matrix`` and ``priors`` are indexed by; by default the
        tree's ``classes_``.

    Returns
    -------
    PruningPath
        Distinct alphas, leaf counts and risks of every optimal subtree, and each
        node's collapse alpha.

    Examples
    --------
    >>> from sklearn.datasets import load_iris
    >>> from sklearn.tree import DecisionTreeClassifier
    >>> X, y = load_iris(return_X_y=True)
    >>> path = pruning_path(DecisionTreeClassifier(random_state=0).fit(X, y), "error")
    >>> [int(n) for n in path.n_leaves]
    [9, 7, 4, 3, 2, 1]
    """
    check_is_fitted(estimator, "tree_")
    if risk not in PRUNE_RISKS:
        raise parameter_error("risk", "pruning_path", f"one of {PRUNE_RISKS}", risk)
    node_class = node_counts = None
    tree = estimator.tree_
    if is_classifier(estimator):
        classes = np.asarray(estimator.classes_ if classes is None else classes)
        loss_matrix, priors = check_costs(classes, loss_matrix, priors)
        node_counts = tree.value[:, 0, :] * tree.weighted_n_node_samples[:, None]
        if loss_matrix is None and _is_data(priors):
            node_class = tree.value[:, 0, :].argmax(axis=1)
        else:
            node_class = node_class_costs(estimator, loss_matrix, priors, classes)[1]
    elif loss_matrix is not None or not _is_data(priors):
        raise parameter_error(
            "loss_matrix", "pruning_path", "None for a regressor (and priors 'data')", loss_matrix
        )
    r = node_risks(
        estimator,
        risk,
        X,
        y,
        sample_weight,
        loss_matrix=loss_matrix,
        priors=priors,
        classes=classes,
    )
    left = tree.children_left.astype(np.intp)
    right = tree.children_right.astype(np.intp)
    depth, parent = _depths_and_parents(left, right)
    beta = _collapse_points(left, right, parent, depth, r)
    node_alpha = beta.copy()
    order = np.argsort(depth, kind="stable")
    for d in range(1, int(depth.max()) + 1):
        nodes = order[depth[order] == d]
        node_alpha[nodes] = np.minimum(beta[nodes], node_alpha[parent[nodes]])
    internal = left != _LEAF
    node_alpha = merge_close(node_alpha)
    node_alpha[~internal] = 0.0
    alphas = np.unique(np.r_[0.0, node_alpha[internal]])

    # node t is a leaf of T_k for k in [index(A_t), index(A_parent))
    m = alphas.size
    parent_alpha = np.full(r.size, np.inf)
    parent_alpha[parent >= 0] = node_alpha[parent[parent >= 0]]
    lo = np.searchsorted(alphas, node_alpha, side="left")
    hi = np.searchsorted(alphas, parent_alpha, side="left")
    live = lo < hi
    n_leaves = np.cumsum(
        np.bincount(lo[live], minlength=m + 1) - np.bincount(hi[live], minlength=m + 1)
    )[:m]
    risks = np.cumsum(
        np.bincount(lo[live], weights=r[live], minlength=m + 1)
        - np.bincount(hi[live], weights=r[live], minlength=m + 1)
    )[:m]
    return PruningPath(
        estimator=estimator,
        risk=risk,
        alphas=alphas,
        n_leaves=n_leaves.astype(np.intp),
        risks=risks,
        node_alpha=node_alpha,
        parent=parent,
        depth=depth,
        node_risk=r,
        node_class=node_class,
        node_counts=node_counts,
        loss_matrix=loss_matrix,
        priors=priors,
        classes=classes,
    )


def _rebuild(estimator: BaseDecisionTree, keep: np.ndarray, leaf: np.ndarray) -> BaseDecisionTree:
    """A deep copy of ``estimator`` whose ``tree_`` holds only the kept nodes."""
    tree = estimator.tree_
    state = tree.__getstate__()
    nodes, values = state["nodes"], state["values"]
    old = np.flatnonzero(keep)
    new_id = np.full(keep.size, _LEAF, dtype=np.int64)
    new_id[old] = np.arange(old.size)
    kept = nodes[old].copy()
    is_leaf = leaf[old]
    kept["left_child"] = np.where(is_leaf, _LEAF, new_id[nodes["left_child"][old]])
    kept["right_child"] = np.where(is_leaf, _LEAF, new_id[nodes["right_child"][old]])
    kept["feature"][is_leaf] = -2
    kept["threshold"][is_leaf] = -2.0
    kept["missing_go_to_left"][is_leaf] = 0
    depth, _ = _depths_and_parents(kept["left_child"], kept["right_child"])
    n_classes = np.atleast_1d(np.asarray(getattr(estimator, "n_classes_", 1), dtype=np.intp))
    new_tree = Tree(tree.n_features, n_classes, tree.n_outputs)
    new_tree.__setstate__(
        {
            "max_depth": int(depth.max()),
            "node_count": int(old.size),
            "nodes": np.ascontiguousarray(kept),
            "values": np.ascontiguousarray(values[old]),
        }
    )
    pruned = copy.deepcopy(estimator)
    pruned.tree_ = new_tree
    return pruned
