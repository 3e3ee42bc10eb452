"""Evaluation of one trial group by nested, repeated cross-validation.

Outer: ``repeats x folds`` (stratified for classification), split by a seed
derived from the study seed and the data set's fingerprint only, so every
configuration sees the same outer folds and configurations are paired.  For
each outer fold: grow ``T_max`` on the outer-training rows (the ``unpruned``
arm), choose alpha by inner K-fold CV on those rows only (inner splits seeded
from the study seed, the data set, the repeat and the fold), prune at every
rule's alpha (the ``pruned`` arm of each trial), and score both arms on the
outer-test rows.

A group is every trial that shares the grown trees (same data set and growth
levels), so per outer fold ``T_max`` is grown once and the fold trees of each
distinct inner fold count once; every pruning risk's path is computed once per
tree, and every (risk, CV loss) curve is scored from one ``apply`` of each fold
tree (:func:`prunebench.selection.select_alphas`).  Rules that need no CV (a
fixed relative alpha) grow no fold tree.  X is validated and converted to
float32, the dtype scikit-learn grows its trees on, once per data set.
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
from sklearn.utils import check_array

from .costs import node_class_costs
from .datasets import LoadedDataset, is_classification
from .exceptions import TrialTimeout
from .losses import fold_metrics, leaf_probabilities
from .selection import parse_rule, select_alphas
from .vocabulary import CLASSIFICATION, DEFAULT_METRIC, REGRESSION, family_of, metric_names

__all__ = [
    "CLASSIFICATION_METRICS",
    "REGRESSION_METRICS",
    "EvaluationSettings",
    "GroupResult",
    "TrialTimeout",
    "balanced_accuracy",
    "derive_seed",
    "evaluate_group",
    "growth_fits",
    "outer_splits",
    "prepared_X",
    "time_outer_fold",
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
    unpruned : list of dict
        One row per repeat and fold: the grown tree ``T_max``, shared by every
        trial of the group (stored once).
    pruned : list of dict
        One row per trial, repeat and fold.
    curves : list of dict
        The inner-CV curve of every outer fold, one per distinct curve id (the
        trials' ``group_id``: inner fold count, pruning risk and CV loss).
    n_fits : int
        Trees grown.
    seconds : float
        Wall time of the whole group.
    """

    group_id: str
    unpruned: list[dict] = field(default_factory=list)
    pruned: list[dict] = field(default_factory=list)
    curves: list[dict] = field(default_factory=list)
    n_fits: int = 0
    seconds: float = 0.0

    @property
    def folds(self) -> list[dict]:
        """The rows in the ``folds`` view's shape: per trial, repeat, fold and arm."""
        grown = {(r["repeat"], r["fold"]): r for r in self.unpruned}
        out = []
        for row in self.pruned:
            full = grown[(row["repeat"], row["fold"])]
            common = {k: full[k] for k in ("repeat", "fold", "n_train", "n_test")}
            common["test_fingerprint"] = full["test_fingerprint"]
            metrics = [k for k in full if k not in _NOT_METRICS]
            out.append(
                {
                    "trial_id": row["trial_id"],
                    **common,
                    "arm": "unpruned",
                    **{k: full[k] for k in metrics},
                    "n_leaves": full["n_leaves"],
                    "depth": full["depth"],
                    "alpha": 0.0,
                    "fit_seconds": full["fit_seconds"],
                    "root_feature": full["root_feature"],
                    "features_used": full["features_used"],
                }
            )
            out.append(
                {
                    "trial_id": row["trial_id"],
                    **common,
                    "arm": "pruned",
                    **{k: row[k] for k in metrics},
                    "n_leaves": row["n_leaves"],
                    "depth": row["depth"],
                    "alpha": row["alpha"],
                    "fit_seconds": row["fit_seconds"],
                    "root_feature": row["root_feature"],
                    "features_used": row["features_used"],
                }
            )
        return out


_NOT_METRICS = frozenset(
    (
        "repeat",
        "fold",
        "n_train",
        "n_test",
        "test_fingerprint",
        "n_leaves",
        "depth",
        "fit_seconds",
        "root_feature",
        "features_used",
    )
)


def prepared_X(data: LoadedDataset) -> np.ndarray:
    """The data set's X validated once and as scikit-learn's trees use it (C-ordered float32).

    scikit-learn converts X to float32 before it grows or applies a tree, so the
    trees grown on this copy are the trees grown on ``data.X``; converting once
    saves the copy and the checks of every fit.  The last data set's copy is kept.
    """
    key = data.fingerprint
    if _PREPARED.get("key") != key:
        _PREPARED.clear()
        X = check_array(data.X, dtype=np.float32, order="C", ensure_all_finite="allow-nan")
        _PREPARED.update(key=key, X=X)
    return _PREPARED["X"]


_PREPARED: dict = {}


def balanced_accuracy(truth: np.ndarray, correct: np.ndarray, n_classes: int) -> float:
    """Balanced accuracy from class indices: the mean recall over the classes present.

    Equal, bit for bit, to scikit-learn's ``balanced_accuracy_score`` (per-class
    recall of the classes in ``y_true``, then their mean in label order).

    Parameters
    ----------
    truth : ndarray of int
        Index of every row's true class.
    correct : ndarray of bool
        Whether each row was predicted right.
    n_classes : int
    """
    total = np.bincount(truth, minlength=n_classes)
    hits = np.bincount(truth[correct], minlength=n_classes)
    present = total > 0
    return float(np.mean(hits[present] / total[present]))


def _needs_check(X: np.ndarray) -> bool:
    """Whether scikit-learn must check X itself: not float32, or with missing values.

    Missing values need scikit-learn's own mask of the features that have them,
    which only its checked path computes.
    """
    return X.dtype != np.float32 or bool(np.isnan(X).any())


def _scores(model, X, y, classes, costs=None, pred=None) -> dict:
    """Every metric of the task family (``classes`` is None for regression).

    ``costs`` is ``(loss_matrix, priors, smoothing)`` of the study for this data set;
    ``pred`` the predicted labels when a loss matrix or priors decide them.
    """
    if classes is None:
        return _regression_scores(model, X, y)
    # X is float32 from prepared_X: scikit-learn's own check would convert it to that
    check = _needs_check(X)
    loss_matrix, _, smoothing = costs or (None, "data", None)
    if smoothing is None:
        proba_model = model.predict_proba(X, check_input=check)
    else:
        tree = model.tree_
        counts = tree.value[:, 0, :] * tree.weighted_n_node_samples[:, None]
        proba_model = leaf_probabilities(counts, smoothing)[model.apply(X, check_input=check)]
    # map the tree's classes onto the data set's (a class may be absent from training)
    proba = np.zeros((len(y), classes.size))
    proba[:, np.searchsorted(classes, model.classes_)] = proba_model
    if pred is None:
        pred = model.classes_[np.argmax(proba_model, axis=1)]
    return fold_metrics(proba, y, classes, loss_matrix=loss_matrix, pred=pred)


def _regression_scores(model, X, y) -> dict:
    pred = model.predict(X, check_input=_needs_check(X))
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
        elapsed = self.elapsed()
        if self.limit is not None and elapsed > self.limit:
            # three figures, so a small limit's overrun reads as one (0.0123 s past 0.01 s)
            raise TrialTimeout(
                f"stopped: the trial group ran past the study's time_limit of {self.limit:g} s "
                f"({elapsed:.3g} s)"
            )


def _select_by(trial, family: str) -> str:
    """The trial's CV loss (the family default when trials carry no such factor)."""
    level = getattr(trial, "select_by", None)
    return level if level is not None else DEFAULT_METRIC[family]


def _needs_cv(trial) -> bool:
    return parse_rule(trial.rule).needs_cv


def growth_fits(group) -> int:
    """Trees one outer fold of a group grows: T_max and the fold trees of each inner fold count.

    Only inner fold counts with a trial whose rule reads a CV curve grow fold trees.
    """
    counts = {t.inner_folds for t in group.trials if _needs_cv(t)}
    return 1 + sum(counts)


@dataclass
class _OuterFit:
    """T_max of one outer fold and every inner-CV selection on its training rows."""

    full: object
    selections: dict  # (inner_folds, risk, select_by) -> AlphaSelection
    fit_full: float
    fit_inner: dict  # inner_folds -> seconds
    n_fits: int
    family: str

    def selection_of(self, trial):
        """The selection a trial's inner fold count, pruning risk and CV loss share."""
        key = (trial.inner_folds, trial.prune_risk, _select_by(trial, self.family))
        return self.selections[key]


def _tree_params(group, classification: bool = True) -> dict:
    # a growth level spelled "none" (max_depth, class_weight) is scikit-learn's None;
    # a regression tree has no class_weight (its one level is "none")
    params = {k: (None if v == "none" else v) for k, v in group.growth}
    if not classification and params.get("class_weight", None) is None:
        params.pop("class_weight", None)
    return params


def _tree_template(group, data: LoadedDataset, settings: EvaluationSettings, repeat, fold):
    classification = is_classification(data.task)
    tree_class = DecisionTreeClassifier if classification else DecisionTreeRegressor
    return tree_class(
        **_tree_params(group, classification),
        random_state=derive_seed(settings.seed, data.fingerprint, repeat, fold, "tree"),
    )


def _fit_outer_fold(
    group, data, settings, repeat, fold, X_train, y_train, clock, costs=None
) -> _OuterFit:
    """Grow T_max once, then every inner fold count's fold trees once, shared by all trials."""
    template = _tree_template(group, data, settings, repeat, fold)
    clock.check()
    t0 = time.perf_counter()
    # X_train is validated float32 (prepared_X); y is still checked by the fit itself
    full = clone(template).fit(X_train, y_train, check_input=_needs_check(X_train))
    fit_full = time.perf_counter() - t0
    inner_seed = derive_seed(settings.seed, data.fingerprint, repeat, fold, "inner")
    splitter_class = StratifiedKFold if is_classification(data.task) else KFold
    family = family_of(data.task)
    selections, fit_inner, n_fits = {}, {}, 1
    for k in group.inner_folds_levels:
        mine = [t for t in group.trials if t.inner_folds == k]
        risks = list(dict.fromkeys(t.prune_risk for t in mine))
        losses = list(dict.fromkeys(_select_by(t, family) for t in mine))
        rules = list(dict.fromkeys(t.rule for t in mine))
        inner = splitter_class(k, shuffle=True, random_state=inner_seed)
        t0 = time.perf_counter()
        chosen = select_alphas(
            template,
            X_train,
            y_train,
            cv=inner,
            risks=risks,
            select_by=losses,
            rules=rules,
            fitted=full,
            before_fit=clock.check,
            **_selection_costs(costs),
        )
        fit_inner[k] = time.perf_counter() - t0
        n_fits += next(iter(chosen.values())).n_fits
        for (risk, loss), selection in chosen.items():
            selections[(k, risk, loss)] = selection
    return _OuterFit(full, selections, fit_full, fit_inner, n_fits, family)


def _selection_costs(costs) -> dict:
    """The loss matrix, priors and smoothing keywords of ``select_alphas`` (none: defaults)."""
    if costs is None:
        return {}
    loss_matrix, priors, smoothing = costs
    return {"loss_matrix": loss_matrix, "priors": priors, "smoothing": smoothing}


def _decided(costs) -> bool:
    """Whether a loss matrix or priors decide the predicted classes."""
    return costs is not None and (
        costs[0] is not None or not isinstance(costs[1], str) or costs[1] != "data"
    )


def tree_features(model) -> dict:
    """The root split's feature index (None for a single leaf) and the features a tree uses.

    ``features_used`` is the sorted feature indices of the tree's splits, comma-separated
    ("" for a single leaf): what the stability figures compare across outer folds.
    """
    feature = model.tree_.feature
    used = sorted({int(f) for f in feature if f >= 0})
    return {
        "root_feature": int(feature[0]) if model.tree_.node_count > 1 else None,
        "features_used": ",".join(map(str, used)),
    }


def _pruned_rows(
    group, common: dict, fit: _OuterFit, X_test, y_test, classes, costs=None
) -> list[dict]:
    """The pruned arm of every trial on one outer fold's test rows.

    Trials whose rules land on the same alpha of the same path share one pruned
    tree, so it is rebuilt and scored once.  Under a loss matrix or priors each
    leaf predicts its cheapest class (the path's ``predict``).
    """
    decided = classes is not None and _decided(costs)
    rows, scored = [], {}
    for trial in group.trials:
        t0 = time.perf_counter()
        selection = fit.selection_of(trial)
        alpha = selection.alpha(trial.rule)
        key = (trial.prune_risk, alpha)
        if key not in scored:
            pruned = selection.path.prune(alpha)
            pred = selection.path.predict(X_test, alpha) if decided else None
            scored[key] = (
                _scores(pruned, X_test, y_test, classes, costs, pred),
                int(pruned.get_n_leaves()),
                int(pruned.get_depth()),
                tree_features(pruned),
            )
        scores, n_leaves, depth, shape = scored[key]
        seconds = fit.fit_full + fit.fit_inner[trial.inner_folds] + time.perf_counter() - t0
        rows.append(
            {
                "trial_id": trial.trial_id,
                "repeat": common["repeat"],
                "fold": common["fold"],
                **scores,
                "n_leaves": n_leaves,
                "depth": depth,
                "alpha": alpha,
                "fit_seconds": seconds,
                **shape,
            }
        )
    return rows


def _curve_rows(group, repeat: int, fold: int, fit: _OuterFit) -> list[dict]:
    """The inner-CV curve of one outer fold for every curve id of the group's trials."""
    out, seen = [], set()
    for trial in group.trials:
        if trial.group_id in seen:
            continue
        seen.add(trial.group_id)
        curve = fit.selection_of(trial).curve
        out += [
            {
                "group_id": trial.group_id,
                "repeat": repeat,
                "fold": fold,
                "candidate": i,
                "alpha": float(alpha),
                "n_leaves": int(n_leaves),
                "mean": float(mean),
                "se": float(se),
            }
            for i, (alpha, n_leaves, mean, se) in enumerate(
                zip(
                    curve["alpha"].to_numpy(),
                    curve["n_leaves"].to_numpy(),
                    curve["mean"].to_numpy(),
                    curve["se"].to_numpy(),
                    strict=True,
                )
            )
        ]
    return out


def evaluate_group(group, data: LoadedDataset, settings: EvaluationSettings) -> GroupResult:
    """Evaluate every trial of a group on every outer fold.

    Parameters
    ----------
    group : TrialGroup
        Trials that share the grown trees (same data set and growth levels).
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
    X, y = prepared_X(data), data.y
    arrays = (X, y, classes, _group_costs(group, settings, classes))
    for repeat, fold, train, test in outer_splits(data, settings):
        _evaluate_fold(group, data, settings, arrays, (repeat, fold, train, test), clock, result)
    result.seconds = clock.elapsed()
    return result


def time_outer_fold(group, data: LoadedDataset, settings: EvaluationSettings) -> float:
    """Seconds the first outer fold of a group takes, every fit and score included.

    The per-fold cost of a group varies little between outer folds (same rows,
    same growth setting), so ``prunebench check`` multiplies it by the outer folds.
    """
    classes = np.unique(data.y) if is_classification(data.task) else None
    X, y = prepared_X(data), data.y
    split = next(iter(outer_splits(data, settings)))
    clock = _Clock(None)
    arrays = (X, y, classes, _group_costs(group, settings, classes))
    _evaluate_fold(group, data, settings, arrays, split, clock, GroupResult(group.group_id))
    return clock.elapsed()


def _group_costs(group, settings: EvaluationSettings, classes) -> tuple | None:
    """``(loss_matrix, priors, smoothing)`` of a classification group's data set, if any."""
    if classes is None or not (settings.costs or settings.smoothing):
        return None
    return (*settings.costs_of(group.dataset, classes), settings.smoothing)


def _evaluate_fold(group, data, settings, arrays, split, clock, result: GroupResult) -> None:
    """One outer fold of a group: its trees, selections and rows, added to ``result``."""
    X, y, classes, costs = arrays
    repeat, fold, train, test = split
    fit = _fit_outer_fold(group, data, settings, repeat, fold, X[train], y[train], clock, costs)
    result.n_fits += fit.n_fits
    X_test, y_test = X[test], y[test]
    common = {
        "repeat": repeat,
        "fold": fold,
        "n_train": int(train.size),
        "n_test": int(test.size),
        "test_fingerprint": rows_fingerprint(test),
    }
    pred_full = None
    if classes is not None and _decided(costs):
        # under a loss matrix or priors each leaf of T_max predicts its cheapest class
        best = node_class_costs(fit.full, costs[0], costs[1], classes)[1]
        pred_full = fit.full.classes_[
            best[fit.full.apply(X_test, check_input=_needs_check(X_test))]
        ]
    result.unpruned.append(
        {
            **common,
            **_scores(fit.full, X_test, y_test, classes, costs, pred_full),
            "n_leaves": int(fit.full.get_n_leaves()),
            "depth": int(fit.full.get_depth()),
            "fit_seconds": fit.fit_full,
            **tree_features(fit.full),
        }
    )
    result.pruned += _pruned_rows(group, common, fit, X_test, y_test, classes, costs)
    result.curves += _curve_rows(group, repeat, fold, fit)
