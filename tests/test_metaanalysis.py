"""Tests of the random-effects meta-analysis (prunebench.metaanalysis)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from helpers import statsmodels_fit
from scipy import stats as sps

from prunebench import metaanalysis
from prunebench.exceptions import InvalidParameterError

sm_meta = pytest.importorskip("statsmodels.stats.meta_analysis")

# Colditz et al. (1994) BCG vaccine trials as in DESIGN.md: treated TB+, TB-, control TB+, TB-
BCG = np.array(
    [
        [4, 119, 11, 128],
        [6, 300, 29, 274],
        [3, 228, 11, 209],
        [62, 13536, 248, 12619],
        [33, 5036, 47, 5761],
        [180, 1361, 372, 1079],
        [8, 2537, 10, 619],
        [505, 87886, 499, 87892],
        [29, 7470, 45, 7232],
        [17, 1699, 65, 1600],
        [186, 50448, 141, 27197],
        [5, 2493, 3, 2338],
        [27, 16886, 29, 17825],
    ],
    dtype=float,
)



# ---- the random-effects combination ----------------------------------------------------


def test_bcg_trials_match_the_published_dersimonian_laird_figures():
    a, b, c, d = BCG.T
    y = np.log(a / (a + b)) - np.log(c / (c + d))
    v = 1 / a - 1 / (a + b) + 1 / c - 1 / (c + d)
    r = metaanalysis.random_effects(y, v)
    # metafor's documentation (Viechtbauer 2010), DerSimonian-Laird fit of these 13 trials,
    # from memory: estimate -0.7141, SE 0.1787, tau^2 0.3088, I^2 92.12%
    assert r["estimate"] == pytest.approx(-0.7141, abs=5e-5)
    assert r["se_plain"] == pytest.approx(0.1787, abs=5e-5)
    assert r["tau2"] == pytest.approx(0.3088, abs=5e-5)
    assert r["i2"] == pytest.approx(0.9212, abs=5e-5)
    # statsmodels' combine_effects on the same data: the same figures, and its
    # "random effect wls" row is the Hartung-Knapp interval
    ref = sm_meta.combine_effects(y, v, method_re="dl", use_t=True)
    frame = ref.summary_frame()
    assert ref.tau2 == pytest.approx(r["tau2"], rel=1e-10)
    assert r["se"] == pytest.approx(frame.loc["random effect wls", "sd_eff"], rel=1e-10)
    assert r["ci_low"] == pytest.approx(frame.loc["random effect wls", "ci_low"], rel=1e-10)


@pytest.mark.filterwarnings("ignore::statsmodels.tools.sm_exceptions.InvalidTestWarning")
@pytest.mark.filterwarnings("ignore:invalid value encountered in sqrt:RuntimeWarning")
@pytest.mark.parametrize(
    "k, seed, spread",
    [(2, 0, 0.3), (3, 1, 0.1), (5, 2, 0.1), (12, 3, 0.1), (30, 4, 0.1), (5, 5, 0.0), (12, 6, 0.0)],
)
def test_random_effects_match_statsmodels_combine_effects(k, seed, spread):
    rng = np.random.default_rng(seed)
    v = rng.uniform(0.0005, 0.005, k)
    # spread 0: within-noise shrunk so Q < k - 1 and the truncation of tau^2 is exercised
    noise = 1.0 if spread > 0 else 0.3
    y = rng.normal(0.02, spread, k) + noise * rng.normal(0, np.sqrt(v))
    r = metaanalysis.random_effects(y, v)
    # statsmodels combine_effects(method_re="dl", use_t=True), row "random effect wls"
    # (Hartung-Knapp-Sidik-Jonkman, scale not truncated); "fixed effect wls" when tau^2 <= 0
    row, plain_row, ref, which = statsmodels_fit(y, v)
    assert (ref.tau2 > 0) == (spread > 0)  # both branches are exercised
    for ours, theirs in (
        (r["estimate"], row["eff"]),
        (r["ci_low"], row["ci_low"]),
        (r["ci_high"], row["ci_upp"]),
        (r["se"], row["sd_eff"]),
        (r["tau2"], max(ref.tau2, 0.0)),
        (r["i2"], max(ref.i2, 0.0)),
        (r["q"], ref.q),
    ):
        assert ours == pytest.approx(theirs, rel=1e-10, abs=1e-12)
    # prediction interval (Higgins, Thompson & Spiegelhalter 2009) from statsmodels' parts:
    # mu +- t_{k-2} sqrt(tau^2 + var(mu)), var(mu) = the plain random-effects variance
    if k >= 3:
        half = sps.t.ppf(0.975, k - 2) * math.sqrt(max(ref.tau2, 0) + plain_row["sd_eff"] ** 2)
        assert r["pi_low"] == pytest.approx(row["eff"] - half, rel=1e-10)
        assert r["pi_high"] == pytest.approx(row["eff"] + half, rel=1e-10)
    else:
        assert np.isnan(r["pi_low"]) and np.isnan(r["pi_high"])


def test_random_effects_many_equals_one_at_a_time():
    rng = np.random.default_rng(9)
    y, v = rng.normal(size=(6, 40)), rng.uniform(0.1, 1, (6, 40))
    many = metaanalysis.random_effects_many(y, v)
    for j in (0, 17, 39):
        one = metaanalysis.random_effects(y[:, j], v[:, j])
        for key in ("estimate", "ci_low", "ci_high", "tau2", "i2", "pi_low", "p_value"):
            assert many[key][j] == pytest.approx(one[key], rel=1e-12)


def test_zero_variances_take_the_smallest_positive_and_all_zero_is_exact():
    np.testing.assert_array_equal(metaanalysis.fill_zero_variances([0, 0.2, 0.1]), [0.1, 0.2, 0.1])
    # all zero and all equal: exact, the interval is the point
    r = metaanalysis.random_effects([0.0, 0.0, 0.0], [0.0, 0.0, 0.0])
    assert (r["estimate"], r["ci_low"], r["ci_high"], r["p_value"]) == (0.0, 0.0, 0.0, 1.0)
    # all zero but different: the v -> 0 limit is the plain t over data sets
    y = np.array([0.01, 0.03, 0.02, 0.06])
    r = metaanalysis.random_effects(y, np.zeros(4))
    lo, hi = sps.t.interval(0.95, 3, y.mean(), y.std(ddof=1) / 2)
    assert (r["ci_low"], r["ci_high"]) == (pytest.approx(lo), pytest.approx(hi))
    # ... which the limit of small equal variances approaches
    near = metaanalysis.random_effects(y, np.full(4, 1e-12))
    assert near["ci_low"] == pytest.approx(lo, rel=1e-6)
    with pytest.raises(InvalidParameterError, match="'v' parameter"):
        metaanalysis.random_effects(y, [0.0, 0.1, 0.1, 0.1])


# ---- simulation: coverage and the equivalence verdict ----------------------------------


def _simulate(k: int, mu: float, tau: float, reps: int, seed: int):
    """Per-data-set means and Nadeau-Bengio-free variances (iid folds) of a known truth."""
    rng = np.random.default_rng(seed)
    j = 10
    sigma = rng.uniform(0.01, 0.04, (k, reps))
    theta = mu + tau * rng.standard_normal((k, reps))
    y = theta + sigma / np.sqrt(j) * rng.standard_normal((k, reps))
    s2 = sigma**2 * rng.chisquare(j - 1, (k, reps)) / (j - 1)
    return y, s2 / j


@pytest.mark.parametrize("k", [5, 10, 20])
def test_hartung_knapp_coverage_and_equivalence_by_simulation(k):
    # By simulation (fixed seeds, 2000 replications): k data sets whose true effects
    # spread around mu with tau = 0.01 (between-data-set spread), each measured on 10
    # folds with its own noise (sd 0.01-0.04) and an estimated variance.
    # Band for coverage: 0.92-0.97. The binomial SE is 0.005; the Hartung-Knapp t
    # interval is exact only with known variances, and with variances estimated from
    # 10 folds runs up to ~2 points below nominal (we measured 0.928, 0.9455, 0.9455 for
    # k = 5, 10, 20). A too-wide interval fails the upper side: 1.5 times the width
    # covers more than 0.97 (we measured 0.9755, 0.9865, 0.9905); the plain
    # DerSimonian-Laird z interval falls below the band at k = 5 (we measured 0.868).
    reps = 2000
    y, v = _simulate(k, 0.0, 0.01, reps, seed=k)
    r = metaanalysis.random_effects_many(y, v)
    coverage = np.mean((r["ci_low"] <= 0.0) & (0.0 <= r["ci_high"]))
    assert 0.92 <= coverage <= 0.97
    too_wide = np.mean(np.abs(r["estimate"]) <= 1.5 * (r["ci_high"] - r["estimate"]))
    assert too_wide > 0.97
    if k == 5:
        z = 1.959964 * r["se_plain"]
        z_coverage = np.mean(np.abs(r["estimate"]) <= z)
        assert z_coverage < 0.92
    # the true mean sits on the margin: the 90% interval (TOST at 5%) must not fall inside
    # +-margin more than about 5% of the time (we measured 0.0415, 0.057, 0.0495)
    margin = 0.01
    y, v = _simulate(k, margin, 0.01, reps, seed=100 + k)
    r90 = metaanalysis.random_effects_many(y, v, alpha=0.10)
    wrongly_equivalent = np.mean((-margin < r90["ci_low"]) & (r90["ci_high"] < margin))
    assert wrongly_equivalent <= 0.07
