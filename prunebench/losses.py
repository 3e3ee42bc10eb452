"""Losses and metrics of classifiers and regressors, as plain numpy functions.

Error, balanced error, log loss, the Brier score and its binary form, ROC AUC,
average precision, Murphy's decomposition of the Brier score and the expected
cost under a loss matrix: numpy in, float out, no pandas, fast enough to run per
fold; each equals the scikit-learn metric of the same name.  Also the opt-in
smoothing of leaf probabilities.  The same losses of every candidate subtree of a
pruning path, from one pass, are in :mod:`prunebench.scoring`.

Conventions: ``y`` holds class *indices* (positions in the classifier's
``classes_``) wherever a probability matrix is passed, and ``proba`` has one
column per class in the same order; :func:`class_index` converts labels.
Probabilities are clipped to ``[1e-15, 1]`` and renormalised for the log loss,
as prunebench has always stored it.
"""

from __future__ import annotations

import re
from typing import NamedTuple

import numpy as np

from .exceptions import parameter_error

__all__ = [
    "PROBA_CLIP",
    "BrierParts",
    "auc_from_counts",
    "average_precision",
    "balanced_error",
    "brier",
    "brier_binary",
    "brier_decomposition",
    "class_index",
    "error",
    "expected_cost",
    "fold_metrics",
    "leaf_probabilities",
    "log_loss",
    "parse_smoothing",
    "roc_auc",
]

#: Probabilities are clipped to [PROBA_CLIP, 1] before the log loss, so one
#: confident mistake gives a large, finite loss.
PROBA_CLIP = 1e-15


def _weights(n: int, sample_weight) -> np.ndarray:
    if sample_weight is None:
        return np.ones(n)
    w = np.asarray(sample_weight, dtype=float)
    if w.shape != (n,):
        raise parameter_error("sample_weight", "losses", f"an array of {n} weights", w.shape)
    return w


def class_index(y, classes) -> np.ndarray:
    """Position of every label of ``y`` in ``classes``.

    Parameters
    ----------
    y : array-like of shape (n_samples,)
        Labels.
    classes : array-like of shape (n_classes,)
        The sorted class labels (a classifier's ``classes_``).

    Returns
    -------
    ndarray of shape (n_samples,)
        Integer positions; a label not in ``classes`` raises ``InvalidParameterError``.
    """
    classes = np.asarray(classes)
    y = np.asarray(y)
    pos = np.searchsorted(classes, y)
    pos = np.minimum(pos, classes.size - 1)
    if not np.all(classes[pos] == y):
        unknown = np.unique(y[classes[pos] != y])
        raise parameter_error("y", "class_index", f"labels among {list(classes)}", list(unknown))
    return pos.astype(np.intp)


def error(y, pred, sample_weight=None) -> float:
    """Misclassification rate: the (weighted) share of rows with ``pred != y``."""
    y, pred = np.asarray(y), np.asarray(pred)
    w = _weights(y.size, sample_weight)
    return float(np.sum(w * (y != pred)) / np.sum(w))


def balanced_error(y, pred, sample_weight=None) -> float:
    """One minus the mean per-class recall over the classes present in ``y``.

    Equals ``1 - sklearn.metrics.balanced_accuracy_score(y, pred, sample_weight=...)``.
    """
    y, pred = np.asarray(y), np.asarray(pred)
    w = _weights(y.size, sample_weight)
    labels, yi = np.unique(y, return_inverse=True)
    total = np.bincount(yi, weights=w, minlength=labels.size)
    hit = np.bincount(yi, weights=w * (y == pred), minlength=labels.size)
    present = total > 0
    return float(1.0 - np.mean(hit[present] / total[present]))


def log_loss(y, proba, sample_weight=None, eps: float = PROBA_CLIP) -> float:
    """Mean negative log probability of the true class.

    Probabilities are clipped to ``[eps, 1]`` and each row renormalised, as in
    prunebench's stored ``log_loss`` (scikit-learn clips at machine precision
    instead; on pre-clipped input the two agree).
    """
    y = np.asarray(y, dtype=np.intp)
    proba = np.asarray(proba, dtype=float)
    w = _weights(y.size, sample_weight)
    clipped = np.clip(proba, eps, 1.0)
    clipped /= clipped.sum(axis=1, keepdims=True)
    return float(-np.sum(w * np.log(clipped[np.arange(y.size), y])) / np.sum(w))


def brier(y, proba, sample_weight=None) -> float:
    """Brier score summed over classes: mean of ``sum_c (p_c - [y == c])^2``.

    For two classes this is twice :func:`brier_binary`; it is the form prunebench
    stores as ``brier``, and scikit-learn's ``brier_score_loss`` for three or more
    classes.
    """
    y = np.asarray(y, dtype=np.intp)
    proba = np.asarray(proba, dtype=float)
    w = _weights(y.size, sample_weight)
    onehot = np.zeros_like(proba)
    onehot[np.arange(y.size), y] = 1.0
    return float(np.sum(w * np.sum((proba - onehot) ** 2, axis=1)) / np.sum(w))


def brier_binary(y, p_pos, sample_weight=None) -> float:
    """Binary Brier score: mean of ``(p - y)^2`` with ``y`` in {0, 1}.

    Equals ``sklearn.metrics.brier_score_loss(y, p_pos)``.
    """
    y = np.asarray(y, dtype=float)
    p = np.asarray(p_pos, dtype=float)
    w = _weights(y.size, sample_weight)
    return float(np.sum(w * (p - y) ** 2) / np.sum(w))


def auc_from_counts(score, pos, neg) -> float:
    """ROC AUC from (weighted) positive and negative counts per score value.

    The Mann-Whitney form: the share of (positive, negative) pairs ranked in
    order, ties counted as half. Rows may repeat a score; they are pooled.

    Parameters
    ----------
    score : ndarray of shape (n,)
    pos, neg : ndarray of shape (n,)
        Positive and negative weight at each score.

    Returns
    -------
    float
        NaN when there are no positives or no negatives.
    """
    score = np.asarray(score, dtype=float)
    order = np.argsort(score, kind="mergesort")
    s = score[order]
    starts = np.r_[0, np.flatnonzero(s[1:] != s[:-1]) + 1] if s.size else np.empty(0, np.intp)
    p = np.add.reduceat(np.asarray(pos, float)[order], starts) if s.size else np.empty(0)
    n = np.add.reduceat(np.asarray(neg, float)[order], starts) if s.size else np.empty(0)
    total = p.sum() * n.sum()
    if total <= 0:
        return float("nan")
    below = np.cumsum(n) - n
    return float(np.sum(p * (below + 0.5 * n)) / total)


def roc_auc(y, scores, sample_weight=None) -> float:
    """Area under the ROC curve: binary, or one-vs-rest macro average.

    Parameters
    ----------
    y : array-like of shape (n_samples,)
        For 1-D ``scores``: 0/1 (or bool) outcomes. For 2-D ``scores``: class indices.
    scores : array-like of shape (n_samples,) or (n_samples, n_classes)
        A score per row (higher means more likely positive), or class
        probabilities; with two columns the second is the positive class's score.
    sample_weight : array-like of shape (n_samples,), optional

    Returns
    -------
    float
        Equals ``sklearn.metrics.roc_auc_score(y, scores)`` (``multi_class="ovr"``,
        ``average="macro"`` for three or more classes). Classes with no positive or
        no negative rows are left out of the macro average.
    """
    y = np.asarray(y)
    scores = np.asarray(scores, dtype=float)
    w = _weights(y.size, sample_weight)
    if scores.ndim == 2 and scores.shape[1] == 2:
        scores = scores[:, 1]
    if scores.ndim == 1:
        positive = y.astype(bool)
        return auc_from_counts(scores, w * positive, w * ~positive)
    values = []
    for c in range(scores.shape[1]):
        positive = y == c
        values.append(auc_from_counts(scores[:, c], w * positive, w * ~positive))
    values = np.asarray(values)
    return float(np.mean(values[~np.isnan(values)])) if np.any(~np.isnan(values)) else np.nan


def average_precision(y, scores, sample_weight=None) -> float:
    """Average precision (binary): ``sum_n (R_n - R_{n-1}) P_n`` over score thresholds.

    Equals ``sklearn.metrics.average_precision_score(y, scores)``: thresholds at the
    distinct scores, tied rows entering together.
    """
    y = np.asarray(y).astype(bool)
    scores = np.asarray(scores, dtype=float)
    w = _weights(y.size, sample_weight)
    order = np.argsort(-scores, kind="mergesort")
    s = scores[order]
    starts = np.r_[0, np.flatnonzero(s[1:] != s[:-1]) + 1]
    tp = np.cumsum(np.add.reduceat((w * y)[order], starts))
    fp = np.cumsum(np.add.reduceat((w * ~y)[order], starts))
    if tp[-1] <= 0:
        return float("nan")
    precision = tp / np.maximum(tp + fp, np.finfo(float).tiny)
    recall = tp / tp[-1]
    return float(np.sum(np.diff(np.r_[0.0, recall]) * precision))


def expected_cost(y, pred, loss_matrix, sample_weight=None) -> float:
    """Mean cost per row, ``L[y, pred]``, under a loss matrix.

    Parameters
    ----------
    y, pred : array-like of shape (n_samples,)
        True and predicted class indices.
    loss_matrix : array-like of shape (n_classes, n_classes)
        ``L[i, j]``: the cost of predicting class ``j`` when the truth is ``i``.
    sample_weight : array-like of shape (n_samples,), optional
    """
    L = np.asarray(loss_matrix, dtype=float)
    y = np.asarray(y, dtype=np.intp)
    pred = np.asarray(pred, dtype=np.intp)
    w = _weights(y.size, sample_weight)
    return float(np.sum(w * L[y, pred]) / np.sum(w))


class BrierParts(NamedTuple):
    """Murphy's (1973) decomposition: ``brier = reliability - resolution + uncertainty``."""

    reliability: float
    resolution: float
    uncertainty: float
    brier: float


def brier_decomposition(y, proba, sample_weight=None, binary: bool = False) -> BrierParts:
    """Murphy's decomposition of the Brier score over the distinct forecasts.

    Rows are grouped by identical probability vectors (for a tree: its leaves'
    distinct probabilities), so the decomposition is exact:
    ``reliability = sum_g w_g |f_g - o_g|^2 / W`` (the calibration term),
    ``resolution = sum_g w_g |o_g - o|^2 / W`` and
    ``uncertainty = sum_c o_c (1 - o_c)``, with ``f_g`` the group's forecast,
    ``o_g`` its observed class shares and ``o`` the overall shares (Murphy 1973).

    Parameters
    ----------
    y : array-like of shape (n_samples,)
        Class indices.
    proba : array-like of shape (n_samples, n_classes)
    sample_weight : array-like of shape (n_samples,), optional
    binary : bool, default=False
        Decompose the binary Brier score (the second column only, as
        :func:`brier_binary`) instead of the score summed over classes (:func:`brier`).

    Returns
    -------
    BrierParts
    """
    y = np.asarray(y, dtype=np.intp)
    proba = np.asarray(proba, dtype=float)
    w = _weights(y.size, sample_weight)
    onehot = np.zeros_like(proba)
    onehot[np.arange(y.size), y] = 1.0
    if binary:
        proba, onehot = proba[:, 1:2], onehot[:, 1:2]
    forecasts, group = np.unique(proba, axis=0, return_inverse=True)
    group = group.ravel()
    total = w.sum()
    wg = np.bincount(group, weights=w, minlength=forecasts.shape[0])
    observed = (
        np.stack(
            [
                np.bincount(group, weights=w * onehot[:, c], minlength=wg.size)
                for c in range(proba.shape[1])
            ],
            axis=1,
        )
        / wg[:, None]
    )
    overall = (w @ onehot) / total
    reliability = float(np.sum(wg * np.sum((forecasts - observed) ** 2, axis=1)) / total)
    resolution = float(np.sum(wg * np.sum((observed - overall) ** 2, axis=1)) / total)
    uncertainty = float(np.sum(overall * (1.0 - overall)))
    score = float(np.sum(w * np.sum((proba - onehot) ** 2, axis=1)) / total)
    return BrierParts(reliability, resolution, uncertainty, score)


def fold_metrics(proba, y, classes, loss_matrix=None, pred=None) -> dict[str, float | None]:
    """Every classification metric of the vocabulary on one outer fold's test rows.

    Parameters
    ----------
    proba : array-like of shape (n_samples, n_classes)
        Class probabilities in ``classes`` order (a column of zeros for a class the
        tree did not see in training).
    y : array-like of shape (n_samples,)
        True labels.
    classes : array-like of shape (n_classes,)
        The data set's sorted class labels.
    loss_matrix : array-like of shape (n_classes, n_classes), optional
        ``L[i, j]``, the cost of predicting ``j`` when the truth is ``i``, in
        ``classes`` order; None is 0-1 loss (``expected_cost`` then equals ``error``).
    pred : array-like of shape (n_samples,), optional
        Predicted labels (a tree's cost-minimising classes under a loss matrix or
        priors); by default the most probable class, first on ties.

    Returns
    -------
    dict
        ``error``, ``accuracy``, ``balanced_accuracy`` (as scikit-learn's
        ``balanced_accuracy_score``), ``log_loss`` (clipped at :data:`PROBA_CLIP`),
        ``brier`` (summed over classes), ``auc`` (binary; one-vs-rest macro average
        for three or more classes), ``average_precision`` (binary; None otherwise),
        ``brier_calibration`` and ``brier_refinement`` (Murphy's reliability, and
        uncertainty - resolution, of ``brier``: they sum to it) and ``expected_cost``
        (mean ``L[y, pred]``).
    """
    classes = np.asarray(classes)
    y = np.asarray(y)
    proba = np.asarray(proba, dtype=float)
    truth = np.searchsorted(classes, y)
    pred = classes[np.argmax(proba, axis=1)] if pred is None else np.asarray(pred)
    n = y.size
    onehot = np.zeros_like(proba)
    onehot[np.arange(n), truth] = 1.0
    clipped = np.clip(proba, PROBA_CLIP, 1.0)
    clipped /= clipped.sum(axis=1, keepdims=True)
    accuracy = float(np.mean(pred == y))
    # per-class recall over the classes present in y, averaged in label order (the
    # order and the integer division of scikit-learn's balanced_accuracy_score)
    total = np.bincount(truth, minlength=classes.size)
    hit = np.bincount(truth[pred == y], minlength=classes.size)
    present = total > 0
    parts = brier_decomposition(truth, proba)
    pred_index = np.searchsorted(classes, pred)
    L = 1.0 - np.eye(classes.size) if loss_matrix is None else np.asarray(loss_matrix, float)
    binary = classes.size == 2
    return {
        "error": 1.0 - accuracy,
        "accuracy": accuracy,
        "balanced_accuracy": float(np.mean(hit[present] / total[present])),
        "log_loss": float(-np.mean(np.log(clipped[np.arange(n), truth]))),
        "brier": float(np.mean(np.sum((proba - onehot) ** 2, axis=1))),
        "auc": roc_auc(truth, proba[:, 1] if binary else proba),
        "average_precision": average_precision(truth == 1, proba[:, 1]) if binary else None,
        "brier_calibration": parts.reliability,
        "brier_refinement": parts.uncertainty - parts.resolution,
        "expected_cost": float(np.mean(L[truth, pred_index])),
    }


_M_SPELLING = re.compile(r"^m(\d+(?:\.\d+)?)$")


def parse_smoothing(smoothing: str | None) -> tuple[str, float] | None:
    """The leaf-probability smoothing a spelling names.

    Parameters
    ----------
    smoothing : None, "none", "laplace" or "m<m>" (e.g. "m2", "m10")
        ``None``/``"none"``: the tree's raw leaf fractions (scikit-learn's).
        ``"laplace"``: ``(n_c + 1) / (n + K)``. ``"m<m>"``: the m-estimate
        ``(n_c + m b_c) / (n + m)`` with ``b`` the training class shares (Cestnik
        1990; both studied for trees by Provost & Domingos 2003).

    Returns
    -------
    None or (kind, m)
    """
    if smoothing is None or smoothing == "none":
        return None
    if smoothing == "laplace":
        return ("laplace", 1.0)
    if isinstance(smoothing, str):
        match = _M_SPELLING.match(smoothing)
        if match and float(match.group(1)) > 0:
            return ("m", float(match.group(1)))
    raise parameter_error(
        "smoothing",
        "parse_smoothing",
        'None, "laplace" or an m-estimate spelled like "m2"',
        smoothing,
    )


def leaf_probabilities(counts, smoothing: str | None = None, base_rate=None) -> np.ndarray:
    """Class probabilities of tree nodes from their (weighted) class counts.

    Parameters
    ----------
    counts : array-like of shape (n_nodes, n_classes)
        Training class counts (weighted when the tree was grown with weights).
    smoothing : None, "laplace" or "m<m>", default=None
        See :func:`parse_smoothing`; ``None`` gives the raw fractions.
    base_rate : array-like of shape (n_classes,), optional
        Class shares the m-estimate shrinks towards; by default the first row's
        (the root's) shares.

    Returns
    -------
    ndarray of shape (n_nodes, n_classes)
    """
    counts = np.asarray(counts, dtype=float)
    n = counts.sum(axis=1, keepdims=True)
    spec = parse_smoothing(smoothing)
    if spec is None:
        return counts / n
    kind, m = spec
    if kind == "laplace":
        return (counts + 1.0) / (n + counts.shape[1])
    b = counts[0] / counts[0].sum() if base_rate is None else np.asarray(base_rate, float)
    return (counts + m * b) / (n + m)
