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
from dataclasses import dataclass, field

import numpy as np
from sklearn.base import clone
from sklearn.metrics import balanced_accuracy_score, mean_absolute_error, r2_score
from sklearn.model_selection import KFold, RepeatedKFold, RepeatedStratifiedKFold, StratifiedKFold
from sklearn.tree import DecisionTreeClassifier, DecisionTreeRegressor

from .datasets import LoadedDataset, is_classification
from .exceptions import TrialTimeout
from .selection import select_alpha
from .vocabulary import CLASSIFICATION, REGRESSION, metric_names

__all__ = [
    "CLASSIFICATION_METRICS",
    "REGRESSION_METRICS",
    "GroupResult",
    "TrialTimeout",
    "derive_seed",
    "evaluate_group",
    "outer_splits",
]

CLASSIFICATION_METRICS = tuple(metric_names(CLASSIFICATION))
REGRESSION_METRICS = tuple(metric_names(REGRESSION))
# probabilities are clipped so one confident mistake gives a large, finite log loss
_PROBA_CLIP = 1e-15


def derive_seed(*parts: object) -> int:
    """A 32-bit seed from any parts, stable across runs and platforms."""
    digest = hashlib.sha256(":".join(map(str, parts)).encode()).digest()
    return int.from_bytes(digest[:4], "little")


def outer_splits(data: LoadedDataset, seed: int, repeats: int, folds: int) -> list:
    """The outer (repeat, fold, train, test) splits of a data set, fixed by seed and data.

    Parameters
    ----------
    data : LoadedDataset
    seed : int
        The study seed.
    repeats, folds : int

    Returns
    -------
    list of (int, int, ndarray, ndarray)
    """
    rs = derive_seed(seed, data.fingerprint, "outer")
    if is_classification(data.task):
        splitter = RepeatedStratifiedKFold(n_splits=folds, n_repeats=repeats, random_state=rs)
    else:
        splitter = RepeatedKFold(n_splits=folds, n_repeats=repeats, random_state=rs)
    out = []
    for i, (train, test) in enumerate(splitter.split(data.X, data.y)):
        out.append((i // folds, i % folds, train, test))
    return out


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


def _classification_scores(model, X, y, classes) -> dict:
    proba_model = model.predict_proba(X)
    # map the tree's classes onto the data set's (a class may be absent from training)
    proba = np.zeros((len(y), classes.size))
    proba[:, np.searchsorted(classes, model.classes_)] = proba_model
    pred = model.classes_[np.argmax(proba_model, axis=1)]
    truth = np.searchsorted(classes, y)
    onehot = np.zeros_like(proba)
    onehot[np.arange(len(y)), truth] = 1.0
    clipped = np.clip(proba, _PROBA_CLIP, 1.0)
    clipped /= clipped.sum(axis=1, keepdims=True)
    accuracy = float(np.mean(pred == y))
    return {
        "error": 1.0 - accuracy,
        "accuracy": accuracy,
        "balanced_accuracy": float(balanced_accuracy_score(y, pred)),
        "log_loss": float(-np.mean(np.log(clipped[np.arange(len(y)), truth]))),
        "brier": float(np.mean(np.sum((proba - onehot) ** 2, axis=1))),
    }


def _regression_scores(model, X, y) -> dict:
    pred = model.predict(X)
    return {
        "mse": float(np.mean((pred - y) ** 2)),
        "mae": float(mean_absolute_error(y, pred)),
        "r2": float(r2_score(y, pred)),
    }



def evaluate_group(
    group,
    data: LoadedDataset,
    seed: int,
    repeats: int,
    folds: int,
    time_limit: float | None = None,
) -> GroupResult:
    """Evaluate every trial of a group on every outer fold.

    Parameters
    ----------
    group : TrialGroup
        Trials that differ only in the rule.
    data : LoadedDataset
    seed : int
        The study seed.
    repeats, folds : int
        The outer scheme.
    time_limit : float, optional
        Seconds the group may take; checked before every tree fit, so a group stops
        within one fit of its limit and raises :class:`TrialTimeout`.

    Returns
    -------
    GroupResult
    """
    start = time.perf_counter()

    def check_time() -> None:
        if time_limit is not None and time.perf_counter() - start > time_limit:
            raise TrialTimeout(
                f"stopped: the trial group ran past the study's time_limit of {time_limit:g} s "
                f"({time.perf_counter() - start:.1f} s)"
            )

    classification = is_classification(data.task)
    classes = np.unique(data.y) if classification else None
    tree_class = DecisionTreeClassifier if classification else DecisionTreeRegressor
    result = GroupResult(group_id=group.group_id)
    X, y = data.X, data.y
    for repeat, fold, train, test in outer_splits(data, seed, repeats, folds):
        X_train, y_train, X_test, y_test = X[train], y[train], X[test], y[test]
        tree_seed = derive_seed(seed, data.fingerprint, repeat, fold, "tree")
        template = tree_class(
            criterion=group.criterion,
            max_depth=group.max_depth,
            min_samples_leaf=group.min_samples_leaf,
            random_state=tree_seed,
        )
        check_time()
        t0 = time.perf_counter()
        full = clone(template).fit(X_train, y_train)
        fit_full = time.perf_counter() - t0
        inner_seed = derive_seed(seed, data.fingerprint, repeat, fold, "inner")
        splitter_class = StratifiedKFold if classification else KFold
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
            before_fit=check_time,
        )
        fit_inner = time.perf_counter() - t0
        result.n_fits += selection.n_fits + 1
        common = {
            "repeat": repeat,
            "fold": fold,
            "n_train": int(train.size),
            "n_test": int(test.size),
            "test_fingerprint": rows_fingerprint(test),
        }
        scores_full = (
            _classification_scores(full, X_test, y_test, classes)
            if classification
            else _regression_scores(full, X_test, y_test)
        )
        for trial in group.trials:
            result.folds.append(
                {
                    "trial_id": trial.trial_id,
                    **common,
                    "arm": "unpruned",
                    **scores_full,
                    "n_leaves": int(full.get_n_leaves()),
                    "depth": int(full.get_depth()),
                    "alpha": 0.0,
                    "fit_seconds": fit_full,
                }
            )
            t0 = time.perf_counter()
            alpha = selection.alpha(trial.rule)
            pruned = selection.path.prune(alpha)
            prune_time = time.perf_counter() - t0
            scores = (
                _classification_scores(pruned, X_test, y_test, classes)
                if classification
                else _regression_scores(pruned, X_test, y_test)
            )
            result.folds.append(
                {
                    "trial_id": trial.trial_id,
                    **common,
                    "arm": "pruned",
                    **scores,
                    "n_leaves": int(pruned.get_n_leaves()),
                    "depth": int(pruned.get_depth()),
                    "alpha": alpha,
                    "fit_seconds": fit_full + fit_inner + prune_time,
                }
            )
        for i, row in enumerate(selection.curve.itertuples(index=False)):
            result.curves.append(
                {
                    "group_id": group.group_id,
                    "repeat": repeat,
                    "fold": fold,
                    "candidate": i,
                    "alpha": float(row.alpha),
                    "n_leaves": int(row.n_leaves),
                    "mean": float(row.mean),
                    "se": float(row.se),
                }
            )
    result.seconds = time.perf_counter() - start
    return result
