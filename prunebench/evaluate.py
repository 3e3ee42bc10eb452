"""Evaluation of one trial group by nested, repeated cross-validation.

Outer: ``repeats x folds`` (stratified for classification), split by a seed
derived from the study seed and the data set's fingerprint only, so every
configuration sees the same outer folds and configurations are paired.  For
each outer fold: grow ``T_max`` on the outer-training rows (the ``unpruned``
arm), choose alpha by inner K-fold CV on those rows only (inner splits seeded
from the study seed, the data set, the repeat and the fold), prune at every
rule's alpha (the ``pruned`` arm of each trial), and score both arms on the
outer-test rows.  The trials of a group differ only in the rule, so they share
every tree fit.
"""

from __future__ import annotations

import hashlib
import time
from collections.abc import Iterator
from dataclasses import dataclass, field

import numpy as np
from sklearn.base import clone
from sklearn.metrics import mean_absolute_error, r2_score
from sklearn.model_selection import KFold, RepeatedKFold, RepeatedStratifiedKFold, StratifiedKFold
from sklearn.tree import DecisionTreeClassifier, DecisionTreeRegressor

from .costs import node_class_costs
from .datasets import LoadedDataset, is_classification
from .exceptions import TrialTimeout
from .losses import fold_metrics, leaf_probabilities
from .selection import select_alpha
from .vocabulary import CLASSIFICATION, REGRESSION, metric_names

__all__ = [
    "CLASSIFICATION_METRICS",
    "REGRESSION_METRICS",
    "EvaluationSettings",
    "GroupResult",
    "TrialTimeout",
    "derive_seed",
    "evaluate_group",
    "outer_splits",
]

CLASSIFICATION_METRICS = tuple(metric_names(CLASSIFICATION))
REGRESSION_METRICS = tuple(metric_names(REGRESSION))


@dataclass(frozen=True)
class EvaluationSettings:
    """What every trial group of a study is evaluated with, in one immutable value.

    Attributes
    ----------
    seed : int
        The study seed (outer splits, trees and inner splits derive from it).
    repeats, folds : int
        The outer scheme: ``repeats`` x ``folds``-fold cross-validation.
    time_limit : float, optional
        Seconds one trial group may take (checked before every tree fit).
    costs : tuple of (str, labels, loss, priors)
        One entry per data set with a ``[costs]`` table: its key, its sorted class
        labels, the loss matrix in that order (tuple of rows: true class; columns:
        predicted class) or None, and ``"data"``, ``"equal"`` or the priors.
    smoothing : str, optional
        Leaf-probability smoothing (``"laplace"``, ``"m<m>"``) of the stored
        probability metrics and of the probability losses that choose alpha.
    """

    seed: int
    repeats: int
    folds: int
    time_limit: float | None = None
    costs: tuple = ()
    smoothing: str | None = None

    @classmethod
    def of(cls, study) -> EvaluationSettings:
        """The settings of a :class:`~prunebench.study.Study`."""
        return cls(
            seed=study.seed,
            repeats=study.repeats,
            folds=study.folds,
            time_limit=study.time_limit,
            costs=tuple((key, *value) for key, value in sorted(study.costs.items())),
            smoothing=getattr(study, "smoothing", None),
        )

    def costs_of(self, dataset: str, classes: np.ndarray) -> tuple:
        """``(loss_matrix or None, priors)`` of a data set, in ``classes`` order."""
        for key, labels, loss, priors in self.costs:
            if key == dataset:
                if [str(c) for c in labels] != [str(c) for c in classes]:
                    raise ValueError(f"the costs of {dataset!r} name other classes: {labels}")
                loss = None if loss is None else np.asarray(loss, dtype=float)
                return loss, priors if isinstance(priors, str) else np.asarray(priors, float)
        return None, "data"


def derive_seed(*parts: object) -> int:
    """A 32-bit seed from any parts, stable across runs and platforms."""
    digest = hashlib.sha256(":".join(map(str, parts)).encode()).digest()
    return int.from_bytes(digest[:4], "little")


def outer_splits(data: LoadedDataset, settings: EvaluationSettings) -> Iterator[tuple]:
    """The outer (repeat, fold, train, test) splits of a data set, fixed by seed and data.

    The splits are generated one repeat at a time, as they are used, so the number
    of repeats costs no memory.

    Parameters
    ----------
    data : LoadedDataset
    settings : EvaluationSettings
        Its ``seed``, ``repeats`` and ``folds``.

    Yields
    ------
    tuple of (int, int, ndarray, ndarray)
    """
    folds = settings.folds
    rs = derive_seed(settings.seed, data.fingerprint, "outer")
    if is_classification(data.task):
        splitter = RepeatedStratifiedKFold(
            n_splits=folds, n_repeats=settings.repeats, random_state=rs
        )
    else:
        splitter = RepeatedKFold(n_splits=folds, n_repeats=settings.repeats, random_state=rs)
    for i, (train, test) in enumerate(splitter.split(data.X, data.y)):
        yield i // folds, i % folds, train, test


def rows_fingerprint(test: np.ndarray) -> str:
    """Short hash of an outer fold's test rows (sorted row indices)."""
    return hashlib.sha256(np.sort(test).astype(np.int64).tobytes()).hexdigest()[:16]


@dataclass
class GroupResult:
    """Rows one trial group produced, ready for the store.

    Attributes
    ----------
    group_id : str
    folds : list of dict
        One row per trial, repeat, fold and arm.
    curves : list of dict
        The inner-CV curve of every outer fold (shared by the group's trials).
    n_fits : int
        Trees grown.
    seconds : float
        Wall time of the whole group.
    """

    group_id: str
    folds: list[dict] = field(default_factory=list)
    curves: list[dict] = field(default_factory=list)
    n_fits: int = 0
    seconds: float = 0.0


def _scores(model, X, y, classes, costs=None, pred=None) -> dict:
    """Every metric of the task family (``classes`` is None for regression).

    ``costs`` is ``(loss_matrix, priors, smoothing)`` of the study for this data set;
    ``pred`` the predicted labels when a loss matrix or priors decide them.
    """
    if classes is None:
        return _regression_scores(model, X, y)
    loss_matrix, _, smoothing = costs or (None, "data", None)
    if smoothing is None:
        proba_model = model.predict_proba(X)
    else:
        tree = model.tree_
        counts = tree.value[:, 0, :] * tree.weighted_n_node_samples[:, None]
        proba_model = leaf_probabilities(counts, smoothing)[model.apply(X)]
    # map the tree's classes onto the data set's (a class may be absent from training)
    proba = np.zeros((len(y), classes.size))
    proba[:, np.searchsorted(classes, model.classes_)] = proba_model
    if pred is None:
        pred = model.classes_[np.argmax(proba_model, axis=1)]
    return fold_metrics(proba, y, classes, loss_matrix=loss_matrix, pred=pred)


def _regression_scores(model, X, y) -> dict:
    pred = model.predict(X)
    return {
        "mse": float(np.mean((pred - y) ** 2)),
        "mae": float(mean_absolute_error(y, pred)),
        "r2": float(r2_score(y, pred)),
    }


class _Clock:
    """The group's time limit, checked before every tree fit."""

    def __init__(self, limit: float | None) -> None:
        self.limit = limit
        self.start = time.perf_counter()

    def elapsed(self) -> float:
        return time.perf_counter() - self.start

    def check(self) -> None:
        if self.limit is not None and self.elapsed() > self.limit:
            raise TrialTimeout(
                f"stopped: the trial group ran past the study's time_limit of {self.limit:g} s "
                f"({self.elapsed():.1f} s)"
            )


@dataclass
class _OuterFit:
    """T_max of one outer fold and the inner-CV choice of alpha on its training rows."""

    full: object
    selection: object
    fit_full: float
    fit_inner: float


def _tree_template(group, data: LoadedDataset, settings: EvaluationSettings, repeat, fold):
    tree_class = DecisionTreeClassifier if is_classification(data.task) else DecisionTreeRegressor
    return tree_class(
        criterion=group.criterion,
        max_depth=group.max_depth,
        min_samples_leaf=group.min_samples_leaf,
        random_state=derive_seed(settings.seed, data.fingerprint, repeat, fold, "tree"),
        **_class_weight(group),
    )


def _class_weight(group) -> dict:
    """``class_weight="balanced"`` for the trees of a balanced group (classification only)."""
    level = getattr(group, "class_weight", "none")
    return {} if level in (None, "none") else {"class_weight": level}


def _fit_outer_fold(
    group, data, settings, repeat, fold, X_train, y_train, clock, costs=None
) -> _OuterFit:
    """Grow T_max once, then choose every rule's alpha by inner K-fold CV (shared fits)."""
    template = _tree_template(group, data, settings, repeat, fold)
    clock.check()
    t0 = time.perf_counter()
    full = clone(template).fit(X_train, y_train)
    fit_full = time.perf_counter() - t0
    inner_seed = derive_seed(settings.seed, data.fingerprint, repeat, fold, "inner")
    splitter_class = StratifiedKFold if is_classification(data.task) else KFold
    inner = splitter_class(group.inner_folds, shuffle=True, random_state=inner_seed)
    t0 = time.perf_counter()
    selection = select_alpha(
        template,
        X_train,
        y_train,
        cv=inner,
        risk=group.prune_risk,
        rules=group.rules,
        fitted=full,
        before_fit=clock.check,
        select_by=getattr(group, "select_by", None),
        **_selection_costs(costs),
    )
    return _OuterFit(full, selection, fit_full, time.perf_counter() - t0)


def _selection_costs(costs) -> dict:
    """The loss matrix, priors and smoothing keywords of ``select_alpha`` (none: defaults)."""
    if costs is None:
        return {}
    loss_matrix, priors, smoothing = costs
    return {"loss_matrix": loss_matrix, "priors": priors, "smoothing": smoothing}


def _decided(costs) -> bool:
    """Whether a loss matrix or priors decide the predicted classes."""
    return costs is not None and (
        costs[0] is not None or not isinstance(costs[1], str) or costs[1] != "data"
    )


def _arm_row(trial_id: str, common: dict, arm: str, model, scores: dict, alpha, seconds) -> dict:
    return {
        "trial_id": trial_id,
        **common,
        "arm": arm,
        **scores,
        "n_leaves": int(model.get_n_leaves()),
        "depth": int(model.get_depth()),
        "alpha": alpha,
        "fit_seconds": seconds,
    }


def _fold_rows(
    group, common: dict, fit: _OuterFit, X_test, y_test, classes, costs=None
) -> list[dict]:
    """Both arms of every trial on one outer fold's test rows."""
    rows = []
    decided = classes is not None and _decided(costs)
    pred_full = None
    if decided:
        best = node_class_costs(fit.full, costs[0], costs[1], classes)[1]
        pred_full = fit.full.classes_[best[fit.full.apply(X_test)]]
    scores_full = _scores(fit.full, X_test, y_test, classes, costs, pred_full)
    for trial in group.trials:
        rows.append(
            _arm_row(trial.trial_id, common, "unpruned", fit.full, scores_full, 0.0, fit.fit_full)
        )
        t0 = time.perf_counter()
        alpha = fit.selection.alpha(trial.rule)
        pruned = fit.selection.path.prune(alpha)
        seconds = fit.fit_full + fit.fit_inner + time.perf_counter() - t0
        pred = fit.selection.path.predict(X_test, alpha) if decided else None
        scores = _scores(pruned, X_test, y_test, classes, costs, pred)
        rows.append(_arm_row(trial.trial_id, common, "pruned", pruned, scores, alpha, seconds))
    return rows


def _curve_rows(group_id: str, repeat: int, fold: int, curve) -> list[dict]:
    """The inner-CV curve of one outer fold, one row per candidate alpha."""
    return [
        {
            "group_id": group_id,
            "repeat": repeat,
            "fold": fold,
            "candidate": i,
            "alpha": float(row.alpha),
            "n_leaves": int(row.n_leaves),
            "mean": float(row.mean),
            "se": float(row.se),
        }
        for i, row in enumerate(curve.itertuples(index=False))
    ]


def evaluate_group(group, data: LoadedDataset, settings: EvaluationSettings) -> GroupResult:
    """Evaluate every trial of a group on every outer fold.

    Parameters
    ----------
    group : TrialGroup
        Trials that differ only in the rule.
    data : LoadedDataset
    settings : EvaluationSettings
        Seed, outer scheme and time limit.  The limit is checked before every tree
        fit, so a group stops within one fit of it and raises :class:`TrialTimeout`.

    Returns
    -------
    GroupResult
    """
    clock = _Clock(settings.time_limit)
    classes = np.unique(data.y) if is_classification(data.task) else None
    result = GroupResult(group_id=group.group_id)
    X, y = data.X, data.y
    costs = None
    if classes is not None and (settings.costs or settings.smoothing):
        costs = (*settings.costs_of(group.dataset, classes), settings.smoothing)
    for repeat, fold, train, test in outer_splits(data, settings):
        fit = _fit_outer_fold(group, data, settings, repeat, fold, X[train], y[train], clock, costs)
        result.n_fits += fit.selection.n_fits + 1
        common = {
            "repeat": repeat,
            "fold": fold,
            "n_train": int(train.size),
            "n_test": int(test.size),
            "test_fingerprint": rows_fingerprint(test),
        }
        result.folds += _fold_rows(group, common, fit, X[test], y[test], classes, costs)
        result.curves += _curve_rows(group.group_id, repeat, fold, fit.selection.curve)
    result.seconds = clock.elapsed()
    return result
