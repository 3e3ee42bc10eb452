"""Choosing the cost-complexity alpha by K-fold cross-validation, the CART way.

Grow ``T_max`` on all training rows and take its distinct path alphas
``0 = a_0 < ... < a_m``; the candidates are ``c_0 = 0``,
``c_k = sqrt(a_k a_{k+1})`` and ``c_m = a_m`` (Breiman et al. 1984, §3.4.2).
Each fold grows one tree on its training rows and scores every candidate on its
held-out rows through :meth:`prunebench.pruning.PruningPath.losses`, so K folds
cost K tree fits whatever the number of candidates.

The CV curve holds, per candidate, ``mean`` (the unweighted average of the K
fold losses: error rate for classification, mean squared error for regression)
and ``se`` (the sample standard deviation of the fold losses, ddof=1, divided by
sqrt(K)).  A selection rule turns the curve into one candidate.
"""

from __future__ import annotations

import re
from abc import ABC, abstractmethod
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from sklearn.base import BaseEstimator, clone, is_classifier
from sklearn.model_selection import check_cv

from .exceptions import parameter_error
from .pruning import PruningPath, cart_candidates, pruning_path

__all__ = [
    "AlphaSelection",
    "MinimumRule",
    "SelectionRule",
    "StandardErrorRule",
    "parse_rule",
    "select_alpha",
]

# Means closer than this (relative) are a tie: fold losses summed in another
# order can differ in their last bits.
_TIE_RTOL = 1e-12


class SelectionRule(ABC):
    """A way of turning a CV curve into one candidate alpha."""

    #: the rule's spelling in study files and estimator parameters
    name: str

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
        return int(np.flatnonzero(_at_most(mean, bound))[-1])


_SE_SPELLING = re.compile(r"^(\d+(?:\.\d+)?)se$")


def parse_rule(rule: str | SelectionRule) -> SelectionRule:
    """The selection rule a spelling names: ``"min"``, ``"1se"``, ``"0.5se"``, ...

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
    raise parameter_error(
        "rule", "parse_rule", '"min" or a k-SE rule spelled like "1se" or "0.5se"', rule
    )


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
        Mean loss of every candidate on every fold's held-out rows.
    fold_sizes : ndarray of shape (n_folds,)
        Held-out rows per fold.
    curve : DataFrame
        Columns ``alpha``, ``n_leaves``, ``mean``, ``se``: one row per candidate.
    chosen : dict
        Rule name -> index of the chosen candidate.
    n_fits : int
        Trees grown, ``T_max`` included.
    """

    tree: BaseEstimator
    path: PruningPath
    candidates: np.ndarray
    fold_losses: np.ndarray
    fold_sizes: np.ndarray
    curve: pd.DataFrame
    chosen: dict[str, int] = field(default_factory=dict)
    n_fits: int = 0

    def alpha(self, rule: str | SelectionRule) -> float:
        """The alpha a rule chose."""
        return float(self.candidates[self.chosen[parse_rule(rule).name]])


def _subset(a, rows):
    return a.iloc[rows] if hasattr(a, "iloc") else a[rows]


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
) -> AlphaSelection:
    """Choose the cost-complexity alpha of a tree by K-fold CV over CART's candidates.

    Parameters
    ----------
    tree : DecisionTreeClassifier or DecisionTreeRegressor
        Unfitted template; it is cloned, never modified.
    X : array-like of shape (n_samples, n_features)
    y : array-like of shape (n_samples,)
    cv : int, cross-validation splitter or iterable, default=10
        As in scikit-learn: an int means (stratified, for a classifier) K-fold
        without shuffling.
    risk : {"error", "impurity", "squared_error"}, default="impurity"
        Pruning risk of the path (see :func:`prunebench.pruning.node_risks`).
    rules : sequence of str or SelectionRule, default=("1se",)
        Every rule is applied to the same curve.
    sample_weight : array-like of shape (n_samples,), optional
        Used to grow the trees; validation losses are unweighted.
    fitted : estimator, optional
        ``T_max`` already grown on exactly these rows, to save one fit.
    before_fit : callable, optional
        Called before every fold's fit (a study's time limit checks its deadline here).

    Returns
    -------
    AlphaSelection
    """
    n_fits = 0
    if fitted is None:
        fitted = clone(tree).fit(X, y, sample_weight=sample_weight)
        n_fits += 1
    path = pruning_path(fitted, risk, X, y, sample_weight)
    candidates = cart_candidates(path.alphas)
    splitter = check_cv(cv, y, classifier=is_classifier(tree))
    losses, sizes = [], []
    for train, test in splitter.split(X, y):
        sw = None if sample_weight is None else np.asarray(sample_weight)[train]
        X_train, y_train = _subset(X, train), _subset(y, train)
        if before_fit is not None:
            before_fit()
        fold_tree = clone(tree).fit(X_train, y_train, sample_weight=sw)
        n_fits += 1
        fold_path = pruning_path(fold_tree, risk, X_train, y_train, sw)
        losses.append(fold_path.losses(_subset(X, test), _subset(y, test), candidates) / len(test))
        sizes.append(len(test))
    fold_losses = np.vstack(losses)
    mean = fold_losses.mean(axis=0)
    k = fold_losses.shape[0]
    se = fold_losses.std(axis=0, ddof=1) / np.sqrt(k) if k > 1 else np.zeros_like(mean)
    n_leaves = path.n_leaves[np.searchsorted(path.alphas, candidates, side="right") - 1]
    curve = pd.DataFrame({"alpha": candidates, "n_leaves": n_leaves, "mean": mean, "se": se})
    parsed = [parse_rule(r) for r in rules]
    chosen = {r.name: r.choose(mean, se) for r in parsed}
    return AlphaSelection(
        tree=fitted,
        path=path,
        candidates=candidates,
        fold_losses=fold_losses,
        fold_sizes=np.asarray(sizes),
        curve=curve,
        chosen=chosen,
        n_fits=n_fits,
    )
