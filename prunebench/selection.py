"""Choosing the cost-complexity alpha by K-fold cross-validation, the CART way.

Grow ``T_max`` on all training rows and take its distinct path alphas
``0 = a_0 < ... < a_m``; the candidates are ``c_0 = 0``,
``c_k = sqrt(a_k a_{k+1})`` and ``c_m = a_m`` (Breiman et al. 1984, §3.4.2).
Each fold grows one tree on its training rows and scores every candidate on its
held-out rows through :meth:`prunebench.pruning.PruningPath.losses`, so K folds
cost K tree fits whatever the number of candidates.

The CV curve holds, per candidate, ``mean`` (the unweighted average of the K
fold losses: by default error rate for classification, mean squared error for
regression; any loss of :data:`prunebench.scoring.SELECT_BY` by ``select_by``)
and ``se`` (the sample standard deviation of the fold losses, ddof=1, divided by
sqrt(K)).  A selection rule turns the curve into one candidate; the fixed
relative rule (``"fixed0.01"``: alpha = 0.01 R(root)) needs no curve, and
:func:`select_alphas` then grows no fold trees at all.

:func:`select_alphas` scores every (pruning risk, CV loss) combination from one
fit and one ``apply`` per fold; :func:`select_alpha` is its one-combination form.
"""

from __future__ import annotations

import re
from abc import ABC, abstractmethod
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from sklearn.base import BaseEstimator, clone, is_classifier
from sklearn.model_selection import check_cv
from sklearn.utils.class_weight import compute_sample_weight

from .costs import _is_data, check_costs
from .exceptions import parameter_error
from .losses import parse_smoothing
from .pruning import PruningPath, cart_candidates, pruning_path
from .scoring import SELECT_BY, candidate_losses, leaf_counts

__all__ = [
    "RULE_SPELLINGS",
    "AlphaSelection",
    "FixedAlphaRule",
    "MinimumRule",
    "SelectionRule",
    "StandardErrorRule",
    "parse_rule",
    "select_alpha",
    "select_alphas",
    "validation_weights",
]

# Means closer than this (relative) are a tie: fold losses summed in another
# order can differ in their last bits.
_TIE_RTOL = 1e-12


class SelectionRule(ABC):
    """A way of turning a CV curve into one candidate alpha."""

    #: the rule's spelling in study files and estimator parameters
    name: str
    #: whether the rule reads a CV curve; a sweep may skip every inner fit for
    #: rules that do not (see :class:`FixedAlphaRule`)
    needs_cv: bool = True

    @abstractmethod
    def choose(self, mean: np.ndarray, se: np.ndarray) -> int:
        """Index of the chosen candidate.

        Parameters
        ----------
        mean, se : ndarray of shape (n_candidates,)
            The CV curve, candidates sorted by ascending alpha.

        Returns
        -------
        int
            Index into the candidates.
        """

    def __repr__(self) -> str:
        return f"{type(self).__name__}({self.name!r})"

    def __eq__(self, other: object) -> bool:
        return isinstance(other, SelectionRule) and other.name == self.name

    def __hash__(self) -> int:
        return hash(self.name)


def _at_most(mean: np.ndarray, bound: float) -> np.ndarray:
    return mean <= bound + _TIE_RTOL * max(abs(bound), 1.0)


class MinimumRule(SelectionRule):
    """The candidate with the lowest mean CV loss; ties go to the larger alpha."""

    name = "min"

    def choose(self, mean: np.ndarray, se: np.ndarray) -> int:  # noqa: D102
        mean = np.asarray(mean, dtype=float)
        if np.isnan(mean).all():
            # a loss undefined on every fold (AUC of one-class data): the smallest tree
            return mean.size - 1
        mean = np.where(np.isnan(mean), np.inf, mean)
        return int(np.flatnonzero(_at_most(mean, float(mean.min())))[-1])


class StandardErrorRule(SelectionRule):
    """The k-SE rule: the largest alpha whose mean is within k SE of the minimum.

    With ``k = 1`` this is Breiman et al.'s one-standard-error rule (1984, §3.4.3):
    take the simplest subtree whose CV loss is at most the minimum mean plus ``k``
    times the standard error at the minimum.

    Parameters
    ----------
    k : float
        The multiplier, ``k >= 0``; ``k = 0`` is :class:`MinimumRule`.
    """

    def __init__(self, k: float) -> None:
        if not (isinstance(k, (int, float)) and np.isfinite(k) and k >= 0):
            raise parameter_error("k", "StandardErrorRule", "a finite number >= 0", k)
        self.k = float(k)
        self.name = f"{self.k:g}se"

    def choose(self, mean: np.ndarray, se: np.ndarray) -> int:  # noqa: D102
        best = MinimumRule().choose(mean, se)
        bound = float(mean[best] + self.k * se[best])
        if np.isnan(bound):
            return best
        mean = np.where(np.isnan(mean), np.inf, mean)
        return int(np.flatnonzero(_at_most(mean, bound))[-1])


class FixedAlphaRule(SelectionRule):
    """A fixed relative alpha: ``alpha = c * R(root)`` of the grown tree, no CV.

    ``R(root)`` is the root's risk under the path's pruning risk (the
    misclassification rate of the majority class for ``"error"``, the root's
    impurity for ``"impurity"``, the target's variance for ``"squared_error"``),
    so one ``c`` means the same trade-off on every data set. Spelled
    ``"fixed<c>"``, e.g. ``"fixed0.01"``.

    Parameters
    ----------
    c : float
        The multiplier, ``c >= 0``.
    """

    needs_cv = False

    def __init__(self, c: float) -> None:
        if not (isinstance(c, (int, float)) and np.isfinite(c) and c >= 0):
            raise parameter_error("c", "FixedAlphaRule", "a finite number >= 0", c)
        self.c = float(c)
        self.name = f"fixed{self.c:g}"

    def alpha(self, path: PruningPath) -> float:
        """The alpha this rule gives on a path: ``c`` times the root's risk."""
        return self.c * float(path.node_risk[0])

    def choose(self, mean: np.ndarray, se: np.ndarray) -> int:  # noqa: D102
        raise parameter_error(
            "rule", "FixedAlphaRule.choose", "a rule that reads a CV curve", self.name
        )


_SE_SPELLING = re.compile(r"^(\d+(?:\.\d+)?)se$")
_FIXED_SPELLING = re.compile(r"^fixed(\d+(?:\.\d+)?(?:e-?\d+)?)$")
#: How selection rules are spelled, for messages.
RULE_SPELLINGS = (
    '"min", a k-SE rule spelled like "1se" or "0.5se", or a fixed rule like "fixed0.01"'
)


def parse_rule(rule: str | SelectionRule) -> SelectionRule:
    """The selection rule a spelling names: ``"min"``, ``"1se"``, ``"0.5se"``, ``"fixed0.01"``.

    Parameters
    ----------
    rule : str or SelectionRule
        A spelling, or a rule (returned as is).

    Returns
    -------
    SelectionRule
    """
    if isinstance(rule, SelectionRule):
        return rule
    if isinstance(rule, str):
        if rule == "min":
            return MinimumRule()
        match = _SE_SPELLING.match(rule)
        if match:
            return StandardErrorRule(float(match.group(1)))
        match = _FIXED_SPELLING.match(rule)
        if match:
            return FixedAlphaRule(float(match.group(1)))
    raise parameter_error("rule", "parse_rule", RULE_SPELLINGS, rule)


@dataclass
class AlphaSelection:
    """Everything the CV choice of alpha produced.

    Attributes
    ----------
    tree : DecisionTreeClassifier or DecisionTreeRegressor
        ``T_max``, grown on all training rows.
    path : PruningPath
        Its pruning path.
    candidates : ndarray of shape (n_candidates,)
        The CART candidate alphas.
    fold_losses : ndarray of shape (n_folds, n_candidates)
        Mean loss of every candidate on every fold's held-out rows (no rows
        when no rule needed CV).
    fold_sizes : ndarray of shape (n_folds,)
        Held-out rows per fold.
    curve : DataFrame
        Columns ``alpha``, ``n_leaves``, ``mean``, ``se``: one row per candidate.
    chosen : dict
        Rule name -> index of the chosen candidate (rules that read the curve).
    n_fits : int
        Trees grown, ``T_max`` included.
    risk : str
        The pruning risk of the paths.
    select_by : str
        The CV loss of the curve.
    """

    tree: BaseEstimator
    path: PruningPath
    candidates: np.ndarray
    fold_losses: np.ndarray
    fold_sizes: np.ndarray
    curve: pd.DataFrame
    chosen: dict[str, int] = field(default_factory=dict)
    n_fits: int = 0
    risk: str = "impurity"
    select_by: str = "error"

    def alpha(self, rule: str | SelectionRule) -> float:
        """The alpha a rule chose (a fixed rule's alpha on :attr:`path`)."""
        rule = parse_rule(rule)
        if not rule.needs_cv:
            return rule.alpha(self.path)
        if rule.name not in self.chosen:
            self.chosen[rule.name] = rule.choose(
                self.curve["mean"].to_numpy(), self.curve["se"].to_numpy()
            )
        return float(self.candidates[self.chosen[rule.name]])


def _subset(a, rows):
    return a.iloc[rows] if hasattr(a, "iloc") else a[rows]


def validation_weights(
    y,
    classes,
    sample_weight=None,
    class_weight=None,
    priors="data",
) -> np.ndarray | None:
    """Row weights of a fold's held-out loss, weighted as the trees were grown.

    Parameters
    ----------
    y : array-like of shape (n_samples,)
        The held-out labels (or targets, for a regressor: only ``sample_weight``
        applies then).
    classes : array-like or None
        The class labels (``None`` for a regressor).
    sample_weight : array-like of shape (n_samples,), optional
        The held-out rows' sample weights.
    class_weight : dict, "balanced" or None
        The trees' ``class_weight``; ``"balanced"`` is recomputed on the held-out
        rows, so the weighted error is the balanced error ``1 - mean recall``.
    priors : "data", "equal" or ndarray
        Class priors in ``classes`` order; other than ``"data"``, each class's
        rows together weigh its prior (per-class mean losses mixed by the priors,
        as Breiman et al. 1984, ch. 4, estimate a misclassification cost).

    Returns
    -------
    ndarray or None
        ``None`` when every row weighs the same, so unweighted losses keep their
        exact arithmetic.
    """
    if sample_weight is None and class_weight is None and _is_data(priors):
        return None
    y = np.asarray(y)
    w = np.ones(y.size) if sample_weight is None else np.asarray(sample_weight, dtype=float)
    if classes is None:
        return w
    if class_weight is not None:
        w = w * compute_sample_weight(class_weight, y)
    if not _is_data(priors):
        classes = np.asarray(classes)
        pi = np.full(classes.size, 1.0 / classes.size) if isinstance(priors, str) else priors
        yi = np.searchsorted(classes, y)
        per_class = np.bincount(yi, weights=w, minlength=classes.size)
        present = per_class > 0
        factor = np.zeros(classes.size)
        factor[present] = np.asarray(pi, float)[present] / per_class[present]
        w = w * factor[yi]
    return w


def _curve_stats(fold_losses: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    k = fold_losses.shape[0]
    if k == 0:
        nan = np.full(fold_losses.shape[1], np.nan)
        return nan, nan.copy()
    if np.isnan(fold_losses).any():
        # a fold where a loss is undefined (AUC with one class held out) is left out
        ok = ~np.isnan(fold_losses)
        n = ok.sum(axis=0)
        filled = np.where(ok, fold_losses, 0.0)
        with np.errstate(invalid="ignore", divide="ignore"):
            mean = filled.sum(axis=0) / n
            dev = np.where(ok, fold_losses - mean, 0.0)
            var = (dev**2).sum(axis=0) / (n - 1)
            se = np.where(n > 1, np.sqrt(var / n), np.where(n == 1, 0.0, np.nan))
        return mean, se
    mean = fold_losses.mean(axis=0)
    se = fold_losses.std(axis=0, ddof=1) / np.sqrt(k) if k > 1 else np.zeros_like(mean)
    return mean, se


def select_alphas(
    tree: BaseEstimator,
    X,
    y,
    *,
    cv=10,
    risks: tuple[str, ...] | list[str] = ("impurity",),
    select_by: tuple[str, ...] | list[str] | None = None,
    rules: list[str | SelectionRule] | tuple = ("1se",),
    sample_weight=None,
    loss_matrix=None,
    priors="data",
    smoothing: str | None = None,
    fitted: BaseEstimator | None = None,
    before_fit=None,
) -> dict[tuple[str, str], AlphaSelection]:
    """Choose alpha by K-fold CV for every (pruning risk, CV loss) pair at once.

    ``T_max`` and every fold's tree are grown once; each fold's held-out rows are
    applied to its tree once (:func:`prunebench.scoring.leaf_counts`) and serve
    every risk's path and every loss (:func:`prunebench.scoring.candidate_losses`).
    When no rule reads a CV curve (only fixed rules), no fold tree is grown.

    Parameters
    ----------
    tree : DecisionTreeClassifier or DecisionTreeRegressor
        Unfitted template; it is cloned, never modified. Its ``class_weight``
        weights the held-out losses as it weights the growing.
    X : array-like of shape (n_samples, n_features)
    y : array-like of shape (n_samples,)
    cv : int, cross-validation splitter or iterable, default=10
        As in scikit-learn: an int means (stratified, for a classifier) K-fold
        without shuffling.
    risks : sequence of str, default=("impurity",)
        Pruning risks (:data:`prunebench.pruning.PRUNE_RISKS`).
    select_by : sequence of str, optional
        CV losses (:data:`prunebench.scoring.SELECT_BY`); by default ``("error",)``
        for a classifier and ``("mse",)`` for a regressor.
    rules : sequence of str or SelectionRule, default=("1se",)
        Every rule is applied to every curve.
    sample_weight : array-like of shape (n_samples,), optional
        Used to grow the trees and to weight the held-out losses.
    loss_matrix : array-like of shape (n_classes, n_classes), optional
        In the order of ``np.unique(y)`` (rows: true class, columns: predicted);
        used by the ``"cost"`` risk, by every leaf's predicted class and by the
        ``"cost"`` loss.
    priors : "data", "equal" or array-like of shape (n_classes,), default="data"
        Class priors in the same order; used by the paths, the predicted classes
        and the held-out weights (:func:`validation_weights`).
    smoothing : None, "laplace" or "m<m>", optional
        Leaf-probability smoothing for the probability losses.
    fitted : estimator, optional
        ``T_max`` already grown on exactly these rows, to save one fit.
    before_fit : callable, optional
        Called before every fold's fit (a study's time limit checks its deadline here).

    Returns
    -------
    dict of (risk, select_by) to AlphaSelection
        The selections share ``T_max``, its paths and the fold trees; ``n_fits``
        of each counts the fits of the whole call.
    """
    classifier = is_classifier(tree)
    family = "classification" if classifier else "regression"
    if select_by is None:
        select_by = ("error",) if classifier else ("mse",)
    select_by = tuple(select_by)
    for name in select_by:
        if name not in SELECT_BY[family]:
            raise parameter_error(
                "select_by", "select_alphas", f"one of {SELECT_BY[family]} for {family}", name
            )
    parse_smoothing(smoothing)
    classes = np.unique(y) if classifier else None
    if classifier:
        loss_matrix, priors = check_costs(classes, loss_matrix, priors, "select_alphas")
    elif loss_matrix is not None or not _is_data(priors):
        raise parameter_error(
            "loss_matrix", "select_alphas", "None for a regressor (and priors 'data')", loss_matrix
        )
    costs = {"loss_matrix": loss_matrix, "priors": priors, "classes": classes}
    if not classifier:
        costs = {}
    parsed = [parse_rule(r) for r in rules]
    n_fits = 0
    if fitted is None:
        fitted = clone(tree).fit(X, y, sample_weight=sample_weight)
        n_fits += 1
    paths = {r: pruning_path(fitted, r, X, y, sample_weight, **costs) for r in risks}
    candidates = {r: cart_candidates(paths[r].alphas) for r in risks}
    fold_losses = {(r, s): [] for r in risks for s in select_by}
    sizes = []
    if any(rule.needs_cv for rule in parsed):
        class_weight = getattr(tree, "class_weight", None) if classifier else None
        splitter = check_cv(cv, y, classifier=classifier)
        for train, test in splitter.split(X, y):
            sw = None if sample_weight is None else np.asarray(sample_weight)[train]
            X_train, y_train = _subset(X, train), _subset(y, train)
            y_test = _subset(y, test)
            if before_fit is not None:
                before_fit()
            fold_tree = clone(tree).fit(X_train, y_train, sample_weight=sw)
            n_fits += 1
            held_w = validation_weights(
                y_test,
                classes,
                None if sample_weight is None else np.asarray(sample_weight)[test],
                class_weight,
                priors if classifier else "data",
            )
            held = leaf_counts(fold_tree, _subset(X, test), y_test, held_w, classes)
            for r in risks:
                fold_path = pruning_path(fold_tree, r, X_train, y_train, sw, **costs)
                scored = candidate_losses(
                    fold_path, held, candidates[r], select_by, smoothing=smoothing
                )
                for s in select_by:
                    fold_losses[(r, s)].append(scored[s])
            sizes.append(len(test))
    out = {}
    for (r, s), rows in fold_losses.items():
        fl = np.vstack(rows) if rows else np.empty((0, candidates[r].size))
        mean, se = _curve_stats(fl)
        path = paths[r]
        n_leaves = path.n_leaves[np.searchsorted(path.alphas, candidates[r], side="right") - 1]
        curve = pd.DataFrame({"alpha": candidates[r], "n_leaves": n_leaves, "mean": mean, "se": se})
        chosen = {rule.name: rule.choose(mean, se) for rule in parsed if rule.needs_cv}
        out[(r, s)] = AlphaSelection(
            tree=fitted,
            path=path,
            candidates=candidates[r],
            fold_losses=fl,
            fold_sizes=np.asarray(sizes, dtype=int),
            curve=curve,
            chosen=chosen,
            n_fits=n_fits,
            risk=r,
            select_by=s,
        )
    return out


def select_alpha(
    tree: BaseEstimator,
    X,
    y,
    *,
    cv=10,
    risk: str = "impurity",
    rules: list[str | SelectionRule] | tuple = ("1se",),
    sample_weight=None,
    fitted: BaseEstimator | None = None,
    before_fit=None,
    select_by: str | None = None,
    loss_matrix=None,
    priors="data",
    smoothing: str | None = None,
) -> AlphaSelection:
    """Choose the cost-complexity alpha of a tree by K-fold CV over CART's candidates.

    The one-combination form of :func:`select_alphas`.

    Parameters
    ----------
    tree : DecisionTreeClassifier or DecisionTreeRegressor
        Unfitted template; it is cloned, never modified.
    X : array-like of shape (n_samples, n_features)
    y : array-like of shape (n_samples,)
    cv : int, cross-validation splitter or iterable, default=10
        As in scikit-learn: an int means (stratified, for a classifier) K-fold
        without shuffling.
    risk : {"error", "impurity", "squared_error", "cost"}, default="impurity"
        Pruning risk of the path (see :func:`prunebench.pruning.node_risks`).
    rules : sequence of str or SelectionRule, default=("1se",)
        Every rule is applied to the same curve.
    sample_weight : array-like of shape (n_samples,), optional
        Used to grow the trees and to weight the held-out losses.
    fitted : estimator, optional
        ``T_max`` already grown on exactly these rows, to save one fit.
    before_fit : callable, optional
        Called before every fold's fit (a study's time limit checks its deadline here).
    select_by : str, optional
        The CV loss (:data:`prunebench.scoring.SELECT_BY`); by default ``"error"``
        for a classifier, ``"mse"`` for a regressor.
    loss_matrix, priors, smoothing
        As in :func:`select_alphas`.

    Returns
    -------
    AlphaSelection
    """
    if select_by is not None and not isinstance(select_by, str):
        raise parameter_error("select_by", "select_alpha", "a string", select_by)
    result = select_alphas(
        tree,
        X,
        y,
        cv=cv,
        risks=(risk,),
        select_by=None if select_by is None else (select_by,),
        rules=rules,
        sample_weight=sample_weight,
        loss_matrix=loss_matrix,
        priors=priors,
        smoothing=smoothing,
        fitted=fitted,
        before_fit=before_fit,
    )
    return next(iter(result.values()))
