"""scikit-learn estimators that grow a tree, then prune it at a CV-chosen alpha.

``PrunedTreeClassifier`` and ``PrunedTreeRegressor`` grow ``T_max`` with the
usual growth settings, compute its weakest-link path under ``prune_risk``, choose
alpha by K-fold cross-validation of the loss ``select_by`` with ``rule`` (or take a
fixed relative alpha, ``rule="fixed0.01"``, with no CV), and predict with the
pruned tree.  The classifier also takes CART's loss matrix and priors (Breiman et
al. 1984, ch. 4), used by the path, the CV loss and the prediction alike, and an
opt-in smoothing of its leaf probabilities.
"""

from __future__ import annotations

import numbers

import numpy as np
from sklearn.base import BaseEstimator, ClassifierMixin, RegressorMixin
from sklearn.tree import DecisionTreeClassifier, DecisionTreeRegressor
from sklearn.utils.multiclass import check_classification_targets
from sklearn.utils.validation import check_is_fitted, validate_data

from .costs import check_costs
from .exceptions import parameter_error
from .losses import leaf_probabilities, parse_smoothing
from .scoring import SELECT_BY
from .selection import RULE_SPELLINGS, parse_rule, select_alpha

__all__ = ["PrunedTreeClassifier", "PrunedTreeRegressor"]

_GROWTH = (
    "criterion",
    "splitter",
    "max_depth",
    "min_samples_split",
    "min_samples_leaf",
    "max_features",
    "max_leaf_nodes",
    "min_impurity_decrease",
    "random_state",
)


def _positive_int(minimum: int):
    def check(v):
        return isinstance(v, numbers.Integral) and not isinstance(v, bool) and v >= minimum

    return check, f"an int >= {minimum}"


def _cv_ok(v) -> bool:
    if isinstance(v, numbers.Integral) and not isinstance(v, bool):
        return v >= 2
    return not isinstance(v, str) and (hasattr(v, "split") or hasattr(v, "__iter__"))


class _PrunedTree(BaseEstimator):
    """Shared machinery; use :class:`PrunedTreeClassifier` or :class:`PrunedTreeRegressor`."""

    _tree_class: type
    _risks: tuple[str, ...]
    _family: str

    def _constraints(self) -> dict:
        # every parameter's constraint in one table, checked in one place; growth
        # settings are left to the tree, whose own checks name them the same way
        int1, int1_text = _positive_int(1)
        return {
            "min_samples_leaf": (
                lambda v: (int1(v)) or (isinstance(v, float) and 0 < v < 1),
                "an int >= 1 or a float in (0, 1)",
            ),
            "max_depth": (lambda v: v is None or int1(v), f"None or {int1_text}"),
            "prune_risk": (lambda v: v in self._risks, f"one of {self._risks}"),
            "cv": (_cv_ok, "an int >= 2, a cross-validation splitter or an iterable of splits"),
            "select_by": (
                lambda v: isinstance(v, str) and v in SELECT_BY[self._family],
                f"one of {SELECT_BY[self._family]}",
            ),
        }

    def _check_params(self) -> None:
        owner = type(self).__name__
        for name, (ok, expected) in self._constraints().items():
            value = getattr(self, name)
            if not ok(value):
                raise parameter_error(name, owner, expected, value)
        try:
            self._rule = parse_rule(self.rule)
        except ValueError:
            raise parameter_error("rule", owner, RULE_SPELLINGS, self.rule) from None
        self._costs = {}
        if self._family == "classification":
            try:
                parse_smoothing(self.smoothing)
            except ValueError:
                raise parameter_error(
                    "smoothing", owner, 'None, "laplace" or an m-estimate like "m2"', self.smoothing
                ) from None
            loss_matrix, priors = check_costs(self.classes_, self.loss_matrix, self.priors, owner)
            self._costs = {"loss_matrix": loss_matrix, "priors": self.priors}
            if self.select_by == "average_precision" and len(self.classes_) != 2:
                raise parameter_error(
                    "select_by", owner, "'average_precision' only for two classes", self.select_by
                )

    def _grow_template(self):
        return self._tree_class(**{name: getattr(self, name) for name in self._growth_params()})

    def _growth_params(self) -> tuple[str, ...]:
        return _GROWTH

    def _fit(self, X, y, sample_weight):
        self._check_params()
        selection = select_alpha(
            self._grow_template(),
            X,
            y,
            cv=self.cv,
            risk=self.prune_risk,
            rules=[self._rule],
            sample_weight=sample_weight,
            select_by=self.select_by,
            smoothing=getattr(self, "smoothing", None),
            **self._costs,
        )
        self.selection_ = selection
        self.full_tree_ = selection.tree
        self.path_ = selection.path
        self.cv_curve_ = selection.curve
        self.ccp_alpha_ = selection.alpha(self._rule)
        self.pruned_tree_ = selection.path.prune(self.ccp_alpha_)
        # node i of the pruned tree is node _kept_nodes[i] of the full tree
        self._kept_nodes = np.flatnonzero(selection.path.node_mask(self.ccp_alpha_))
        self.tree_ = self.pruned_tree_.tree_
        self.n_outputs_ = 1
        return self

    def _full_tree_nodes(self, X) -> np.ndarray:
        """The full tree's node of every row's pruned-tree leaf."""
        return self._kept_nodes[self.pruned_tree_.apply(X)]

    def _validated(self, X):
        check_is_fitted(self, "pruned_tree_")
        return validate_data(self, X, reset=False, dtype=np.float32, ensure_all_finite="allow-nan")

    def predict(self, X):
        """Predict with the pruned tree.

        Parameters
        ----------
        X : array-like of shape (n_samples, n_features)

        Returns
        -------
        ndarray of shape (n_samples,)
        """
        X = self._validated(X)
        return self.pruned_tree_.predict(X)

    def apply(self, X):
        """Index of the pruned tree's leaf each row lands in.

        Parameters
        ----------
        X : array-like of shape (n_samples, n_features)

        Returns
        -------
        ndarray of shape (n_samples,)
        """
        X = self._validated(X)
        return self.pruned_tree_.apply(X)

    def decision_path(self, X):
        """The pruned tree's nodes on each row's path, as a sparse indicator matrix."""
        X = self._validated(X)
        return self.pruned_tree_.decision_path(X)

    def get_n_leaves(self) -> int:
        """Leaves of the pruned tree."""
        check_is_fitted(self, "pruned_tree_")
        return int(self.pruned_tree_.get_n_leaves())

    def get_depth(self) -> int:
        """Depth of the pruned tree."""
        check_is_fitted(self, "pruned_tree_")
        return int(self.pruned_tree_.get_depth())

    def __sklearn_tags__(self):
        tags = super().__sklearn_tags__()
        tags.input_tags.allow_nan = True
        return tags


class PrunedTreeClassifier(ClassifierMixin, _PrunedTree):
    """Decision tree pruned by weakest link at an alpha chosen by K-fold CV.

    Parameters
    ----------
    criterion : {"gini", "entropy", "log_loss"}, default="gini"
        Impurity used to grow the tree.
    splitter, max_depth, min_samples_split, min_samples_leaf, max_features, \
max_leaf_nodes, min_impurity_decrease, class_weight, random_state
        Growth settings, passed to :class:`sklearn.tree.DecisionTreeClassifier`
        for ``T_max`` and for every fold's tree.
    prune_risk : {"error", "impurity", "cost"}, default="error"
        Risk R(t) of the pruning path: resubstitution misclassification (the
        classic CART choice), the growing criterion's impurity (scikit-learn's
        ``ccp_alpha`` path), or
        ``"cost"``: the expected cost under ``loss_matrix`` and ``priors``,
        ``min_j sum_i L(i, j) pi_i N_i(t) / N_i`` (Breiman et al. 1984, ch. 4).
    cv : int, splitter or iterable, default=10
        Folds for choosing alpha; an int means stratified K-fold without shuffling.
    rule : str or SelectionRule, default="1se"
        ``"min"``, a k-SE rule such as ``"1se"`` or ``"0.5se"``, or a fixed
        relative alpha such as ``"fixed0.01"`` (alpha = 0.01 R(root), no CV).
    select_by : {"error", "cost", "brier", "log_loss", "auc", "average_precision"}, \
default="error"
        The held-out loss the CV curve averages: misclassification rate, expected
        cost under ``loss_matrix``, Brier score (binary form for two classes), log
        loss (clipped at 1e-15), 1 - ROC AUC (one-vs-rest macro for three or more
        classes) or 1 - average precision (two classes). When the trees are grown
        with ``sample_weight`` or ``class_weight``, the held-out rows are weighted
        the same way (``class_weight="balanced"`` with ``"error"`` gives the
        balanced error).
    loss_matrix : array-like of shape (n_classes, n_classes), default=None
        ``L[i, j]``: the cost of predicting ``classes_[j]`` when the truth is
        ``classes_[i]`` (rows true, columns predicted); zero diagonal,
        non-negative. ``None`` is 0-1 loss. Used by the ``"cost"`` risk, the
        ``"cost"`` CV loss and every leaf's predicted class.
    priors : "data", "equal" or array-like of shape (n_classes,), default="data"
        Class priors in ``classes_`` order. Other than ``"data"`` they re-weight
        the classes in the path's risk, the leaves' predicted classes and the
        held-out losses; they replace the class shares, so they override
        ``class_weight`` there (the trees are still grown with ``class_weight``).
    smoothing : None, "laplace" or "m<m>", default=None
        Opt-in smoothing of the leaf probabilities (Laplace, or the m-estimate
        towards the training class shares; Provost & Domingos 2003) for
        ``predict_proba`` and the probability CV losses. ``None`` keeps the raw
        leaf fractions, as scikit-learn's trees.

    Attributes
    ----------
    ccp_alpha_ : float
        The chosen alpha.
    path_ : PruningPath
        Pruning path of the full tree.
    cv_curve_ : DataFrame
        Columns ``alpha``, ``n_leaves``, ``mean`` (mean fold loss, ``select_by``)
        and ``se`` (fold standard deviation / sqrt(K)), one row per candidate
        alpha (NaN ``mean`` and ``se`` for a fixed rule, which fits no folds).
    full_tree_ : DecisionTreeClassifier
        ``T_max`` grown on all rows.
    pruned_tree_ : DecisionTreeClassifier
        The pruned tree, an ordinary fitted scikit-learn tree (works with
        ``sklearn.tree.plot_tree`` and ``export_text``).
    tree_ : sklearn.tree._tree.Tree
        ``pruned_tree_.tree_``.
    classes_ : ndarray
        Class labels.
    selection_ : AlphaSelection
        Fold losses and the rest of the CV choice.

    Examples
    --------
    >>> from sklearn.datasets import load_breast_cancer
    >>> X, y = load_breast_cancer(return_X_y=True)
    >>> model = PrunedTreeClassifier(random_state=0).fit(X, y)
    >>> bool(model.get_n_leaves() < model.full_tree_.get_n_leaves())
    True
    """

    _tree_class = DecisionTreeClassifier
    _risks = ("error", "impurity", "cost")
    _family = "classification"

    def __init__(
        self,
        *,
        criterion: str = "gini",
        splitter: str = "best",
        max_depth: int | None = None,
        min_samples_split: int | float = 2,
        min_samples_leaf: int | float = 1,
        max_features=None,
        max_leaf_nodes: int | None = None,
        min_impurity_decrease: float = 0.0,
        class_weight=None,
        random_state=None,
        prune_risk: str = "error",
        cv=10,
        rule="1se",
        select_by: str = "error",
        loss_matrix=None,
        priors="data",
        smoothing: str | None = None,
    ) -> None:
        self.criterion = criterion
        self.splitter = splitter
        self.max_depth = max_depth
        self.min_samples_split = min_samples_split
        self.min_samples_leaf = min_samples_leaf
        self.max_features = max_features
        self.max_leaf_nodes = max_leaf_nodes
        self.min_impurity_decrease = min_impurity_decrease
        self.class_weight = class_weight
        self.random_state = random_state
        self.prune_risk = prune_risk
        self.cv = cv
        self.rule = rule
        self.select_by = select_by
        self.loss_matrix = loss_matrix
        self.priors = priors
        self.smoothing = smoothing

    def _growth_params(self) -> tuple[str, ...]:
        return (*_GROWTH, "class_weight")

    def fit(self, X, y, sample_weight=None) -> PrunedTreeClassifier:
        """Grow the full tree, choose alpha by cross-validation, and prune.

        Parameters
        ----------
        X : array-like of shape (n_samples, n_features)
        y : array-like of shape (n_samples,)
        sample_weight : array-like of shape (n_samples,), optional
            Weights for growing the trees.

        Returns
        -------
        self : PrunedTreeClassifier
        """
        X, y = validate_data(self, X, y, dtype=np.float32, ensure_all_finite="allow-nan")
        check_classification_targets(y)
        self.classes_ = np.unique(y)
        self.n_classes_ = len(self.classes_)
        return self._fit(X, y, sample_weight)

    def _uses_costs(self) -> bool:
        return self.loss_matrix is not None or not (
            isinstance(self.priors, str) and self.priors == "data"
        )

    def predict(self, X):
        """Predict with the pruned tree.

        Each leaf predicts its majority class, or under ``loss_matrix`` or
        ``priors`` the class of least expected cost (``path_.node_class``), which
        ``pruned_tree_.predict`` (a plain scikit-learn tree) does not know.

        Parameters
        ----------
        X : array-like of shape (n_samples, n_features)

        Returns
        -------
        ndarray of shape (n_samples,)
        """
        X = self._validated(X)
        if not self._uses_costs():
            return self.pruned_tree_.predict(X)
        return self.classes_[self.path_.node_class[self._full_tree_nodes(X)]]

    def predict_proba(self, X):
        """Class probabilities of the pruned tree's leaves (smoothed if asked).

        Parameters
        ----------
        X : array-like of shape (n_samples, n_features)

        Returns
        -------
        ndarray of shape (n_samples, n_classes)
        """
        X = self._validated(X)
        if self.smoothing is None:
            return self.pruned_tree_.predict_proba(X)
        proba = leaf_probabilities(self.path_.node_counts, self.smoothing)
        return proba[self._full_tree_nodes(X)]

    def predict_log_proba(self, X):
        """Logarithm of :meth:`predict_proba`."""
        with np.errstate(divide="ignore"):
            return np.log(self.predict_proba(X))


class PrunedTreeRegressor(RegressorMixin, _PrunedTree):
    """Regression tree pruned by weakest link at an alpha chosen by K-fold CV.

    Parameters
    ----------
    criterion : {"squared_error", "friedman_mse", "absolute_error", "poisson"}, \
default="squared_error"
        Criterion used to grow the tree.
    splitter, max_depth, min_samples_split, min_samples_leaf, max_features, \
max_leaf_nodes, min_impurity_decrease, random_state
        Growth settings, passed to :class:`sklearn.tree.DecisionTreeRegressor`.
    prune_risk : {"squared_error", "impurity"}, default="squared_error"
        Risk R(t) of the pruning path: the node's squared error about its
        prediction, or the growing criterion's impurity (the same thing for a
        squared-error tree).
    cv : int, splitter or iterable, default=10
        Folds for choosing alpha; an int means K-fold without shuffling.
    rule : str or SelectionRule, default="1se"
        ``"min"``, a k-SE rule such as ``"1se"`` or ``"0.5se"``, or a fixed
        relative alpha such as ``"fixed0.01"`` (alpha = 0.01 R(root), no CV).
    select_by : {"mse"}, default="mse"
        The held-out loss of the CV curve (weighted by ``sample_weight`` when the
        trees are grown with weights).

    Attributes
    ----------
    ccp_alpha_ : float
        The chosen alpha.
    path_ : PruningPath
        Pruning path of the full tree.
    cv_curve_ : DataFrame
        Columns ``alpha``, ``n_leaves``, ``mean`` (mean fold MSE) and ``se``.
    full_tree_, pruned_tree_ : DecisionTreeRegressor
        The full and the pruned tree.
    tree_ : sklearn.tree._tree.Tree
        ``pruned_tree_.tree_``.
    selection_ : AlphaSelection
        Fold losses and the rest of the CV choice.
    """

    _tree_class = DecisionTreeRegressor
    _risks = ("squared_error", "impurity")
    _family = "regression"

    def __init__(
        self,
        *,
        criterion: str = "squared_error",
        splitter: str = "best",
        max_depth: int | None = None,
        min_samples_split: int | float = 2,
        min_samples_leaf: int | float = 1,
        max_features=None,
        max_leaf_nodes: int | None = None,
        min_impurity_decrease: float = 0.0,
        random_state=None,
        prune_risk: str = "squared_error",
        cv=10,
        rule="1se",
        select_by: str = "mse",
    ) -> None:
        self.criterion = criterion
        self.splitter = splitter
        self.max_depth = max_depth
        self.min_samples_split = min_samples_split
        self.min_samples_leaf = min_samples_leaf
        self.max_features = max_features
        self.max_leaf_nodes = max_leaf_nodes
        self.min_impurity_decrease = min_impurity_decrease
        self.random_state = random_state
        self.prune_risk = prune_risk
        self.cv = cv
        self.rule = rule
        self.select_by = select_by

    def fit(self, X, y, sample_weight=None) -> PrunedTreeRegressor:
        """Grow the full tree, choose alpha by cross-validation, and prune.

        Parameters
        ----------
        X : array-like of shape (n_samples, n_features)
        y : array-like of shape (n_samples,)
        sample_weight : array-like of shape (n_samples,), optional
            Weights for growing the trees.

        Returns
        -------
        self : PrunedTreeRegressor
        """
        X, y = validate_data(
            self, X, y, dtype=np.float32, ensure_all_finite="allow-nan", y_numeric=True
        )
        return self._fit(X, y, sample_weight)
