"""Tests of the simulation benchmarks against their published facts."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.stats import ncx2, norm

from prunebench import PrunedTreeClassifier
from prunebench.datasets import load_dataset, simulated


def test_twonorm_bayes_error_is_phi_minus_2():
    # Breiman (1996): twonorm's Bayes error is Φ(-2) = 0.0228; the Bayes rule is the
    # sign of the feature sum
    X, y = simulated.twonorm(200_000, seed=1)
    error = np.mean((X.sum(axis=1) < 0).astype(int) != y)
    assert norm.cdf(-2) == pytest.approx(0.02275, abs=5e-5)
    assert error == pytest.approx(norm.cdf(-2), abs=0.0015)


def test_led_bayes_error_is_0_26():
    # Breiman et al. (1984) §2.6: Bayes error 0.26 at 10% segment noise; exact by
    # enumerating all 128 segment patterns
    import itertools

    patterns = np.array(list(itertools.product([0, 1], repeat=7)))
    flips = (patterns[:, None, :] != simulated.LED_SEGMENTS[None]).sum(axis=2)
    likelihood = 0.1**flips * 0.9 ** (7 - flips)
    exact = 1 - likelihood.max(axis=1).sum() / 10
    assert exact == pytest.approx(0.26, abs=0.001)
    # a sample classified by the same rule (most likely digit) errs at that rate
    X, y = simulated.led(200_000, seed=2)
    distances = (X[:, None, :] != simulated.LED_SEGMENTS[None]).sum(axis=2)
    assert np.mean(distances.argmin(axis=1) != y) == pytest.approx(exact, abs=0.004)
    wide, _ = simulated.led(10, seed=2, irrelevant=17)
    assert wide.shape == (10, 24)


def test_waveform_follows_its_definition():
    # Breiman et al. (1984) §2.6.2: class means are the midpoints of two base waves
    h1, h2, h3 = simulated.waveform_bases()
    assert h1.max() == 6 and h1.argmax() == 10  # peak at m = 11
    assert np.array_equal(h2[4:], h1[:-4]) and np.array_equal(h3[:-4], h1[4:])
    X, y = simulated.waveform(60_000, seed=3)
    for label, (a, b) in enumerate([(h1, h2), (h1, h3), (h2, h3)]):
        assert np.abs(X[y == label].mean(axis=0) - (a + b) / 2).max() < 0.08
    assert np.abs(np.bincount(y) / len(y) - 1 / 3).max() < 0.01


def test_waveform_cv_pruned_tree_errs_as_cart_reported():
    # Breiman et al. (1984) report about 0.28 for CART on 300 waveform rows; a
    # 1-SE-pruned tree here averages 0.28-0.33 on large test samples
    errors = []
    for seed in range(4):
        X, y = simulated.waveform(300, seed=seed)
        X_test, y_test = simulated.waveform(5000, seed=100 + seed)
        model = PrunedTreeClassifier(random_state=seed).fit(X, y)
        errors.append(1 - model.score(X_test, y_test))
    assert 0.27 <= np.mean(errors) <= 0.34


def test_ringnorm_bayes_error_matches_the_exact_value_of_our_definition():
    # with a = 2/sqrt(20): the Bayes rule compares (3/8)|x - 4μ/3|² with
    # d·ln 2 + |μ|²/6, so the exact error follows from noncentral chi-square
    # distributions (our derivation); Breiman (1996) reports 1.3%
    d, m2 = 20, 20 * simulated.RINGNORM_A**2
    c = d * np.log(2) + m2 / 6
    exact = 0.5 * ncx2.cdf(2 * c / 3, d, 4 * m2 / 9) + 0.5 * ncx2.sf(8 * c / 3, d, m2 / 9)
    assert exact == pytest.approx(0.0124, abs=1e-4)
    X, y = simulated.ringnorm(200_000, seed=4)
    mu = np.full(d, simulated.RINGNORM_A)
    class1 = 0.375 * ((X - 4 * mu / 3) ** 2).sum(axis=1) <= c
    assert np.mean(class1.astype(int) != y) == pytest.approx(exact, abs=0.0012)


def test_threenorm_bayes_error():
    # the Bayes rule compares the two densities; 0.1046 is what our definition
    # implies (our Monte Carlo run of 10^7 rows, standard error 1e-4); Breiman
    # (1996) reports 10.5%
    a = 2 / np.sqrt(20)
    one = np.full(20, a)
    alternating = np.where(np.arange(20) % 2 == 0, 1.0, -1.0) * a
    X, y = simulated.threenorm(200_000, seed=5)
    log0 = np.logaddexp(-((X - one) ** 2).sum(1) / 2, -((X + one) ** 2).sum(1) / 2) + np.log(0.5)
    log1 = -((X - alternating) ** 2).sum(1) / 2
    assert np.mean((log1 > log0).astype(int) != y) == pytest.approx(0.1046, abs=0.003)


def test_hastie_threshold_is_the_chi2_median():
    # ESL 2nd ed. eq. 10.2: y = 1 where the sum of ten squared N(0,1) exceeds 9.34,
    # the median of χ²_10
    from scipy.stats import chi2

    assert chi2.median(10) == pytest.approx(9.34, abs=0.005)
    X, y = simulated.hastie_10_2(20_000, seed=6)
    assert np.array_equal(y == 1, (X**2).sum(axis=1) > 9.34)


@pytest.mark.parametrize(
    "which, truth",
    [
        (
            1,
            lambda X: (
                10 * np.sin(np.pi * X[:, 0] * X[:, 1])
                + 20 * (X[:, 2] - 0.5) ** 2
                + 10 * X[:, 3]
                + 5 * X[:, 4]
            ),
        ),
        (2, lambda X: np.sqrt(X[:, 0] ** 2 + (X[:, 1] * X[:, 2] - 1 / (X[:, 1] * X[:, 3])) ** 2)),
        (3, lambda X: np.arctan((X[:, 1] * X[:, 2] - 1 / (X[:, 1] * X[:, 3])) / X[:, 0])),
    ],
)
def test_friedman_noise_is_as_stated(which, truth):
    # Friedman (1991) functions; the residual about the true function has the
    # stated noise standard deviation
    X, y = simulated.friedman(which)(n_samples=50_000, seed=7)
    stated = {1: 1.0, 2: 125.0, 3: 0.1}[which]
    assert np.std(y - truth(X)) == pytest.approx(stated, rel=0.02)


def test_simulations_are_reproducible_and_sized_by_parameters():
    a = load_dataset("waveform", n_samples=300, seed=1)
    b = load_dataset("waveform", n_samples=300, seed=1)
    c = load_dataset("waveform", n_samples=300, seed=2)
    assert a.X.shape == (300, 21) and a.fingerprint == b.fingerprint != c.fingerprint


# ---- the rare-outcome logistic problem -----------------------------------------------


def test_rare_logistic_bayes_auc_matches_a_double_integral_and_a_million_rows():
    from scipy.integrate import dblquad, quad
    from scipy.special import expit
    from sklearn.metrics import roc_auc_score

    signal, rate = 2.0, 0.05
    b0 = simulated.rare_logistic_intercept(signal, rate)
    # the intercept gives the stated positive rate (scipy's adaptive quadrature as the
    # independent reference)
    positives = quad(lambda s: norm.pdf(s, scale=signal) * expit(b0 + s), -np.inf, np.inf)[0]
    assert positives == pytest.approx(rate, abs=1e-9)
    # AUC = P(s1 > s0) from its definition as a double integral over the joint density
    # of a positive's and a negative's score (scipy dblquad), against our one-grid value
    truth = simulated.rare_logistic_bayes_auc(signal, rate)

    def joint(s0, s1):
        f1 = norm.pdf(s1, scale=signal) * expit(b0 + s1) / rate
        f0 = norm.pdf(s0, scale=signal) * (1 - expit(b0 + s0)) / (1 - rate)
        return f1 * f0

    lim = 12 * signal
    double = dblquad(joint, -lim, lim, lambda s1: -lim, lambda s1: s1, epsabs=1e-10)[0]
    assert truth == pytest.approx(double, abs=1e-7)
    # a 10^6-row sample ranked by its true probability (scikit-learn's roc_auc_score as
    # reference); the standard error of the estimate is about 7e-4 here
    X, y = simulated.rare_logistic(1_000_000, seed=11)
    p = expit(b0 + X[:, :5].sum(axis=1) * (signal / np.sqrt(5)))
    assert y.mean() == pytest.approx(rate, abs=0.001)
    assert roc_auc_score(y, p) == pytest.approx(truth, abs=0.003)
    # no feature beyond the informative five carries signal: ranking by one of them is
    # no better than chance
    assert roc_auc_score(y, X[:, 7]) == pytest.approx(0.5, abs=0.005)


@pytest.mark.parametrize("signal, rate", [(1.0, 0.05), (3.0, 0.02), (2.0, 0.5)])
def test_rare_logistic_bayes_auc_across_parameters(signal, rate):
    from sklearn.metrics import roc_auc_score

    X, y = simulated.rare_logistic(400_000, seed=12, signal=signal, positive_rate=rate)
    truth = simulated.rare_logistic_bayes_auc(signal, rate)
    # ranking by the score b·x is Bayes-optimal: its sample AUC is the true AUC
    assert roc_auc_score(y, X[:, :5].sum(axis=1)) == pytest.approx(truth, abs=0.006)
    assert y.mean() == pytest.approx(rate, abs=4 * np.sqrt(rate * (1 - rate) / len(y)))


def test_rare_logistic_is_registered_with_its_parameters():
    data = load_dataset("rare_logistic")
    assert data.task == "binary" and data.X.shape == (1000, 10)
    assert data.params == {
        "n_samples": 1000,
        "seed": 0,
        "d": 10,
        "informative": 5,
        "signal": 2.0,
        "positive_rate": 0.05,
    }
    assert 0.03 <= data.minority_share <= 0.07
    wide = load_dataset("rare_logistic", n_samples=200, seed=3, d=30, informative=2)
    assert wide.X.shape == (200, 30)


# ---- bad simulation parameters (issue 12) --------------------------------------------


@pytest.mark.parametrize(
    "name, params, key",
    [
        ("waveform", {"n_samples": -10}, "n_samples"),  # was numpy's "negative dimensions"
        ("waveform", {"n_samples": 0}, "n_samples"),
        ("twonorm", {"n_samples": 10.5}, "n_samples"),
        ("led", {"n_samples": True}, "n_samples"),
        ("ringnorm", {"seed": -1}, "seed"),
        ("hastie_10_2", {"seed": "one"}, "seed"),
        ("threenorm", {"d": 0}, "d"),
        ("led", {"noise": 1.5}, "noise"),
        ("led", {"irrelevant": -2}, "irrelevant"),
        ("friedman2", {"noise": -1.0}, "noise"),
        ("rare_logistic", {"positive_rate": 0.0}, "positive_rate"),
        ("rare_logistic", {"positive_rate": 0.7}, "positive_rate"),
        ("rare_logistic", {"signal": -1.0}, "signal"),
        ("rare_logistic", {"informative": 12}, "informative"),
    ],
)
def test_bad_simulation_parameters_are_one_line_naming_the_parameter(name, params, key):
    from prunebench.datasets import DatasetError

    with pytest.raises(DatasetError) as err:
        load_dataset(name, **params)
    message = str(err.value)
    assert "\n" not in message
    assert f"The {key!r} parameter of dataset {name!r} must be" in message
    assert f"Got {params[key]!r} instead." in message


def test_negative_rows_in_a_study_exit_2_with_one_line(tmp_path):
    from click.testing import CliRunner

    from prunebench.cli import main

    study = tmp_path / "study.toml"
    study.write_text(
        'name = "bad-size"\nseed = 1\ndatasets = [{ name = "waveform", n_samples = -10 }]\n'
        '[outer]\nrepeats = 1\nfolds = 2\n[factors]\ncriterion = ["gini"]\n'
    )
    for command in (["check", str(study)], ["conduct", str(study)]):
        result = CliRunner().invoke(main, command)
        assert result.exit_code == 2, result.output
        lines = result.output.strip().splitlines()
        assert len(lines) == 1 and "'n_samples'" in lines[0] and "study.toml" in lines[0]
    assert sorted(p.name for p in tmp_path.iterdir()) == ["study.toml"]
