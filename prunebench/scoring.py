"""Every candidate alpha's held-out loss from one pass of the full tree.

One fold's held-out rows are applied to its full tree once and pooled per
full-tree leaf (:func:`leaf_counts`).  Under a candidate alpha a row lands in the
shallowest node on its path that has collapsed by then, so the loss of every
candidate subtree follows from those pooled counts (:func:`candidate_losses`):

- additive losses (error, expected cost, Brier, log loss, MSE): the rows pooled at
  every node on a leaf's path to the root are charged to that node over the alpha
  interval in which it is their leaf, one difference array for all candidates;
- ranking losses (1 - ROC AUC, 1 - average precision): per candidate, the pooled
  positive and negative counts of its leaves ordered by leaf score, ties pooled
  (a tie counts as half a pair, as scikit-learn's ``roc_auc_score`` does).  With
  whole-number counts (no row weights) each distinct leaf set is scored once from
  integer tables of the counts per leaf score; otherwise every candidate's leaves
  are sorted by score, so weighted sums keep their order of summation.

The pooled counts do not depend on the pruning risk, so one :class:`LeafCounts`
serves the paths of one tree under every risk, and one call scores every loss.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from .exceptions import parameter_error
from .losses import PROBA_CLIP, leaf_probabilities

if TYPE_CHECKING:
    from .pruning import PruningPath

__all__ = ["SELECT_BY", "LeafCounts", "candidate_losses", "leaf_counts"]

#: The losses the CV choice of alpha can be made by, per task family. ``auc`` is
#: scored as 1 - AUC and ``average_precision`` as 1 - AP (binary only), so that
#: lower is better for every one.
SELECT_BY = {
    "classification": ("error", "cost", "brier", "log_loss", "auc", "average_precision"),
    "regression": ("mse",),
}
_ADDITIVE = ("error", "cost", "brier", "log_loss", "mse")


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
    w = None
    if weighted:
        w = np.asarray(sample_weight, dtype=float)
        if w.shape != row_leaf.shape:
            raise parameter_error(
                "sample_weight", "leaf_counts", f"an array of {row_leaf.size} weights", w.shape
            )
    total = float(row_leaf.size if w is None else w.sum())
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
    return LeafCounts(leaves, None, np.stack([n, s1, s2], axis=1), total, None, weighted)


def _node_proba(path: PruningPath, held: LeafCounts, smoothing) -> np.ndarray:
    """Every node's class probabilities, padded to the held-out ``classes``."""
    proba = leaf_probabilities(path.node_counts, smoothing)
    out = np.zeros((proba.shape[0], held.classes.size))
    out[:, np.searchsorted(held.classes, path.estimator.classes_)] = proba
    return out


def _node_losses(name, pooled, nodes, proba, node_class, loss_matrix) -> np.ndarray:
    """The loss of the held-out rows pooled at ``nodes`` were each node a leaf."""
    k = pooled.shape[1] - 1
    c = pooled[:, :k]
    if name == "error":
        return pooled.sum(axis=1) - c[np.arange(nodes.size), node_class[nodes]]
    if name == "cost":
        L = 1.0 - np.eye(k) if loss_matrix is None else loss_matrix
        # L.T[j] = L[:, j]: the cost of predicting j for every true class
        return np.sum(c * L.T[node_class[nodes]], axis=1)
    p = proba[nodes]
    if name == "brier":
        if k == 2:  # the binary form, as scikit-learn's brier_score_loss
            return c[:, 0] * p[:, 1] ** 2 + c[:, 1] * (1.0 - p[:, 1]) ** 2
        n = c.sum(axis=1)
        return n * np.sum(p * p, axis=1) - 2.0 * np.sum(c * p, axis=1) + n
    clipped = np.clip(p, PROBA_CLIP, 1.0)
    return -np.sum(c * np.log(clipped / clipped.sum(axis=1, keepdims=True)), axis=1)


def _interval_sum(lo, hi, values, n_cand) -> np.ndarray:
    """Per candidate, the sum of ``values`` whose candidate interval [lo, hi) holds it."""
    live = lo < hi
    diff = np.bincount(lo[live], weights=values[live], minlength=n_cand + 1)
    diff -= np.bincount(hi[live], weights=values[live], minlength=n_cand + 1)
    return np.cumsum(diff)[:n_cand]


def _pairs(lo: np.ndarray, hi: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(node position, candidate) for every candidate at which each node is a leaf."""
    length = np.maximum(hi - lo, 0)
    rep = np.repeat(np.arange(lo.size), length)
    start = np.cumsum(length) - length
    return rep, lo[rep] + np.arange(rep.size) - start[rep]


# Below this, sums of whole numbers in float64 are exact in any order.
_EXACT_BOUND = 2.0**52


def _ranking_losses(score, pos, neg, totals, lo, hi, n_cand, want_ap: bool):
    """Per candidate ROC AUC (and average precision) from per-node counts.

    Node ``i`` is a leaf of the candidate subtrees ``lo[i] <= c < hi[i]``; ``pos``
    and ``neg`` are the held-out positives and negatives pooled at each node.
    Returns ``(auc, ap)``, NaN where a class is absent from ``totals``.

    Both ways give the same bits when the counts are whole numbers: every sum
    of whole numbers up to 2**52 is then exact, whatever its order, in either way,
    and what is not a whole number (each AP precision, its products and their
    sum in score order, the final divisions) is computed from the same operands
    in the same order. Other counts (row weights) take the per-candidate sort,
    whose order of floating-point summation stored results were computed in.
    """
    if _whole_counts(score, pos, neg, n_cand):
        return _ranking_by_tables(score, pos, neg, totals, lo, hi, n_cand, want_ap)
    return _ranking_by_pairs(score, pos, neg, totals, lo, hi, n_cand, want_ap)


def _whole_counts(score, pos, neg, n_cand) -> bool:
    """Whether every count is a non-negative whole number small enough to sum exactly.

    The largest sum either way forms is below ``max(n_cand, W) * W`` (``W`` the
    summed counts of all nodes; the pairs way cumulates over every candidate).
    """
    counts = np.concatenate([pos, neg])
    total = float(counts.sum())  # NaN or inf fail the bound
    if not 2.0 * total * max(float(n_cand), total) < _EXACT_BOUND:
        return False
    if np.isnan(score).any() or counts.min(initial=0.0) < 0:
        return False
    return bool((np.floor(counts) == counts).all())


def _count_table(key_lo, key_hi, weights, n_scores, width) -> np.ndarray:
    """Per segment (rows) and distinct score (columns), the counts of the live nodes.

    Each node adds its count at its first segment and takes it at its end, in a
    score-major table whose rows therefore each sum to 0: one flat cumulative sum
    runs along the segments of every score.
    """
    diff = np.bincount(
        np.concatenate([key_lo, key_hi]),
        np.concatenate([weights, -weights]),
        n_scores * width,
    ).astype(np.int64)
    np.cumsum(diff, out=diff)
    return diff.reshape(n_scores, width).T.copy()


def _ranking_by_tables(score, pos, neg, totals, lo, hi, n_cand, want_ap: bool):
    """Per candidate ROC AUC (and average precision) from integer count tables.

    Candidates between two consecutive ends of the nodes' intervals share one set
    of leaves (a segment); per segment and distinct leaf score the live positives
    ``P`` and negatives ``N`` form two int64 tables, and cumulative sums along the
    scores give each segment's negatives below a score (AUC) and its positives and
    negatives at or above it (AP). Tied leaves share a column, so a tie counts
    half a pair. For whole-number counts only (:func:`_whole_counts`).
    """
    total_pos, total_neg = totals
    auc = np.full(n_cand, np.nan)
    ap = np.full(n_cand, np.nan)
    want_auc = total_pos > 0 and total_neg > 0
    want_ap = want_ap and total_pos > 0
    if not (want_auc or want_ap):
        return auc, ap
    live = np.flatnonzero(lo < hi)
    lo, hi = lo[live], hi[live]
    cut = np.zeros(n_cand + 1, bool)
    cut[lo] = True
    cut[hi] = True
    cut[0] = cut[n_cand] = True
    seg = np.cumsum(cut) - 1  # the segment of every candidate; n_cand -> the end
    n_seg = int(seg[n_cand])
    width = n_seg + 1
    s = score[live]
    order = np.argsort(s)
    ordered = s[order]
    distinct = np.ones(s.size, bool)
    np.not_equal(ordered[1:], ordered[:-1], out=distinct[1:])
    rank = np.empty(s.size, np.intp)
    rank[order] = np.cumsum(distinct) - 1
    n_scores = int(distinct.sum())
    key_lo, key_hi = rank * width + seg[lo], rank * width + seg[hi]
    P = _count_table(key_lo, key_hi, pos[live], n_scores, width)
    N = _count_table(key_lo, key_hi, neg[live], n_scores, width)
    seg_of = seg[:n_cand]
    if want_auc:
        # twice (negatives below the score + half those tied with it), per cell
        below = N.ravel().cumsum().reshape(width, n_scores)
        below -= below[:, :1] - N[:, :1]
        below *= 2
        below -= N
        pairs = np.einsum("ij,ij->i", P, below) * 0.5
        pairs /= total_pos * total_neg
        auc = pairs[seg_of]
    if want_ap:
        # scores holding positives, in ascending order per segment as the pairs way sums
        cell = np.flatnonzero(P[:n_seg].ravel() > 0)
        row = cell // n_scores
        last = (row + 1) * n_scores - 1
        cum_p, cum_n = P.ravel().cumsum(), N.ravel().cumsum()
        p = P.ravel()[cell]
        tp = cum_p[last] - cum_p[cell] + p
        fp = cum_n[last] - cum_n[cell] + N.ravel()[cell]
        ap = (np.bincount(row, p * (tp / (tp + fp)), n_seg) / total_pos)[seg_of]
    return auc, ap


def _ranking_by_pairs(score, pos, neg, totals, lo, hi, n_cand, want_ap: bool):
    """Per candidate ROC AUC (and average precision), each candidate's leaves sorted.

    Node ``i`` is a leaf of the candidate subtrees ``lo[i] <= c < hi[i]``. The
    (node, candidate) pairs are generated with the nodes in score order and then
    stably sorted by candidate (a radix sort on small integers), so each
    candidate's leaves come out in score order without a comparison sort; leaves
    of one candidate with the same score are pooled, so a tie counts half a pair.
    """
    total_pos, total_neg = totals
    auc = np.full(n_cand, np.nan)
    ap = np.full(n_cand, np.nan)
    _, rank = np.unique(score, return_inverse=True)
    by_score = np.argsort(rank, kind="stable")
    rep, cand = _pairs(lo[by_score], hi[by_score])
    rep = by_score[rep]
    key = cand.astype(np.int16 if n_cand < 2**15 else np.int32)
    order = np.argsort(key, kind="stable")
    c, r = cand[order], rank[rep[order]]
    run = np.ones(c.size, bool)
    run[1:] = (c[1:] != c[:-1]) | (r[1:] != r[:-1])
    starts = np.flatnonzero(run)
    node = rep[order]
    C = c[starts]
    P = np.add.reduceat(pos[node], starts)
    N = np.add.reduceat(neg[node], starts)
    first = np.ones(C.size, bool)
    first[1:] = C[1:] != C[:-1]
    group = np.cumsum(first) - 1
    if total_pos > 0 and total_neg > 0:
        below = np.cumsum(N) - N
        below = below - below[first][group]
        # one division, not in place: without pairs bincount returns integers
        auc = np.bincount(C, weights=P * (below + 0.5 * N), minlength=n_cand) / (
            total_pos * total_neg
        )
    if want_ap and total_pos > 0:
        # descending score within each candidate: cumulate from each group's end
        above_p, above_n = np.cumsum(P[::-1])[::-1], np.cumsum(N[::-1])[::-1]
        last = np.ones(C.size, bool)
        last[:-1] = C[1:] != C[:-1]
        end = np.flatnonzero(last)[group]
        tp = above_p - above_p[end] + P[end]
        fp = above_n - above_n[end] + N[end]
        prec = np.divide(tp, tp + fp, out=np.zeros_like(tp), where=P > 0)
        ap = np.bincount(C, weights=P * prec, minlength=n_cand) / total_pos
    return auc, ap


def _check(names, held, alphas):
    classifier = held.counts is not None
    family = "classification" if classifier else "regression"
    for name in names:
        if name not in SELECT_BY[family]:
            raise parameter_error(
                "select_by", "candidate_losses", f"one of {SELECT_BY[family]} for {family}", name
            )
    if np.any(np.diff(alphas) < 0):
        raise parameter_error("alphas", "candidate_losses", "sorted ascending", alphas)
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

    Parameters
    ----------
    path : PruningPath
        The path of the tree ``held`` was applied to (any risk: the paths of one
        tree under several risks share one ``held``).
    held : LeafCounts
        From :func:`leaf_counts` on ``path.estimator``.
    alphas : array-like of shape (n_candidates,)
        Sorted ascending.
    select_by : str or sequence of str, default="error"
        Names from :data:`SELECT_BY`. ``"error"``: (weighted) misclassification
        rate, the leaf predicting ``path.node_class``. ``"cost"``: mean cost under
        ``path.loss_matrix`` (0-1 loss when it is None). ``"brier"``: the binary
        Brier score for two classes, summed over classes for more (as
        scikit-learn's ``brier_score_loss``). ``"log_loss"``: probabilities
        clipped at 1e-15 and renormalised. ``"auc"``: 1 - ROC AUC (one-vs-rest
        macro average for three or more classes, leaving out classes absent from
        the held-out rows). ``"average_precision"``: 1 - AP (two classes).
        ``"mse"``: mean squared error.
    smoothing : None, "laplace" or "m<m>", optional
        Leaf-probability smoothing for the probability losses
        (:func:`prunebench.losses.parse_smoothing`).
    totals : bool, default=False
        Return the summed additive losses instead of their means (as
        :meth:`PruningPath.losses` does).

    Returns
    -------
    dict of str to ndarray of shape (n_candidates,)
        One entry per name in ``select_by``, in that order.
    """
    names = (select_by,) if isinstance(select_by, str) else tuple(select_by)
    alphas = np.asarray(alphas, dtype=float)
    _check(names, held, alphas)
    scale = 1.0 if totals else held.total
    if held.counts is None:
        return {"mse": _squared_error(path, held, alphas) / scale}
    k = held.classes.size
    proba = _node_proba(path, held, smoothing)
    node_class = np.searchsorted(held.classes, path.estimator.classes_)[path.node_class]
    loss_matrix = None
    if path.loss_matrix is not None:
        pos = np.searchsorted(np.asarray(path.classes), held.classes)
        loss_matrix = path.loss_matrix[np.ix_(pos, pos)]
    # every (node, held-out leaf) pair on the leaves' paths to the root
    node, slot = held.leaves, np.arange(held.leaves.size)
    walked_nodes, walked_slots = [node], [slot]
    while node.size:
        up = path.parent[node] >= 0
        node, slot = path.parent[node[up]], slot[up]
        walked_nodes.append(node)
        walked_slots.append(slot)
    nodes, slots = np.concatenate(walked_nodes), np.concatenate(walked_slots)
    size = path.node_alpha.size
    visited = np.flatnonzero(np.bincount(nodes, minlength=size))
    pooled = np.stack(
        [
            np.bincount(nodes, weights=held.counts[slots, c], minlength=size)[visited]
            for c in range(k + 1)
        ],
        axis=1,
    )
    lo = np.searchsorted(alphas, path.node_alpha[visited], side="left")
    hi = np.searchsorted(alphas, path.parent_alpha[visited], side="left")
    out = {}
    for name in names:
        if name in _ADDITIVE:
            values = _node_losses(name, pooled, visited, proba, node_class, loss_matrix)
            out[name] = _interval_sum(lo, hi, values, alphas.size) / scale
    ranking = [n for n in names if n not in _ADDITIVE]
    if ranking:
        out.update(_ranking(ranking, held, proba[visited], pooled[:, :k], lo, hi, alphas.size))
    return {n: out[n] for n in names}


def _squared_error(path: PruningPath, held: LeafCounts, alphas: np.ndarray) -> np.ndarray:
    """Summed squared error per candidate, charged leaf by leaf up the tree.

    Kept in this order of summation (each leaf's sums against each ancestor's
    value, one depth level at a time) so stored curves stay bit for bit the same.
    """
    n, s1, s2 = held.sums.T
    value = path.estimator.tree_.value[:, 0, 0]
    node_alpha, parent_alpha = path.node_alpha, path.parent_alpha
    diff = np.zeros(alphas.size + 1)
    node, slot = held.leaves.copy(), np.arange(held.leaves.size)
    while node.size:
        lo = np.searchsorted(alphas, node_alpha[node], side="left")
        hi = np.searchsorted(alphas, parent_alpha[node], side="left")
        v = value[node]
        loss = s2[slot] - 2 * v * s1[slot] + v * v * n[slot]
        live = lo < hi
        diff += np.bincount(lo[live], weights=loss[live], minlength=alphas.size + 1)
        diff -= np.bincount(hi[live], weights=loss[live], minlength=alphas.size + 1)
        up = path.parent[node] >= 0
        node, slot = path.parent[node[up]], slot[up]
    return np.cumsum(diff)[: alphas.size]


def _ranking(names, held, proba, pooled, lo, hi, n_cand) -> dict[str, np.ndarray]:
    """1 - AUC and 1 - AP per candidate, from the counts pooled at every visited node."""
    k = pooled.shape[1]
    class_total = held.counts[:, :k].sum(axis=0)
    if k == 2:
        auc, ap = _ranking_losses(
            proba[:, 1],
            pooled[:, 1],
            pooled[:, 0],
            (class_total[1], class_total[0]),
            lo,
            hi,
            n_cand,
            "average_precision" in names,
        )
    else:
        weight = pooled.sum(axis=1)
        per_class = [
            _ranking_losses(
                proba[:, c],
                pooled[:, c],
                weight - pooled[:, c],
                (class_total[c], class_total.sum() - class_total[c]),
                lo,
                hi,
                n_cand,
                False,
            )[0]
            for c in range(k)
        ]
        defined = [a for a in per_class if not np.all(np.isnan(a))]
        auc = np.mean(defined, axis=0) if defined else np.full(n_cand, np.nan)
        ap = None
    out = {}
    if "auc" in names:
        out["auc"] = 1.0 - auc
    if "average_precision" in names:
        out["average_precision"] = 1.0 - ap
    return out
