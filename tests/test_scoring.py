"""Tests of the one-pass scoring of every candidate alpha (prunebench.scoring)."""

from __future__ import annotations

import numpy as np
import pytest
from sklearn import metrics as skm
from sklearn.datasets import load_diabetes, make_classification
from sklearn.tree import DecisionTreeClassifier, DecisionTreeRegressor

from prunebench import losses, scoring
from prunebench.exceptions import InvalidParameterError
from prunebench.pruning import cart_candidates, pruning_path

# ---------------------------------------------------------------------------
# One-pass losses of a pruning path: every candidate against scikit-learn's metric
# on the pruned tree's own predictions.


def _fold(n_classes: int, seed: int, weights=None):
    X, y = make_classification(
        900,
        6,
        n_informative=4,
        n_classes=n_classes,
        weights=weights,
        flip_y=0.15,
        random_state=seed,
    )
    tree = DecisionTreeClassifier(min_samples_leaf=3, random_state=seed).fit(X[:600], y[:600])
    return tree, X[600:], y[600:]


@pytest.mark.parametrize("seed", range(3))
@pytest.mark.parametrize("weighted", [False, True])
@pytest.mark.parametrize("risk", ["error", "impurity", "cost"])
def test_one_pass_binary_losses_equal_sklearn_on_pruned_trees(seed, weighted, risk):
    tree, X, y = _fold(2, seed, weights=[0.9, 0.1])
    L = np.array([[0.0, 1.0], [6.0, 0.0]])
    path = pruning_path(tree, risk, loss_matrix=L if risk == "cost" else None)
    w = np.random.default_rng(seed).uniform(0.3, 2.0, y.size) if weighted else None
    held = scoring.leaf_counts(tree, X, y, sample_weight=w)
    alphas = cart_candidates(path.alphas)
    names = ("error", "cost", "brier", "log_loss", "auc", "average_precision")
    got = scoring.candidate_losses(path, held, alphas, names)
    for j, alpha in enumerate(alphas):
        pruned = path.prune(alpha)
        proba = pruned.predict_proba(X)
        pred = path.predict(X, alpha)
        clipped = np.clip(proba, 1e-15, 1)
        clipped /= clipped.sum(axis=1, keepdims=True)
        # scikit-learn as reference library for every loss
        expected = {
            "error": 1 - skm.accuracy_score(y, pred, sample_weight=w),
            "cost": losses.expected_cost(y, pred, L if risk == "cost" else 1 - np.eye(2), w),
            "brier": skm.brier_score_loss(y, proba[:, 1], sample_weight=w),
            "log_loss": skm.log_loss(y, clipped, sample_weight=w, labels=[0, 1]),
            "auc": 1 - skm.roc_auc_score(y, proba[:, 1], sample_weight=w),
            "average_precision": 1 - skm.average_precision_score(y, proba[:, 1], sample_weight=w),
        }
        for name in names:
            assert got[name][j] == pytest.approx(expected[name], rel=1e-9, abs=1e-12), (name, j)
        if risk != "cost":
            # without a loss matrix the leaves predict as the pruned tree does
            np.testing.assert_array_equal(pred, pruned.predict(X))


@pytest.mark.parametrize("smoothing", [None, "laplace", "m4"])
def test_one_pass_multiclass_losses_equal_sklearn(smoothing):
    tree, X, y = _fold(3, 7)
    path = pruning_path(tree, "error")
    held = scoring.leaf_counts(tree, X, y)
    alphas = cart_candidates(path.alphas)
    got = scoring.candidate_losses(
        path, held, alphas, ("brier", "log_loss", "auc"), smoothing=smoothing
    )
    node_proba = losses.leaf_probabilities(path.node_counts, smoothing)
    for j, alpha in enumerate(alphas):
        proba = node_proba[path.leaf_map(alpha)[tree.apply(X)]]
        if smoothing is None:
            np.testing.assert_allclose(proba, path.prune(alpha).predict_proba(X))
        clipped = np.clip(proba, 1e-15, 1)
        clipped /= clipped.sum(axis=1, keepdims=True)
        # scikit-learn as reference library: summed Brier, log loss, one-vs-rest macro AUC
        assert got["brier"][j] == pytest.approx(skm.brier_score_loss(y, proba), rel=1e-9)
        assert got["log_loss"][j] == pytest.approx(skm.log_loss(y, clipped), rel=1e-9)
        if j < alphas.size - 1:  # the root alone has one score: AUC 0.5 for every class
            assert got["auc"][j] == pytest.approx(
                1 - skm.roc_auc_score(y, proba, multi_class="ovr"), abs=1e-12
            )
    assert got["auc"][-1] == pytest.approx(0.5)


def test_one_pass_mse_weighted_equals_sklearn():
    X, y = load_diabetes(return_X_y=True)
    tree = DecisionTreeRegressor(min_samples_leaf=4, random_state=0).fit(X[:300], y[:300])
    path = pruning_path(tree, "squared_error")
    w = np.random.default_rng(1).uniform(0.5, 2.0, y.size - 300)
    held = scoring.leaf_counts(tree, X[300:], y[300:], sample_weight=w)
    alphas = cart_candidates(path.alphas)
    got = scoring.candidate_losses(path, held, alphas, "mse")["mse"]
    for j, alpha in enumerate(alphas):
        # scikit-learn as reference library
        expected = skm.mean_squared_error(
            y[300:], path.prune(alpha).predict(X[300:]), sample_weight=w
        )
        assert got[j] == pytest.approx(expected, rel=1e-9)


def test_one_pass_refuses_wrong_loss_for_the_task():
    tree, X, y = _fold(3, 0)
    path = pruning_path(tree, "error")
    held = scoring.leaf_counts(tree, X, y)
    with pytest.raises(InvalidParameterError, match="'select_by'"):
        scoring.candidate_losses(path, held, cart_candidates(path.alphas), "mse")
    with pytest.raises(InvalidParameterError, match="two classes"):
        scoring.candidate_losses(path, held, cart_candidates(path.alphas), "average_precision")


_RANKING_WAYS = [scoring._ranking_by_pairs, scoring._ranking_by_tables]


@pytest.mark.parametrize("way", _RANKING_WAYS, ids=["pairs", "tables"])
@pytest.mark.parametrize("n_cand", [7, 2**15 + 3])
def test_ranking_by_candidate_matches_brute_force(n_cand, way):
    # by hand: each candidate's AUC and AP from the leaves live at it, through the
    # metrics checked against scikit-learn above; the second size takes the int32 sort
    rng = np.random.default_rng(n_cand)
    m = 12
    score = rng.integers(0, 4, m) / 4.0  # repeated scores: ties across leaves
    pos, neg = rng.integers(0, 5, m).astype(float), rng.integers(0, 5, m).astype(float)
    lo = rng.integers(0, n_cand, m)
    hi = np.minimum(lo + rng.integers(0, 4, m), n_cand)
    probe = np.unique(np.r_[lo, np.maximum(hi - 1, 0)])
    totals = (pos.sum(), neg.sum())  # as if every row were live everywhere
    auc, ap = way(score, pos, neg, totals, lo, hi, n_cand, True)
    for c in probe:
        live = (lo <= c) & (c < hi)
        p, n = pos[live], neg[live]
        if not live.any():
            assert auc[c] == 0 or np.isnan(auc[c])
            continue
        s = score[live]
        pairs = sum(
            p[i] * n[j] * (1.0 if s[i] > s[j] else 0.5 if s[i] == s[j] else 0.0)
            for i in range(s.size)
            for j in range(s.size)
        )
        assert auc[c] == pytest.approx(pairs / (totals[0] * totals[1]), abs=1e-12)
        y = np.r_[np.ones(int(p.sum())), np.zeros(int(n.sum()))]
        rows = np.r_[np.repeat(s, p.astype(int)), np.repeat(s, n.astype(int))]
        if p.sum() > 0:
            expected = losses.average_precision(y, rows) * p.sum() / totals[0]
            assert ap[c] == pytest.approx(expected, abs=1e-12)


def _ranking_reference(score, pos, neg, totals, lo, hi, n_cand):
    """Candidate by candidate in plain Python: AUC and AP from the pooled leaf counts.

    Whole-number counts only, so every count sum is exact; the AP terms are added
    in ascending score order, the order both ways of :mod:`prunebench.scoring` use.
    """
    total_pos, total_neg = totals
    auc, ap = np.full(n_cand, np.nan), np.full(n_cand, np.nan)
    for c in range(n_cand):
        live = [i for i in range(score.size) if lo[i] <= c < hi[i]]
        scores = sorted({float(score[i]) for i in live})
        P = [sum(float(pos[i]) for i in live if score[i] == v) for v in scores]
        N = [sum(float(neg[i]) for i in live if score[i] == v) for v in scores]
        if total_pos > 0 and total_neg > 0:
            pairs = sum(P[j] * (sum(N[:j]) + 0.5 * N[j]) for j in range(len(scores)))
            auc[c] = pairs / (total_pos * total_neg)
        if total_pos > 0:
            acc = 0.0
            for j in range(len(scores)):
                if P[j] > 0:
                    tp, fp = sum(P[j:]), sum(N[j:])
                    acc += P[j] * (tp / (tp + fp))
            ap[c] = acc / total_pos
    return auc, ap


@pytest.mark.parametrize("seed", range(4))
def test_ranking_tables_equal_a_plain_reference_bit_for_bit(seed):
    # whole-number counts with many tied scores, overlapping intervals, empty ones and
    # a class absent in one case (NaN): the tables and the sort give the same bits
    rng = np.random.default_rng(seed)
    m, n_cand = 40, 30
    score = rng.integers(0, 5, m) / 4.0
    pos, neg = rng.integers(0, 6, m).astype(float), rng.integers(0, 6, m).astype(float)
    lo = rng.integers(0, n_cand + 1, m)
    hi = np.minimum(lo + rng.integers(-2, 12, m), n_cand)
    totals = (0.0, neg.sum()) if seed == 3 else (pos.sum(), neg.sum())
    expected = _ranking_reference(score, pos, neg, totals, lo, hi, n_cand)
    for way in _RANKING_WAYS + [scoring._ranking_losses]:
        got = way(score, pos, neg, totals, lo, hi, n_cand, True)
        for g, e in zip(got, expected, strict=True):
            assert np.array_equal(g, e, equal_nan=True), way.__name__


def test_whole_counts_choose_the_tables():
    score, ones = np.array([0.2, 0.5]), np.ones(2)
    assert scoring._whole_counts(score, ones * 3, ones, 10)
    assert not scoring._whole_counts(score, ones * 0.5, ones, 10)  # row weights
    assert not scoring._whole_counts(score, -ones, ones, 10)
    assert not scoring._whole_counts(np.array([0.2, np.nan]), ones, ones, 10)
    assert not scoring._whole_counts(score, ones * 2.0**30, ones, 10)  # sums not exact


@pytest.mark.parametrize("n_classes", [2, 3])
@pytest.mark.parametrize("absent", [False, True])
def test_one_pass_ranking_by_tables_equals_by_pairs(n_classes, absent, monkeypatch):
    # pure leaves tie at 0 and 1; a class missing from the held-out rows gives NaN
    tree, X, y = _fold(n_classes, 11)
    if absent:
        X, y = X[y != 1], y[y != 1]
    path = pruning_path(tree, "impurity")
    held = scoring.leaf_counts(tree, X, y, classes=tree.classes_)
    alphas = cart_candidates(path.alphas)
    names = ("auc", "average_precision") if n_classes == 2 else ("auc",)
    with monkeypatch.context() as patched:  # unweighted counts take the tables
        patched.setattr(scoring, "_ranking_by_pairs", None)
        got = scoring.candidate_losses(path, held, alphas, names)
    monkeypatch.setattr(scoring, "_whole_counts", lambda *args: False)
    expected = scoring.candidate_losses(path, held, alphas, names)
    for name in names:
        assert np.array_equal(got[name], expected[name], equal_nan=True), name
    assert np.isnan(got["auc"]).any() == (absent and n_classes == 2)
