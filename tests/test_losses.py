"""Tests of the losses and metrics (prunebench.losses)."""

from __future__ import annotations

import numpy as np
import pytest
from sklearn import metrics as skm
from sklearn.datasets import make_classification
from sklearn.tree import DecisionTreeClassifier

from prunebench import losses
from prunebench.exceptions import InvalidParameterError


def _tree_predictions(n_classes: int, seed: int, weighted: bool = False):
    """A held-out set scored by a small tree: few distinct probabilities, many ties."""
    X, y = make_classification(
        600,
        6,
        n_informative=4,
        n_classes=n_classes,
        weights=[0.85, 0.15] if n_classes == 2 else None,
        flip_y=0.1,
        random_state=seed,
    )
    tree = DecisionTreeClassifier(min_samples_leaf=15, random_state=seed).fit(X[:400], y[:400])
    proba = tree.predict_proba(X[400:])
    w = np.random.default_rng(seed).uniform(0.2, 3.0, 200) if weighted else None
    return y[400:], proba, tree.predict(X[400:]), w


CASES = [(k, seed, weighted) for k in (2, 3) for seed in (0, 1) for weighted in (False, True)]


@pytest.mark.parametrize("k, seed, weighted", CASES)
def test_metrics_equal_sklearn(k, seed, weighted):
    # scikit-learn as reference library for every metric, weighted and not
    y, proba, pred, w = _tree_predictions(k, seed, weighted)
    assert losses.error(y, pred, w) == pytest.approx(
        1 - skm.accuracy_score(y, pred, sample_weight=w), abs=1e-12
    )
    assert losses.balanced_error(y, pred, w) == pytest.approx(
        1 - skm.balanced_accuracy_score(y, pred, sample_weight=w), abs=1e-12
    )
    # the same clipping as the stored log loss: clip at 1e-15, renormalise; scikit-learn's
    # own clipping (machine precision) leaves such input unchanged
    clipped = np.clip(proba, 1e-15, 1)
    clipped /= clipped.sum(axis=1, keepdims=True)
    assert losses.log_loss(y, proba, w) == pytest.approx(
        skm.log_loss(y, clipped, sample_weight=w, labels=np.arange(k)), rel=1e-12
    )
    # brier_score_loss: the binary form for two classes, summed over classes for more
    if k == 2:
        assert losses.brier_binary(y, proba[:, 1], w) == pytest.approx(
            skm.brier_score_loss(y, proba[:, 1], sample_weight=w), abs=1e-12
        )
        assert losses.brier(y, proba, w) == pytest.approx(
            2 * skm.brier_score_loss(y, proba[:, 1], sample_weight=w), abs=1e-12
        )
        assert losses.average_precision(y, proba[:, 1], w) == pytest.approx(
            skm.average_precision_score(y, proba[:, 1], sample_weight=w), abs=1e-12
        )
        assert losses.roc_auc(y, proba[:, 1], w) == pytest.approx(
            skm.roc_auc_score(y, proba[:, 1], sample_weight=w), abs=1e-12
        )
    else:
        assert losses.brier(y, proba, w) == pytest.approx(
            skm.brier_score_loss(y, proba, sample_weight=w), abs=1e-12
        )
    assert losses.roc_auc(y, proba, w) == pytest.approx(
        skm.roc_auc_score(y, proba if k > 2 else proba[:, 1], sample_weight=w, multi_class="ovr"),
        abs=1e-12,
    )


def test_auc_and_average_precision_on_continuous_scores():
    # scikit-learn as reference library, with ties only by chance
    rng = np.random.default_rng(5)
    y = rng.uniform(size=500) < 0.1
    s = rng.normal(size=500) + y
    assert losses.roc_auc(y, s) == pytest.approx(skm.roc_auc_score(y, s), abs=1e-12)
    assert losses.average_precision(y, s) == pytest.approx(
        skm.average_precision_score(y, s), abs=1e-12
    )


def test_auc_ties_count_half():
    # by hand: one positive and one negative with the same score is half a pair
    assert losses.auc_from_counts(np.array([0.5]), np.array([1.0]), np.array([1.0])) == 0.5
    # scores 0.2 (2 neg), 0.7 (1 pos, 1 neg), 0.9 (1 pos): the positive at 0.7 beats 2
    # negatives and ties 1 (2 + 0.5); the one at 0.9 beats all 3; 6 pairs
    auc = losses.auc_from_counts(
        np.array([0.7, 0.2, 0.9]), np.array([1, 0, 1]), np.array([1, 2, 0])
    )
    assert auc == pytest.approx((2 + 0.5 + 3) / 6)
    assert np.isnan(losses.auc_from_counts(np.array([0.1, 0.2]), np.ones(2), np.zeros(2)))


def test_expected_cost():
    # by hand: two false negatives at 5 and one false positive at 1 over 6 rows
    L = np.array([[0.0, 1.0], [5.0, 0.0]])
    y = np.array([0, 0, 1, 1, 1, 0])
    pred = np.array([0, 1, 0, 0, 1, 0])
    assert losses.expected_cost(y, pred, L) == pytest.approx(11 / 6)
    # 0-1 loss is the error rate (scikit-learn's accuracy as reference)
    assert losses.expected_cost(y, pred, 1 - np.eye(2)) == pytest.approx(
        1 - skm.accuracy_score(y, pred)
    )


@pytest.mark.parametrize("k, seed, weighted", CASES)
def test_murphy_decomposition_is_exact_over_leaf_probabilities(k, seed, weighted):
    # Murphy (1973): reliability - resolution + uncertainty = Brier score, exactly when
    # forecasts are grouped by their distinct values, as a tree's leaves are
    y, proba, _, w = _tree_predictions(k, seed, weighted)
    parts = losses.brier_decomposition(y, proba, w)
    assert parts.brier == pytest.approx(losses.brier(y, proba, w), abs=1e-15)
    assert abs(parts.reliability - parts.resolution + parts.uncertainty - parts.brier) < 1e-12
    assert parts.reliability >= 0 and parts.resolution >= 0
    if k == 2:
        binary = losses.brier_decomposition(y, proba, w, binary=True)
        # scikit-learn's brier_score_loss as reference for the binary score
        assert binary.brier == pytest.approx(
            skm.brier_score_loss(y, proba[:, 1], sample_weight=w), abs=1e-12
        )
        assert (
            abs(binary.reliability - binary.resolution + binary.uncertainty - binary.brier) < 1e-12
        )
        # for two classes the summed score is twice the binary one, part by part
        np.testing.assert_allclose(np.array(parts), 2 * np.array(binary), atol=1e-12)


def test_murphy_parts_by_hand():
    # by hand: forecasts 0.8 on 4 rows (3 positive) and 0.2 on 4 rows (1 positive);
    # reliability = (0.05^2 * 8) / 8 = 0.0025, resolution = 0.25^2 = 0.0625,
    # uncertainty = 0.5 * 0.5 = 0.25; Brier = 0.0025 - 0.0625 + 0.25 = 0.19
    y = np.array([1, 1, 1, 0, 1, 0, 0, 0])
    p1 = np.array([0.8] * 4 + [0.2] * 4)
    parts = losses.brier_decomposition(y, np.c_[1 - p1, p1], binary=True)
    np.testing.assert_allclose(parts, [0.0025, 0.0625, 0.25, 0.19], atol=1e-15)


def test_leaf_smoothing():
    counts = np.array([[90.0, 10.0], [3.0, 0.0], [0.0, 7.0]])
    np.testing.assert_allclose(losses.leaf_probabilities(counts), counts / counts.sum(1)[:, None])
    # Laplace (Provost & Domingos 2003): (n_c + 1) / (n + K)
    np.testing.assert_allclose(
        losses.leaf_probabilities(counts, "laplace")[1:], [[4 / 5, 1 / 5], [1 / 9, 8 / 9]]
    )
    # m-estimate towards the root's shares (0.9, 0.1) with m = 10: (n_c + m b_c) / (n + m)
    np.testing.assert_allclose(losses.leaf_probabilities(counts, "m10")[1], [(3 + 9) / 13, 1 / 13])
    np.testing.assert_allclose(losses.leaf_probabilities(counts, "m10").sum(axis=1), 1.0)


@pytest.mark.parametrize("bad", ["m", "m-1", "m0", "lapl", 3, "M2"])
def test_bad_smoothing_is_refused(bad):
    with pytest.raises(InvalidParameterError, match="The 'smoothing' parameter"):
        losses.parse_smoothing(bad)


def test_class_index_refuses_unknown_labels():
    np.testing.assert_array_equal(losses.class_index(["b", "a", "c"], ["a", "b", "c"]), [1, 0, 2])
    with pytest.raises(InvalidParameterError, match="'y'"):
        losses.class_index(["a", "z"], ["a", "b"])


# ---- fold_metrics: every classification metric of the vocabulary on one outer fold ----------


def _old_scores(proba, y, classes, pred):
    """The per-fold metrics as prunebench 0.1.0 computed them (evaluate._classification_scores)."""
    from sklearn.metrics import balanced_accuracy_score

    truth = np.searchsorted(classes, y)
    onehot = np.zeros_like(proba)
    onehot[np.arange(len(y)), truth] = 1.0
    clipped = np.clip(proba, 1e-15, 1.0)
    clipped /= clipped.sum(axis=1, keepdims=True)
    accuracy = float(np.mean(pred == y))
    return {
        "error": 1.0 - accuracy,
        "accuracy": accuracy,
        "balanced_accuracy": float(balanced_accuracy_score(y, pred)),
        "log_loss": float(-np.mean(np.log(clipped[np.arange(len(y)), truth]))),
        "brier": float(np.mean(np.sum((proba - onehot) ** 2, axis=1))),
    }


@pytest.mark.parametrize("n_classes", [2, 3])
def test_fold_metrics_are_the_stored_ones_and_scikit_learns(n_classes):
    from sklearn.metrics import average_precision_score, roc_auc_score
    from sklearn.tree import DecisionTreeClassifier

    rng = np.random.default_rng(n_classes)
    X = rng.normal(size=(400, 3))
    y = np.where(X[:, 0] + rng.normal(size=400) > 1.2, "late", "paid")
    if n_classes == 3:
        y[X[:, 1] > 1.0] = "disputed"
    tree = DecisionTreeClassifier(max_depth=3, random_state=0).fit(X[:300], y[:300])
    classes = np.unique(y)
    proba, pred = tree.predict_proba(X[300:]), tree.predict(X[300:])
    got = losses.fold_metrics(proba, y[300:], classes, pred=pred)
    # bit-identical to what 0.1.0 stored (the previous-release fixture test checks it too)
    for name, value in _old_scores(proba, y[300:], classes, pred).items():
        assert got[name] == value, name
    truth = np.searchsorted(classes, y[300:])
    # scikit-learn as reference library
    if n_classes == 2:
        assert got["auc"] == pytest.approx(roc_auc_score(truth, proba[:, 1]), abs=1e-12)
        assert got["average_precision"] == pytest.approx(
            average_precision_score(truth, proba[:, 1]), abs=1e-12
        )
    else:
        assert got["auc"] == pytest.approx(
            roc_auc_score(truth, proba, multi_class="ovr", average="macro"), abs=1e-12
        )
        assert got["average_precision"] is None
    # Murphy (1973): calibration + refinement (= uncertainty - resolution) is the Brier score
    assert got["brier_calibration"] + got["brier_refinement"] == pytest.approx(
        got["brier"], abs=1e-12
    )
    assert got["brier_calibration"] >= 0
    # without a loss matrix the expected cost is 0-1 loss: the error
    assert got["expected_cost"] == pytest.approx(got["error"], abs=1e-15)


def test_fold_metrics_expected_cost_and_calibration_by_hand():
    # four rows, two classes (0 = good, 1 = bad), hand calculation:
    # truth 0 0 1 1, predicted 1 0 0 1; L(bad -> good) = 5, L(good -> bad) = 1
    # cost = (1 + 0 + 5 + 0) / 4 = 1.5
    proba = np.array([[0.25, 0.75], [0.75, 0.25], [0.75, 0.25], [0.25, 0.75]])
    y = np.array([0, 0, 1, 1])
    got = losses.fold_metrics(proba, y, np.array([0, 1]), loss_matrix=[[0, 1], [5, 0]])
    assert got["expected_cost"] == 1.5
    assert got["error"] == 0.5
    # two forecasts, each right half the time: reliability = 2 * (0.75 - 0.5)^2 = 0.125 per
    # row (summed over both class columns); resolution 0, uncertainty 2 * 0.5 * 0.5 = 0.5
    assert got["brier_calibration"] == pytest.approx(0.125)
    assert got["brier_refinement"] == pytest.approx(0.5)
    assert got["brier"] == pytest.approx(0.625)  # (1.125 + 0.125 + 1.125 + 0.125) / 4
    assert got["auc"] == pytest.approx(0.5)  # one pair in order, one reversed, two tied
