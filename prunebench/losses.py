"""Losses and metrics of classifiers and regressors, as plain numpy functions.

Two kinds live here, sharing one set of definitions:

- **metrics on predictions** (error, balanced error, log loss, Brier score and its
  binary form, ROC AUC, average precision, Murphy's decomposition of the Brier
  score, expected cost under a loss matrix): numpy in, float out, no pandas, fast
  enough to run per fold; each equals the scikit-learn metric of the same name;
- **one-pass losses of a pruning path** (:func:`candidate_losses`): the held-out
  rows of one fold are applied to the full tree once and aggregated per full-tree
  leaf (:func:`leaf_counts`); every candidate alpha's loss then follows from those
  counts mapped onto the candidate subtree's leaves, for every loss the CV choice
  of alpha can be made by (:data:`SELECT_BY`).

Conventions: ``y`` holds class *indices* (positions in the classifier's
``classes_``) wherever a probability matrix is passed, and ``proba`` has one
column per class in the same order; :func:`class_index` converts labels.
Probabilities are clipped to ``[1e-15, 1]`` and renormalised for the log loss,
as prunebench has always stored it.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from typing import TYPE_CHECKING, NamedTuple

import numpy as np

from .exceptions import parameter_error

if TYPE_CHECKING:
    from .pruning import PruningPath

__all__ = [
    "PROBA_CLIP",
    "SELECT_BY",
    "BrierParts",
    "LeafCounts",
    "auc_from_counts",
    "average_precision",
    "balanced_error",
    "brier",
    "brier_binary",
    "brier_decomposition",
    "candidate_losses",
    "class_index",
    "error",
    "expected_cost",
    "leaf_counts",
    "leaf_probabilities",
    "log_loss",
    "parse_smoothing",
    "roc_auc",
]

#: Probabilities are clipped to [PROBA_CLIP, 1] before the log loss, so one
#: confident mistake gives a large, finite loss.
PROBA_CLIP = 1e-15

#: The losses the CV choice of alpha can be made by, per task family. ``auc`` is
#: scored as 1 - AUC and ``average_precision`` as 1 - AP (binary only), so that
#: lower is better for every one.
SELECT_BY = {
    "classification": ("error", "cost", "brier", "log_loss", "auc", "average_precision"),
    "regression": ("mse",),
}
_ADDITIVE = ("error", "cost", "brier", "log_loss", "mse")


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


@dataclass(frozen=True)
class LeafCounts:
    """One fold's held-out rows, applied once to a full tree and pooled per leaf.

    Attributes
    ----------
    leaves : ndarray of shape (n,)
        The full tree's leaves that hold at least one held-out row.
    counts : ndarray of shape (n, n_classes + 1) or None
        Classification: (weighted) held-out rows per leaf and class, in ``classes``
        order; the last column holds labels outside ``classes``.
    sums : ndarray of shape (n, 3) or None
        Regression: per leaf the weight, the weighted sum of ``y`` and of ``y**2``.
    total : float
        The held-out weight (the row count when unweighted).
    classes : ndarray or None
        The class labels of ``counts``.
    weighted : bool
        Whether row weights were given.
    """

    leaves: np.ndarray
    counts: np.ndarray | None
    sums: np.ndarray | None
    total: float
    classes: np.ndarray | None
    weighted: bool


def leaf_counts(estimator, X, y, sample_weight=None, classes=None) -> LeafCounts:
    """Apply held-out rows to a fitted full tree once and pool them per leaf.

    The result serves every pruning risk's path of that tree and every loss in
    :data:`SELECT_BY`: see :func:`candidate_losses`.

    Parameters
    ----------
    estimator : DecisionTreeClassifier or DecisionTreeRegressor
        The fitted full tree (a fold's tree, or ``T_max``).
    X : array-like of shape (n_samples, n_features)
    y : array-like of shape (n_samples,)
    sample_weight : array-like of shape (n_samples,), optional
        Row weights of the held-out loss (see
        :func:`prunebench.selection.validation_weights`).
    classes : array-like, optional
        Classification: the labels to count (by default the tree's ``classes_``);
        pass the full training set's labels when a fold's tree may lack a class.

    Returns
    -------
    LeafCounts
    """
    leaf_of_row = estimator.apply(X)
    leaves, row_leaf = np.unique(leaf_of_row, return_inverse=True)
    row_leaf = row_leaf.ravel()
    weighted = sample_weight is not None
    w = _weights(row_leaf.size, sample_weight) if weighted else None
    if hasattr(estimator, "classes_"):
        classes = np.asarray(estimator.classes_ if classes is None else classes)
        k = classes.size
        y = np.asarray(y)
        pos = np.minimum(np.searchsorted(classes, y), k - 1)
        # labels never seen in training go to the last column
        yi = np.where(classes[pos] == y, pos, k)
        key = row_leaf * (k + 1) + yi
        counts = np.bincount(key, weights=w, minlength=leaves.size * (k + 1))
        counts = counts.reshape(leaves.size, k + 1)
        total = float(row_leaf.size if w is None else w.sum())
        return LeafCounts(leaves, counts, None, total, classes, weighted)
    yv = np.asarray(y, dtype=float)
    if w is None:
        n = np.bincount(row_leaf, minlength=leaves.size).astype(float)
        s1 = np.bincount(row_leaf, weights=yv, minlength=leaves.size)
        s2 = np.bincount(row_leaf, weights=yv * yv, minlength=leaves.size)
    else:
        n = np.bincount(row_leaf, weights=w, minlength=leaves.size)
        s1 = np.bincount(row_leaf, weights=w * yv, minlength=leaves.size)
        s2 = np.bincount(row_leaf, weights=w * yv * yv, minlength=leaves.size)
    total = float(row_leaf.size if w is None else w.sum())
    return LeafCounts(leaves, None, np.stack([n, s1, s2], axis=1), total, None, weighted)


def _node_proba(path: PruningPath, held: LeafCounts, smoothing) -> np.ndarray:
    """Every node's class probabilities, padded to the held-out ``classes``."""
    est = path.estimator
    proba = leaf_probabilities(path.node_counts, smoothing)
    out = np.zeros((proba.shape[0], held.classes.size))
    out[:, np.searchsorted(held.classes, est.classes_)] = proba
    return out


def _additive_terms(name, path, held, proba, node_class, loss_matrix):
    """A function (leaf slots, nodes) -> loss of those leaves' rows under those nodes."""
    c = held.counts
    if name == "error":
        totals = c.sum(axis=1)
        return lambda slot, node: totals[slot] - c[slot, node_class[node]]
    if name == "cost":
        k = held.classes.size
        L = 1.0 - np.eye(k) if loss_matrix is None else loss_matrix
        cols = L.T  # cols[j] = L[:, j], the cost of predicting j for every truth
        return lambda slot, node: np.sum(c[slot, :k] * cols[node_class[node]], axis=1)
    if name == "brier":
        k = held.classes.size
        if k == 2:  # the binary form, as scikit-learn's brier_score_loss
            p1 = proba[:, 1]
            return lambda slot, node: (
                c[slot, 0] * p1[node] ** 2 + c[slot, 1] * (1.0 - p1[node]) ** 2
            )
        sq = np.sum(proba * proba, axis=1)
        n = c[:, :k].sum(axis=1)
        return lambda slot, node: (
            n[slot] * sq[node] - 2.0 * np.sum(c[slot, :k] * proba[node], axis=1) + n[slot]
        )
    if name == "log_loss":
        k = held.classes.size
        clipped = np.clip(proba, PROBA_CLIP, 1.0)
        neg_log = -np.log(clipped / clipped.sum(axis=1, keepdims=True))
        return lambda slot, node: np.sum(c[slot, :k] * neg_log[node], axis=1)
    n, s1, s2 = held.sums.T
    value = path.estimator.tree_.value[:, 0, 0]

    def squared(slot, node):
        v = value[node]
        return s2[slot] - 2 * v * s1[slot] + v * v * n[slot]

    return squared


def _pairs(lo: np.ndarray, hi: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(node position, candidate) for every candidate at which each node is a leaf."""
    length = np.maximum(hi - lo, 0)
    rep = np.repeat(np.arange(lo.size), length)
    start = np.cumsum(length) - length
    return rep, lo[rep] + np.arange(rep.size) - start[rep]


def _ranking_losses(score, pos, neg, totals, rep, cand, n_cand, want_ap: bool):
    """Per candidate ROC AUC (and average precision) from per-leaf counts.

    Leaves of one candidate subtree are ordered by score, tied scores pooled (a
    tie counts as half a pair, as in scikit-learn's ``roc_auc_score``).
    """
    total_pos, total_neg = totals
    out_auc = np.full(n_cand, np.nan)
    out_ap = np.full(n_cand, np.nan)
    s = score[rep]
    order = np.lexsort((s, cand))
    c, s, p, n = cand[order], s[order], pos[rep][order], neg[rep][order]
    run = np.ones(c.size, bool)
    run[1:] = (c[1:] != c[:-1]) | (s[1:] != s[:-1])
    starts = np.flatnonzero(run)
    C, P, N = c[starts], np.add.reduceat(p, starts), np.add.reduceat(n, starts)
    first = np.ones(C.size, bool)
    first[1:] = C[1:] != C[:-1]
    group = np.cumsum(first) - 1
    if total_pos > 0 and total_neg > 0:
        below = np.cumsum(N) - N
        below = below - below[first][group]
        out_auc = np.bincount(C, weights=P * (below + 0.5 * N), minlength=n_cand)
        out_auc /= total_pos * total_neg
    if want_ap and total_pos > 0:
        # descending score within each candidate: cumulate from the top
        above_p = np.cumsum(P[::-1])[::-1]
        above_n = np.cumsum(N[::-1])[::-1]
        last = np.ones(C.size, bool)
        last[:-1] = C[1:] != C[:-1]
        end = np.flatnonzero(last)[group]
        tp = above_p - above_p[end] + P[end]
        fp = above_n - above_n[end] + N[end]
        keep = P > 0
        prec = np.where(keep, tp / np.where(keep, tp + fp, 1.0), 0.0)
        out_ap = np.bincount(C, weights=P / total_pos * prec, minlength=n_cand)
    return out_auc, out_ap


def candidate_losses(
    path: PruningPath,
    held: LeafCounts,
    alphas,
    select_by: str | tuple[str, ...] | list[str] = "error",
    *,
    smoothing: str | None = None,
    totals: bool = False,
) -> dict[str, np.ndarray]:
    """The held-out loss of the optimal subtree at every candidate alpha, in one pass.

    ``held`` pools the rows per full-tree leaf; each leaf's rows are charged to
    every ancestor over the alpha interval in which that ancestor is their leaf
    (additive losses: error, cost, Brier, log loss, MSE), or the ancestors'
    pooled counts are ranked per candidate (AUC, average precision), so no
    subtree is rebuilt and no row is applied twice.

    Parameters
    ----------
    path : PruningPath
        The path of the tree ``held`` was applied to (any risk; paths of one tree
        under several risks share one ``held``).
    held : LeafCounts
        From :func:`leaf_counts` on ``path.estimator``.
    alphas : array-like of shape (n_candidates,)
        Sorted ascending.
    select_by : str or sequence of str, default="error"
        Names from :data:`SELECT_BY`. ``"error"``: (weighted) misclassification
        rate, the leaf predicting ``path.node_class``. ``"cost"``: mean cost under
        ``path.loss_matrix`` (0-1 loss when it is None). ``"brier"``: the binary
        Brier score for two classes, summed over classes for more (as
        scikit-learn's ``brier_score_loss``). ``"log_loss"``: clipped at 1e-15 and
        renormalised. ``"auc"``: 1 - ROC AUC (one-vs-rest macro for three or more
        classes). ``"average_precision"``: 1 - AP (binary). ``"mse"``: mean
        squared error.
    smoothing : None, "laplace" or "m<m>", optional
        Leaf-probability smoothing for the probability losses (:func:`parse_smoothing`).
    totals : bool, default=False
        Return the summed additive losses instead of their means (for
        :meth:`PruningPath.losses`).

    Returns
    -------
    dict of str to ndarray of shape (n_candidates,)
    """
    names = (select_by,) if isinstance(select_by, str) else tuple(select_by)
    classifier = held.counts is not None
    family = "classification" if classifier else "regression"
    for name in names:
        if name not in SELECT_BY[family]:
            raise parameter_error(
                "select_by", "candidate_losses", f"one of {SELECT_BY[family]} for {family}", name
            )
    alphas = np.asarray(alphas, dtype=float)
    if np.any(np.diff(alphas) < 0):
        raise parameter_error("alphas", "candidate_losses", "sorted ascending", alphas)
    proba = node_class = loss_matrix = None
    if classifier:
        k = held.classes.size
        if any(n != "error" for n in names) and held.counts[:, k].sum() > 0:
            raise parameter_error(
                "y", "candidate_losses", f"labels among {list(held.classes)}", "other labels"
            )
        if k != 2 and "average_precision" in names:
            raise parameter_error(
                "select_by", "candidate_losses", "'average_precision' only for two classes", k
            )
        proba = _node_proba(path, held, smoothing)
        node_class = np.searchsorted(held.classes, path.estimator.classes_)[path.node_class]
        if path.loss_matrix is not None:
            own = np.asarray(path.classes)
            pos = np.searchsorted(own, held.classes)
            loss_matrix = path.loss_matrix[np.ix_(pos, pos)]
    additive = [n for n in names if n in _ADDITIVE]
    ranking = [n for n in names if n not in _ADDITIVE]
    terms = {n: _additive_terms(n, path, held, proba, node_class, loss_matrix) for n in additive}
    diff = {n: np.zeros(alphas.size + 1) for n in additive}
    node_alpha, parent_alpha = path.node_alpha, path.parent_alpha
    walked_nodes, walked_slots = [], []
    node = held.leaves.copy()
    leaf_slot = np.arange(node.size)
    while node.size:
        lo = np.searchsorted(alphas, node_alpha[node], side="left")
        hi = np.searchsorted(alphas, parent_alpha[node], side="left")
        live = lo < hi
        for n in additive:
            loss = terms[n](leaf_slot, node)
            diff[n] += np.bincount(lo[live], weights=loss[live], minlength=alphas.size + 1)
            diff[n] -= np.bincount(hi[live], weights=loss[live], minlength=alphas.size + 1)
        if ranking:
            walked_nodes.append(node)
            walked_slots.append(leaf_slot)
        up = path.parent[node] >= 0
        node, leaf_slot = path.parent[node[up]], leaf_slot[up]
    scale = 1.0 if totals else held.total
    out = {n: np.cumsum(diff[n])[: alphas.size] / scale for n in additive}
    if ranking:
        out.update(_ranking(ranking, path, held, proba, alphas, walked_nodes, walked_slots))
    return {n: out[n] for n in names}


def _ranking(names, path, held, proba, alphas, walked_nodes, walked_slots):
    """1 - AUC and 1 - AP per candidate, from the counts pooled at every visited node."""
    nodes = np.concatenate(walked_nodes)
    slots = np.concatenate(walked_slots)
    size = path.node_alpha.size
    visited = np.flatnonzero(np.bincount(nodes, minlength=size))
    k = held.classes.size
    pooled = np.stack(
        [
            np.bincount(nodes, weights=held.counts[slots, c], minlength=size)[visited]
            for c in range(k)
        ],
        axis=1,
    )
    lo = np.searchsorted(alphas, path.node_alpha[visited], side="left")
    hi = np.searchsorted(alphas, path.parent_alpha[visited], side="left")
    rep, cand = _pairs(lo, hi)
    weight = pooled.sum(axis=1)
    class_total = held.counts[:, :k].sum(axis=0)
    out = {}
    if k == 2:
        auc, ap = _ranking_losses(
            proba[visited, 1],
            pooled[:, 1],
            pooled[:, 0],
            (class_total[1], class_total[0]),
            rep,
            cand,
            alphas.size,
            "average_precision" in names,
        )
    else:
        per_class = [
            _ranking_losses(
                proba[visited, c],
                pooled[:, c],
                weight - pooled[:, c],
                (class_total[c], held.total - class_total[c]),
                rep,
                cand,
                alphas.size,
                False,
            )[0]
            for c in range(k)
        ]
        per_class = np.array([a for a in per_class if not np.all(np.isnan(a))])
        auc = per_class.mean(axis=0) if per_class.size else np.full(alphas.size, np.nan)
        ap = None
    if "auc" in names:
        out["auc"] = 1.0 - auc
    if "average_precision" in names:
        out["average_precision"] = 1.0 - ap
    return out
